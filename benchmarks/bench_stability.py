"""Stability labels in bulk, with a brute-force speed scan as the in-run reference.

Figures:
* 9 x 9 Jacobians (three players, three actions each): `classify` labels per second and
  the share of `undecided`, against a naive scan of 200 random per-coordinate speed
  vectors per matrix (numpy eigenvalues) timed in the same run;
* 3 x 3 Jacobians: the exact criterion batched with `jax.vmap`, against a numpy loop of
  one eigenvalue computation per matrix.

    python benchmarks/bench_stability.py [--count N] [--exact-count M] [--quick]

All benchmarks at once, tables into benchmarks/RESULTS.md: ``python benchmarks/run_all.py``.
"""

import argparse
import time

import jax
import jax.numpy as jnp
import numpy as np

import _common as C
import equipoise  # noqa: F401  (float64 on)
from equipoise.stability import classify_batch
from equipoise.stability._exact import dstable_3x3


def random_hurwitz(rng, count, n):
    M = rng.normal(size=(count, n, n))
    shift = np.max(np.linalg.eigvals(M).real, axis=1) + rng.uniform(0.05, 1.0, size=count)
    return M - shift[:, None, None] * np.eye(n)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--count", type=int, default=10_000)
    ap.add_argument("--exact-count", type=int, default=100_000)
    ap.add_argument("--quick", action="store_true", help="a smoke run: 300 and 10,000 matrices")
    args = ap.parse_args()
    if args.quick:
        args.count, args.exact_count = 300, 10_000
    note = C.machine_note()
    rng = np.random.default_rng(0)

    Js = random_hurwitz(rng, args.count, 9)
    t = time.perf_counter()
    reports = classify_batch(Js, [3, 3, 3])
    t_ours = time.perf_counter() - t  # compilation included
    undecided = np.mean([r.coordinate_speeds.verdict == "undecided" or r.player_speeds.verdict == "undecided"
                         for r in reports])
    t = time.perf_counter()
    for J in Js[: max(1, args.count // 10)]:
        d = np.exp(rng.uniform(-5, 5, size=(200, 9)))
        np.linalg.eigvals(d[:, :, None] * J[None])
    t_scan = (time.perf_counter() - t) * args.count / max(1, args.count // 10)
    print(f"9x9 classify: {args.count / t_ours:.0f} labels/s, undecided {undecided:.2%}; "
          f"naive 200-speed scan {args.count / t_scan:.0f}/s; ratio {t_scan / t_ours:.2f}x")

    A = random_hurwitz(rng, args.exact_count, 3)
    run = jax.jit(jax.vmap(dstable_3x3))
    jax.block_until_ready(run(jnp.asarray(A[:8])))
    t = time.perf_counter()
    jax.block_until_ready(run(jnp.asarray(A)))
    t_exact = time.perf_counter() - t
    t = time.perf_counter()
    for a in A[: max(1, args.exact_count // 10)]:
        np.linalg.eigvals(a)
    t_eig = (time.perf_counter() - t) * 10
    print(f"3x3 exact criterion batched: {args.exact_count / t_exact:.0f}/s; "
          f"numpy eigenvalue loop {args.exact_count / t_eig:.0f}/s; ratio {t_eig / t_exact:.1f}x")
    rate, exact_rate = args.count / t_ours, args.exact_count / t_exact
    print(C.markdown_section(
        "stability", "Stability labels (`python benchmarks/bench_stability.py`)",
        [f"Random Hurwitz Jacobians (shifted Gaussian matrices). 9 x 9 with blocks [3, 3, 3]: `classify_batch`, "
         f"compilation included, against a naive scan of 200 random per-coordinate speed vectors per matrix (numpy "
         f"eigenvalues, timed on a tenth and extrapolated; proves nothing robust). 3 x 3: the exact criterion "
         f"batched with `jax.vmap` after compilation, against a numpy eigenvalue loop (a tenth, extrapolated). {note}."],
        ["figure", "equipoise", "in-run reference", "goal"],
        [[f"{args.count:,} random Hurwitz 9 x 9, blocks [3, 3, 3], compilation included",
          f"{rate:,.0f} labels/s, {undecided:.1%} `undecided`", f"naive 200-speed scan {args.count / t_scan:,.0f} "
          f"matrices/s ({t_scan / t_ours:.2f}x)",
          C.goal(rate >= 200 and undecided <= 0.01, ">= 200 labels/s, <= 1 % undecided")],
         [f"{args.exact_count:,} random Hurwitz 3 x 3, exact criterion batched", f"{exact_rate:,.0f}/s",
          f"numpy eigenvalue loop {args.exact_count / t_eig:,.0f}/s ({t_eig / t_exact:.1f}x)",
          C.goal(exact_rate >= 2000, ">= 2,000/s")]]))


if __name__ == "__main__":
    main()

"""Bulk solves of a small logit pricing game: equipoise under ``vmap`` against a scipy loop.

The game: three invented firms with three products each (9 prices, ``equipoise.logit_bertrand``,
invented mean utilities and price coefficient); ``--points`` cost vectors (default 100,000) from
a scrambled Sobol sample of the box [0.6, 1.6]^9. Every solve starts from ``p = c + 1/alpha``.

equipoise sides, each in its own fresh Python process whose whole wall time is the figure
(interpreter start-up, imports, tracing and compilation included; JAX's persistent compilation
cache is not used): ``jax.jit(jax.vmap(lambda x, c: equipoise.newton_solve(game, x,
game.theta({"c": c}))))`` over chunks of ``--chunk`` points (the last chunk padded to full size,
so one compilation serves all), and the same with ``equipoise.fixed_point_solve``. The child
also reports its own split: imports, first chunk (compilation), steady chunks.

In-run reference: a Python loop of ``scipy.optimize.root(method="hybr")`` on the same
share-divided first-order conditions in plain numpy (MINPACK's forward-difference Jacobian, as
a plain loop would do; a second row with the analytic numpy Jacobian), timed on
``--ref-points`` evenly spaced points (the faster of two passes) and extrapolated to all points.
Success rates are counted on all points for equipoise and on the subsample for the reference;
the max abs price difference is taken on the subsample points both solved.

    python benchmarks/bench_bulk.py [--points 100000] [--chunk 8192] [--ref-points 2000] [--quick]

All benchmarks at once, tables into benchmarks/RESULTS.md: ``python benchmarks/run_all.py``.
"""

import time

T_START = time.perf_counter()  # the child reports its imports from here

import argparse  # noqa: E402
import json  # noqa: E402
import os  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402

import numpy as np  # noqa: E402

import _common as C  # noqa: E402

# The invented market: mean utilities by product, price sensitivity; three firms, three products each.
DELTA = np.array([1.7, 1.2, 0.8, 1.5, 1.0, 0.6, 1.9, 0.9, 0.5])
ALPHA = 1.1
OWNER = ["aldine"] * 3 + ["brisk"] * 3 + ["corvel"] * 3
COST_BOX = (0.6, 1.6)
SEED = 11


def cost_sample(points):
    """The scrambled Sobol sample of cost vectors: the first ``points`` of ``2^m >= points`` points."""
    from scipy.stats import qmc

    m = max(0, int(np.ceil(np.log2(points))))
    u = qmc.Sobol(d=9, scramble=True, seed=SEED).random_base2(m)[:points]
    return COST_BOX[0] + (COST_BOX[1] - COST_BOX[0]) * u


# ---------------------------------------------------------------- the equipoise side (child process)
def child(args):
    import jax
    import jax.numpy as jnp

    import equipoise

    if args.cache:  # JAX's persistent compilation cache, as the command line uses it
        os.environ["EQUIPOISE_CACHE"] = args.cache
        from equipoise._compile_cache import use_compile_cache

        use_compile_cache()

    t_imports = time.perf_counter() - T_START
    costs = np.load(args.costs)
    game = equipoise.logit_bertrand(delta=DELTA, alpha=ALPHA, costs=np.ones(9), owner=OWNER)
    if args.child.startswith("fixed_point"):
        one = lambda x, c: equipoise.fixed_point_solve(game, x, game.theta({"c": c}))  # noqa: E731
    else:
        one = lambda x, c: equipoise.newton_solve(game, x, game.theta({"c": c}))  # noqa: E731
    t_jit = time.perf_counter()  # from here: tracing, compilation and all solves
    run = jax.jit(jax.vmap(one))
    P, B = len(costs), args.chunk
    xs = np.empty_like(costs)
    status = np.empty(P, dtype=np.int64)
    steps = np.empty(P, dtype=np.int64)
    chunk_s = []
    for lo in range(0, P, B):
        t = time.perf_counter()
        c = costs[lo:lo + B]
        k = len(c)
        if k < B:  # pad with copies of the last point: one compiled shape for every chunk
            c = np.vstack([c, np.repeat(c[-1:], B - k, axis=0)])
        out = run(jnp.asarray(c + 1.0 / ALPHA), jnp.asarray(c))
        xs[lo:lo + k] = np.asarray(out.x)[:k]
        status[lo:lo + k] = np.asarray(out.status)[:k]
        steps[lo:lo + k] = np.asarray(out.steps)[:k]
        chunk_s.append(time.perf_counter() - t)
    t_solves = time.perf_counter() - t_jit
    np.savez(args.out, x=xs, ok=status == equipoise.Status.success.code, steps=steps)
    print(json.dumps({"imports": t_imports, "from_jit": t_solves, "chunks": chunk_s,
                      "child": time.perf_counter() - T_START}))


# ---------------------------------------------------------------- main
def run_child(side, costs_file, out_file, chunk, cache=None):
    cmd = [sys.executable, os.path.abspath(__file__), "--child", side, "--costs", costs_file, "--out", out_file,
           "--chunk", str(chunk)] + (["--cache", cache] if cache else [])
    t = time.perf_counter()
    done = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t
    if done.returncode != 0:
        raise RuntimeError(f"the equipoise {side} process failed:\n{done.stderr[-2000:]}")
    info = json.loads(done.stdout.strip().splitlines()[-1])
    res = np.load(out_file)
    return wall, info, {k: res[k] for k in res.files}


def reference(costs, Omega, jac):
    prices = np.empty_like(costs)
    ok = np.empty(len(costs), dtype=bool)
    for i, c in enumerate(costs):
        prices[i], ok[i] = C.hybr(c, c + 1.0 / ALPHA, DELTA, ALPHA, Omega, jac)
    return prices, ok


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--points", type=int, default=100_000)
    ap.add_argument("--chunk", type=int, default=8192)
    ap.add_argument("--ref-points", type=int, default=2000)
    ap.add_argument("--quick", action="store_true", help="a smoke run: 8,192 points, chunk 2,048, 300 reference points")
    ap.add_argument("--child", choices=("dense", "fixed_point"), help=argparse.SUPPRESS)
    ap.add_argument("--cache", help=argparse.SUPPRESS)
    ap.add_argument("--costs", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        return child(args)
    if args.quick:
        args.points, args.chunk, args.ref_points = 8192, 2048, 300
    note = C.machine_note()

    folder = tempfile.mkdtemp(prefix="bench-bulk-")
    try:
        costs = cost_sample(args.points)
        costs_file = os.path.join(folder, "costs.npy")
        np.save(costs_file, costs)
        sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
        have = C.equipoise_sides()
        ours = {}
        for side in ("dense", "fixed_point"):
            if side in have:
                ours[side] = run_child(side, costs_file, os.path.join(folder, f"{side}.npz"), args.chunk)
            else:
                print(f"{C.SIDE_LABELS[side]}: not available in this equipoise")
        if "fixed_point" in have:  # a repeated run: the persistent compilation cache filled by a first one
            cache = os.path.join(folder, "jax-cache")
            run_child("fixed_point", costs_file, os.path.join(folder, "fill.npz"), args.chunk, cache)
            ours["fixed_point_warm"] = run_child("fixed_point", costs_file, os.path.join(folder, "warm.npz"),
                                                 args.chunk, cache)
    finally:
        shutil.rmtree(folder, ignore_errors=True)

    Omega = C.ownership(OWNER)
    pick = np.unique(np.linspace(0, args.points - 1, min(args.ref_points, args.points)).round().astype(int))
    refs = {}
    for jac in (False, True):
        best = np.inf
        for _ in range(2):  # the faster of two passes: a busy moment does not slow the reference
            t = time.perf_counter()
            p, ok = reference(costs[pick], Omega, jac)
            best = min(best, time.perf_counter() - t)
        refs[jac] = (best * args.points / len(pick), best, p, ok)
    t_ref, _, ref_p, ref_ok = refs[False]

    print(f"{args.points} cost points, 9 prices (3 firms x 3 products), chunk {args.chunk}")
    rows = []
    for jac in (False, True):
        t_all, t_sub, p, ok = refs[jac]
        label = ("scipy root hybr loop, analytic Jacobian" if jac
                 else "scipy root hybr loop, forward differences (the reference)")
        diff = float(np.max(np.abs(p[ok & ref_ok] - ref_p[ok & ref_ok]))) if (ok & ref_ok).any() else np.nan
        print(f"  {label}: {t_sub:.2f} s for {len(pick)} points -> {t_all:.1f} s extrapolated, "
              f"success {ok.mean():.2%}")
        rows.append([label, f"{t_all:.1f} s (extrapolated from {len(pick):,} points: {t_sub:.2f} s)",
                     f"{args.points / t_all:,.0f}", f"{1e6 * t_sub / len(pick):.0f} us", f"{ok.mean():.2%} of {len(pick):,}",
                     "" if not jac else f"{diff:.1e}", f"{t_ref / t_all:.2f}x"])
    for side in ("dense", "fixed_point", "fixed_point_warm"):
        label = {"dense": "equipoise jit(vmap(newton_solve))", "fixed_point": "equipoise jit(vmap(fixed_point_solve))",
                 "fixed_point_warm": "equipoise jit(vmap(fixed_point_solve)), persistent compilation cache warm "
                                     "(a second run)"}[side]
        if side not in ours:
            rows.append([label, "not available", "", "", "", "", ""])
            continue
        wall, info, res = ours[side]
        chunks = np.array(info["chunks"])
        steady = float(np.median(chunks[1:])) if chunks.size > 1 else float(chunks[0])
        both = res["ok"][pick] & ref_ok
        diff = float(np.max(np.abs(res["x"][pick][both] - ref_p[both]))) if both.any() else np.nan
        print(f"  {label}: {wall:.1f} s whole process [start-up {wall - info['child']:.1f} s, imports "
              f"{info['imports']:.1f} s, first chunk (compilation) {chunks[0]:.1f} s, {chunks.size} chunks, steady "
              f"{1e6 * steady / args.chunk:.1f} us/point], success {res['ok'].mean():.3%}, median steps "
              f"{np.median(res['steps']):.0f}, max |dp| vs reference {diff:.1e} on {both.sum()} points; "
              f"{t_ref / wall:.1f}x the reference's speed")
        rows.append([label, f"{wall:.1f} s whole process (imports {info['imports']:.1f} s, first chunk with compilation "
                            f"{chunks[0]:.1f} s)",
                     f"{args.points / wall:,.0f}", f"{1e6 * steady / args.chunk:.1f} us", f"{res['ok'].mean():.3%}",
                     f"{diff:.1e}", f"**{t_ref / wall:.1f}x**"])
    print(C.markdown_section(
        "bulk", f"{args.points:,} solves of a 9-price game (`python benchmarks/bench_bulk.py`)",
        [f"Logit Bertrand, 3 invented firms x 3 products, alpha {ALPHA}; {args.points:,} cost vectors from a scrambled "
         f"Sobol sample of [{COST_BOX[0]}, {COST_BOX[1]}]^9; every solve starts at p = c + 1/alpha. equipoise: "
         f"`jax.jit(jax.vmap(...))` over chunks of {args.chunk:,} points, each side in a fresh Python process timed "
         f"whole (start-up, imports, compilation included; no persistent compilation cache except in the row that says so, "
         f"which repeats the run with the cache a first run filled). Reference: a Python "
         f"loop of `scipy.optimize.root(method=\"hybr\")` on the same first-order conditions in numpy, timed on "
         f"{len(pick):,} evenly spaced points (faster of two passes) and **extrapolated**. Steady: per point after "
         f"compilation (median chunk for equipoise). Price differences: against the forward-difference hybr loop on "
         f"the subsample points both solved. {note}."],
        ["side", f"time for {args.points:,} points", "points/s", "steady per point", "success",
         "max abs price diff", "speed vs reference"],
        rows))


if __name__ == "__main__":
    main()

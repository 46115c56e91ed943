"""One large logit pricing game: equipoise's solvers against scipy and a numpy fixed point.

The game: 20 invented firms with 10 products each (200 prices), logit demand with one price
coefficient (``equipoise.logit_bertrand``; invented costs and mean utilities from
``_common.invented_market``, markups about 0.85, margins about 30 %). Every side starts from
``p = c + 1/alpha``.

equipoise sides, each ``jax.jit``-ed: ``newton_solve`` with ``linear="dense"`` and
``linear="krylov"``, and ``fixed_point_solve``. The first call (tracing and compilation
included) is reported on its own; the figure is the median of repeated calls after it.

In-run references, plain numpy / scipy, median of repeated calls:

* ``scipy.optimize.root(method="hybr")`` on the share-divided first-order conditions, once with
  the analytic numpy Jacobian (MINPACK hybrj) and once without (hybrd's forward differences);
  the goal is judged against the faster of the two;
* the markup fixed point of Morrow & Skerlos (2011), ``m <- 1/alpha + Omega (s * m)``, iterated
  until the first-order residual is below 1e-12; its answer is the reference for agreement.

Goals: at least 5x faster than hybr; at most 2x the numpy fixed point's time. Every answer must
agree with the reference to 1e-8 (max abs price difference).

    python benchmarks/bench_large.py [--firms 20] [--products 10] [--budget SECONDS] [--quick]

All benchmarks at once, tables into benchmarks/RESULTS.md: ``python benchmarks/run_all.py``.
"""

import argparse
import time

import numpy as np

import _common as C


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--firms", type=int, default=20)
    ap.add_argument("--products", type=int, default=10)
    ap.add_argument("--budget", type=float, default=3.0, help="seconds of repeated calls per side (median)")
    ap.add_argument("--quick", action="store_true", help="a smoke run: shorter timing budget")
    args = ap.parse_args()
    budget = 0.5 if args.quick else args.budget
    note = C.machine_note()

    mk = C.invented_market(args.firms, args.products)
    c, delta, alpha, Omega = mk["c"], mk["delta"], mk["alpha"], mk["Omega"]
    n = c.size
    x0 = c + 1.0 / alpha

    # ---- references
    ref_p, ref_ok, ref_iters = C.markup_fixed_point(c, delta, alpha, Omega)
    t_fp, r_fp = C.median_time(lambda: C.markup_fixed_point(c, delta, alpha, Omega), budget=budget)
    rows_ref = [("numpy markup fixed point (Morrow-Skerlos), the agreement reference", t_fp, r_fp,
                 f"{ref_iters} iterations", ref_ok, 0.0)]
    t_hybr = {}
    for jac in (True, False):
        p, ok = C.hybr(c, x0, delta, alpha, Omega, jac)
        t, r = C.median_time(lambda: C.hybr(c, x0, delta, alpha, Omega, jac), budget=budget)
        t_hybr[jac] = t
        label = "scipy root hybr, analytic numpy Jacobian" if jac else "scipy root hybr, forward differences"
        rows_ref.append((label, t, r, "", ok, float(np.max(np.abs(p - ref_p)))))
    t_best_hybr = min(t_hybr.values())

    # ---- equipoise
    import jax
    import jax.numpy as jnp

    import equipoise

    game = equipoise.logit_bertrand(delta=delta, alpha=alpha, costs=c, owner=mk["owner"])
    have = C.equipoise_sides()
    xj, cj = jnp.asarray(x0), jnp.asarray(c)
    success = equipoise.Status.success.code
    rows_ours = []
    for side in ("dense", "krylov", "fixed_point"):
        if side not in have:
            rows_ours.append((side, None))
            print(f"{C.SIDE_LABELS[side]}: not available in this equipoise")
            continue
        f = C.jitted_solver(game, side)
        t = time.perf_counter()
        out = jax.block_until_ready(f(xj, cj))
        t_first = time.perf_counter() - t
        t_med, reps = C.median_time(lambda: jax.block_until_ready(f(xj, cj)), budget=budget)
        diff = float(np.max(np.abs(np.asarray(out.x) - ref_p)))
        rows_ours.append((side, dict(first=t_first, median=t_med, reps=reps, steps=int(out.steps),
                                     ok=int(out.status) == success, status=equipoise.Status.from_code(int(out.status)).name,
                                     residual=float(out.residual), diff=diff)))

    # ---- printed figures
    print(f"logit Bertrand, {args.firms} firms x {args.products} products = {n} prices, alpha {alpha}; "
          f"equilibrium markups {np.min(ref_p - c):.3f}..{np.max(ref_p - c):.3f}, "
          f"outside share {1 - C.shares(ref_p, delta, alpha).sum():.3f}")
    for label, t, reps, extra, ok, diff in rows_ref:
        print(f"  {label}: {C.fmt_time(t)} (median of {reps}), success {ok}, max |dp| vs reference {diff:.1e} {extra}")
    table = []
    for label, t, reps, extra, ok, diff in rows_ref:
        table.append([label, "", f"{C.fmt_time(t)} ({reps} calls)", extra, f"{diff:.1e}",
                      f"{t_best_hybr / t:.2f}x", f"{t / t_fp:.2f}x", ""])
    all_agree = True
    for side, r in rows_ours:
        if r is None:
            table.append([C.SIDE_LABELS[side], "not available", "", "", "", "", "", ""])
            continue
        agree = r["ok"] and r["diff"] <= 1e-8
        all_agree &= agree
        speed_hybr = t_best_hybr / r["median"]
        over_fp = r["median"] / t_fp
        print(f"  {C.SIDE_LABELS[side]}: first call {C.fmt_time(r['first'])}, then {C.fmt_time(r['median'])} "
              f"(median of {r['reps']}), {r['steps']} steps, status {r['status']}, residual {r['residual']:.1e}, "
              f"max |dp| vs reference {r['diff']:.1e} ({'agrees' if agree else 'DISAGREES'} to 1e-8); "
              f"{speed_hybr:.1f}x faster than the faster hybr (goal >= 5x), {over_fp:.2f}x the numpy fixed "
              f"point's time (goal <= 2x)")
        table.append([C.SIDE_LABELS[side], C.fmt_time(r["first"]), f"{C.fmt_time(r['median'])} ({r['reps']} calls)",
                      f"{r['steps']} steps, {r['status']}", f"{r['diff']:.1e}" + ("" if agree else " **> 1e-8**"),
                      f"{speed_hybr:.2f}x", f"{over_fp:.2f}x",
                      C.goal(speed_hybr >= 5, ">= 5x hybr") + "; " + C.goal(over_fp <= 2, "<= 2x numpy fixed point")])
    print(C.markdown_section(
        "large", f"One large game: {n} prices (`python benchmarks/bench_large.py`)",
        [f"Logit Bertrand, {args.firms} invented firms x {args.products} products, alpha {alpha}, equilibrium markups "
         f"{np.min(ref_p - c):.2f} to {np.max(ref_p - c):.2f}; every side starts from p = c + 1/alpha. equipoise "
         f"sides jitted: first call (compilation included) apart, then the median of repeated calls "
         f"({budget:g} s budget per side). References in the same run: scipy `root(method=\"hybr\")` on the "
         f"share-divided first-order conditions in numpy, with the analytic Jacobian and with forward differences "
         f"(speed ratios are against the faster: {C.fmt_time(t_best_hybr)}); the Morrow-Skerlos markup fixed point "
         f"in numpy to a first-order residual of 1e-12 ({C.fmt_time(t_fp)}), whose prices are the agreement "
         f"reference. {note}."],
        ["side", "first call", "per solve (median)", "work", "max abs price diff", "speed vs faster hybr",
         "time / numpy fixed point time", "goals"],
        table,
        [f"All equipoise answers agree to 1e-8: {'yes' if all_agree else '**no**'}."]))


if __name__ == "__main__":
    main()

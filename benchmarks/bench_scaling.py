"""Time per solve against the number of prices: equipoise's solvers and the numpy references.

Games: invented logit markets (``_common.invented_market``, the same recipe as bench_large.py)
of 2 x 5, 5 x 10, 20 x 10 and 50 x 10 firms x products (10, 50, 200, 500 prices), each side
starting from ``p = c + 1/alpha``.

Sides: ``newton_solve(linear="dense")``, ``newton_solve(linear="krylov")`` and
``fixed_point_solve``, each ``jax.jit``-ed (median of repeated calls after a first, compiling
call); references in the same run: the Morrow-Skerlos markup fixed point in plain numpy (also
the agreement reference) and ``scipy.optimize.root(method="hybr")`` with the analytic numpy
Jacobian. For each side the log-log slope of time against n is fitted by least squares over the
sizes it solved: a dense Newton step is bounded by about n^3 (the LU factorisation), though at
these sizes fixed per-call costs flatten the slope.

    python benchmarks/bench_scaling.py [--sizes 2x5,5x10,20x10,50x10] [--budget SECONDS] [--quick]

All benchmarks at once, tables into benchmarks/RESULTS.md: ``python benchmarks/run_all.py``.
"""

import argparse
import time

import numpy as np

import _common as C

SIDES = ("dense", "krylov", "fixed_point")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="2x5,5x10,20x10,50x10", help="firms x products, comma separated")
    ap.add_argument("--budget", type=float, default=2.0, help="seconds of repeated calls per side and size")
    ap.add_argument("--quick", action="store_true", help="a smoke run: three sizes, short budget")
    args = ap.parse_args()
    sizes = [tuple(int(v) for v in s.split("x")) for s in args.sizes.split(",")]
    budget = args.budget
    if args.quick:
        sizes, budget = sizes[:3], 0.3
    note = C.machine_note()

    import jax
    import jax.numpy as jnp

    import equipoise

    have = C.equipoise_sides()
    success = equipoise.Status.success.code
    ns = []
    times = {k: [] for k in SIDES + ("numpy_fp", "hybr")}
    firsts = {k: [] for k in SIDES}
    details = {k: [] for k in SIDES + ("numpy_fp", "hybr")}
    worst = {k: 0.0 for k in SIDES + ("hybr",)}
    failures = []
    for firms, products in sizes:
        mk = C.invented_market(firms, products)
        c, delta, alpha, Omega = mk["c"], mk["delta"], mk["alpha"], mk["Omega"]
        n = c.size
        ns.append(n)
        x0 = c + 1.0 / alpha
        ref_p, ok, iters = C.markup_fixed_point(c, delta, alpha, Omega)
        t, _ = C.median_time(lambda: C.markup_fixed_point(c, delta, alpha, Omega), budget=budget)
        times["numpy_fp"].append(t)
        details["numpy_fp"].append(f"{iters} it")
        p, ok_h = C.hybr(c, x0, delta, alpha, Omega, True)
        t, _ = C.median_time(lambda: C.hybr(c, x0, delta, alpha, Omega, True), budget=budget)
        times["hybr"].append(t)
        details["hybr"].append("" if ok_h else "failed")
        worst["hybr"] = max(worst["hybr"], float(np.max(np.abs(p - ref_p))))

        game = equipoise.logit_bertrand(delta=delta, alpha=alpha, costs=c, owner=mk["owner"])
        xj, cj = jnp.asarray(x0), jnp.asarray(c)
        for side in SIDES:
            if side not in have:
                times[side].append(np.nan)
                firsts[side].append(np.nan)
                details[side].append("")
                continue
            f = C.jitted_solver(game, side)
            t = time.perf_counter()
            out = jax.block_until_ready(f(xj, cj))
            firsts[side].append(time.perf_counter() - t)
            t, _ = C.median_time(lambda: jax.block_until_ready(f(xj, cj)), budget=budget)
            times[side].append(t)
            details[side].append(f"{int(out.steps)} st")
            diff = float(np.max(np.abs(np.asarray(out.x) - ref_p)))
            worst[side] = max(worst[side], diff)
            if int(out.status) != success or diff > 1e-8:
                failures.append(f"{C.SIDE_LABELS[side]} at n = {n}: status "
                                f"{equipoise.Status.from_code(int(out.status)).name}, max |dp| {diff:.1e}")
        print(f"n = {n} ({firms} x {products}): " + ", ".join(
            f"{k} {C.fmt_time(times[k][-1])}" for k in times), flush=True)

    logn = np.log(np.array(ns, dtype=float))

    def slope(ts):
        ts = np.asarray(ts, dtype=float)
        ok = np.isfinite(ts)
        if ok.sum() < 2:
            return "n/a"
        return f"{np.polyfit(logn[ok], np.log(ts[ok]), 1)[0]:.2f}"

    labels = dict(C.SIDE_LABELS, numpy_fp="numpy markup fixed point (reference)",
                  hybr="scipy root hybr, analytic Jacobian (reference)")
    rows = []
    for k in SIDES + ("numpy_fp", "hybr"):
        if k in SIDES and k not in have:
            rows.append([labels[k]] + ["not available"] * len(ns) + ["", "", ""])
            continue
        cells = [f"{C.fmt_time(t)} ({d})" if d else C.fmt_time(t) for t, d in zip(times[k], details[k])]
        first = ", ".join(C.fmt_time(t) for t in firsts[k]) if k in SIDES else ""
        agree = f"{worst[k]:.1e}" if k in worst else "reference"
        rows.append([labels[k]] + cells + [slope(times[k]), first, agree])
        print(f"{labels[k]}: log-log slope {slope(times[k])}")
    for line in failures:
        print("DISAGREEMENT: " + line)
    notes = ["Disagreements (status not success or max abs price difference above 1e-8): "
             + ("; ".join(failures) if failures else "none") + "."]
    print(C.markdown_section(
        "scaling", "Time per solve against the number of prices (`python benchmarks/bench_scaling.py`)",
        [f"Invented logit markets (firms x products {', '.join(f'{a}x{b}' for a, b in sizes)}), start p = c + 1/alpha; "
         f"median of repeated calls ({budget:g} s budget per cell) after a first, compiling call; 'st' Newton or "
         f"fixed-point steps, 'it' numpy fixed-point iterations. Slope: least-squares fit of log time against log n "
         f"(a dense Newton step is bounded by about n^3; fixed per-call costs flatten it at small n). Agreement: the "
         f"largest price difference from the numpy fixed point over all sizes. {note}."],
        ["side"] + [f"n = {n}" for n in ns] + ["log-log slope", "first calls (compilation)", "max abs price diff"],
        rows, notes))


if __name__ == "__main__":
    main()

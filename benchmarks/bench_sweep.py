"""A cost sweep of a 9-price logit game, end to end: ``equipoise.sweeps.sweep`` against a scipy loop.

The game: three invented dairies of the Orrin valley, three yoghurts each, logit demand
(``equipoise.logit_bertrand``), 9 prices. The sweep: a scrambled Sobol sample of ``--points``
cost vectors from the box [0.6, 1.6]^9.

equipoise side: ``sweep(spec, store)`` (solve, verify including the global deviation search,
equal-speed label, SQLite store), each time in a fresh Python process, so the wall time includes
interpreter start-up, imports and compilation: first with an empty compilation cache, then
(unless ``--no-warm``) the same sweep into a new store with the cache the first run filled.

In-run reference: for each point, ``scipy.optimize.root(method="hybr")`` on the same
first-order conditions (plain numpy; the share-rescaled form the equipoise solver also uses),
from the same kind of start (the same scrambled Sobol point of the search box
[c, c + 10/alpha]), then a forward-difference Jacobian of the pseudo-gradient
(``scipy.optimize.approx_fprime``) and its eigenvalues (``numpy.linalg.eigvals``). It is timed
on an evenly spaced subsample of ``--ref-points`` points (the faster of two passes) and its
per-point rate extrapolated to the full sweep. It does not search for profitable deviations;
equipoise does. A secondary reference adds that search with scipy (L-BFGS-B per firm from the
point and the same number of Sobol starts), timed on ``--dev-ref-points`` points.

    python benchmarks/bench_sweep.py [--points N] [--ref-points R] [--batch B] [--starts S]
                                     [--deviation-starts D] [--engine E] [--workers W] [--no-warm] [--profile]

``--profile`` adds, in this process, the time split of ``equipoise.sweeps._batch.solve_batch``
per point (region, Newton, verification and within it the deviation search, labels, the rest,
store) measured on a few batches after compilation.

Defaults (batch 256, starts 1, deviation_starts 1) are the tuned settings: the deviation search
dominates and runs fastest per point at batch 256 (most likely because its working set stays
in cache; at batch 1024 it is about 1.4x slower per point), one Newton start solves every point of this game, and one
Sobol deviation start (plus the point itself) per player is the smallest search the spec allows.
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
from scipy.optimize import approx_fprime, minimize, root  # noqa: E402
from scipy.stats import qmc  # noqa: E402

# The invented market: mean utilities by yoghurt, price sensitivity, shoppers.
DELTA = [1.6, 1.1, 0.7, 1.4, 1.0, 0.5, 1.8, 0.9, 0.4]
ALPHA = 1.3
SIZE = 500.0
OWNER = ["hollin"] * 3 + ["marrow"] * 3 + ["tessel"] * 3
COST_BOX = (0.6, 1.6)
BOX = 10.0  # the logit family's search box: [c, c + BOX / alpha]

MODEL = f'''"""Yoghurt pricing in the invented Orrin valley: three dairies, three yoghurts each (benchmark model)."""

from equipoise import logit_bertrand

game = logit_bertrand(
    delta={DELTA!r},
    alpha={ALPHA!r},
    costs={[1.0] * 9!r},
    owner={OWNER!r},
    market_size={SIZE!r},
)
'''


def make_spec(model, points, batch, starts, deviation_starts):
    from equipoise.sweeps import Axis, SweepSpec

    axes = tuple(Axis(f"c[{j}]", low=COST_BOX[0], high=COST_BOX[1]) for j in range(9))
    return SweepSpec(model=model, axes=axes, sample=points, starts=starts, labels="equal",
                     deviation_starts=deviation_starts, batch=batch)


def child(args):
    """The equipoise side, run as its own process: one sweep call, a JSON line of its outcome."""
    from equipoise.sweeps import sweep

    spec = make_spec(args.model, args.points, args.batch, args.starts, args.deviation_starts)
    t_imports = time.perf_counter() - T_START
    res = sweep(spec, args.store, engine=args.engine, workers=args.workers, progress=False)
    print(json.dumps({"engine": args.engine, "seconds": res.seconds, "counts": res.counts, "verdicts": res.verdicts,
                      "stored": res.stored, "imports": t_imports, "child": time.perf_counter() - T_START}))


# ---------------------------------------------------------------- the reference, plain numpy
_SAME = np.equal.outer(OWNER, OWNER).astype(float)
_DELTA = np.array(DELTA)


def shares(p):
    v = _DELTA - ALPHA * p
    top = max(v.max(), 0.0)
    e = np.exp(v - top)
    return e / (np.exp(-top) + e.sum())


def foc(p, c):
    """dU_f/dp_j divided by M s_j > 0: 1 - alpha m_j + alpha sum_{k in f} m_k s_k."""
    s = shares(p)
    m = p - c
    return 1.0 - ALPHA * m + ALPHA * (_SAME @ (m * s))


def pseudo_gradient(p, c):
    """dU_f/dp_j = M s_j (1 - alpha m_j + alpha sum_{k in f} m_k s_k)."""
    return SIZE * shares(p) * foc(p, c)


def reference(costs, unit):
    """Prices, equal-speed spectral abscissa and success flag per cost vector."""
    prices = np.empty_like(costs)
    abscissa = np.empty(len(costs))
    ok = np.empty(len(costs), dtype=bool)
    for i, c in enumerate(costs):
        r = root(foc, c + BOX / ALPHA * unit, args=(c,), method="hybr", options={"xtol": 1e-12})
        J = approx_fprime(r.x, pseudo_gradient, 1.49e-8 * (1.0 + np.abs(r.x)), c)
        prices[i], abscissa[i], ok[i] = r.x, np.max(np.linalg.eigvals(J).real), r.success
    return prices, abscissa, ok


def profits(p, c):
    """Each firm's profit (market size M): M sum_{k in f} (p_k - c_k) s_k."""
    return SIZE * (_SAME[::3] @ ((p - c) * shares(p)))  # rows 0, 3, 6: each firm's products


def deviation_check(prices, costs, unit_dev):
    """Best gain of each firm's own-price maximisation (L-BFGS-B on its search box, the rivals held fixed)
    from the point itself and the scaled ``unit_dev`` starts: the global deviation search of equipoise's
    verification done with scipy, for the secondary reference figure."""
    gains = np.empty((len(costs), 3))
    for i, (x, c) in enumerate(zip(prices, costs)):
        lo, hi = c, c + BOX / ALPHA
        base = profits(x, c)
        for f in range(3):
            own = slice(3 * f, 3 * f + 3)

            def neg(z, f=f, own=own):
                y = x.copy()
                y[own] = z
                return -profits(y, c)[f], -pseudo_gradient(y, c)[own]

            best = base[f]
            for start in np.vstack([x[None], lo + (hi - lo) * unit_dev]):
                r = minimize(neg, start[own], jac=True, method="L-BFGS-B", bounds=list(zip(lo[own], hi[own])))
                best = max(best, -r.fun)
            gains[i, f] = best - base[f]
    return gains


# ---------------------------------------------------------------- the time split
def profile(model, args, batches):
    """Seconds per point of each phase of ``solve_batch``, after compiling on a first batch."""
    import jax
    import jax.numpy as jnp

    import equipoise
    from equipoise._loader import load_game
    from equipoise._sampling import unit_sample
    from equipoise.sweeps import Store
    from equipoise.sweeps import _batch

    B = args.batch
    spec = make_spec(model, B * (batches + 1), B, args.starts, args.deviation_starts).validate()
    game = load_game(model)
    base = spec.check_game(game)
    pts = spec.points()
    newton, region, checker = _batch._compiled(game, spec)
    # The same verification without the deviation search, to split the search off (measurement only).
    no_search = jax.jit(jax.vmap(lambda x, th, u: (equipoise.verify(game, x, th, unit_starts=u, ascent_steps=0),
                                                    game.payoff_vector(x, th)), in_axes=(0, 0, None)))
    eig = jax.jit(jax.vmap(lambda J: jnp.max(jnp.real(jnp.linalg.eigvals(J)))))
    unit = unit_sample(args.starts, game.n, spec.seed)
    unit_dev = jnp.asarray(unit_sample(args.deviation_starts, game.n, spec.seed + 1))
    folder = tempfile.mkdtemp(prefix="bench-sweep-profile-")
    db = Store.create_or_resume(os.path.join(folder, "profile.sqlite"), fingerprint="profile", spec=spec.to_dict(),
                                model=model, players=dict(zip(game.players, game.sizes)),
                                coordinates=[game.coordinate_name(k) for k in range(game.n)])
    keys = ("region", "newton", "verify", "verify without search", "labels (eigenvalues)", "solve_batch", "store")
    times = {k: [] for k in keys}
    first = {}
    for b in range(batches + 1):
        idx = spec.batch_indices(b)
        th = {k: jnp.asarray(v) for k, v in spec.thetas(base, pts[idx]).items()}
        reps = 1 if b == 0 else 2  # after compilation, the faster of two calls of each phase
        t = {}

        def timed(key, f):
            best = np.inf
            for _ in range(reps):
                s = time.perf_counter()
                out = jax.block_until_ready(f())
                best = min(best, time.perf_counter() - s)
            t[key] = best
            return out

        lo, hi = (np.asarray(v) for v in timed("region", lambda: region(th)))
        x0 = jnp.asarray(lo[:, None, :] + (hi - lo)[:, None, :] * unit[None])
        xs = jnp.asarray(np.asarray(timed("newton", lambda: newton(x0, th)).x[:, 0, :]))
        v, _ = timed("verify", lambda: checker(xs, th, unit_dev))
        timed("verify without search", lambda: no_search(xs, th, unit_dev))
        timed("labels (eigenvalues)", lambda: eig(v.jacobian))
        records = timed("solve_batch", lambda: _batch.solve_batch(game, spec, base, idx, pts[idx]))
        s = time.perf_counter()
        db.write_batch(b, records, 0.0, "profile")
        t["store"] = time.perf_counter() - s
        if b == 0:
            first = t
        else:
            for k in keys:
                times[k].append(t[k])
    db.close()
    shutil.rmtree(folder, ignore_errors=True)
    # Medians over batches: the machine is shared, and one slow moment should not move one phase.
    per = {k: float(np.median(times[k])) / B for k in keys}
    return per, first


def print_profile(per, first, batch, deviation_starts):
    us = {k: 1e6 * v for k, v in per.items()}
    search = us["verify"] - us["verify without search"]
    rest = us["solve_batch"] - us["region"] - us["newton"] - us["verify"] - us["labels (eigenvalues)"]
    whole = us["solve_batch"] + us["store"]
    print(f"time split per point, batch {batch}, deviation_starts {deviation_starts} "
          f"(after compilation; medians over batches "
          f"of the faster of two calls; solve_batch timed as a whole, its compiled phases separately, the rest "
          f"by difference):")
    rows = [("region", us["region"]), ("Newton (vmapped, all starts)", us["newton"]),
            ("verification", us["verify"]), ("  of which the global deviation search", search),
            ("  of which residual, Jacobian, own-Hessian test", us["verify without search"]),
            ("equal-speed label (eigenvalues)", us["labels (eigenvalues)"]),
            ("Python bookkeeping in solve_batch (rest)", rest), ("store (SQLite write)", us["store"])]
    for name, value in rows:
        print(f"  {name:<48} {value:9.1f} us  {value / whole:6.1%}")
    print(f"  {'total (solve_batch + store)':<48} {whole:9.1f} us")
    print("  first batch (compilation), s: " + ", ".join(f"{k} {v:.1f}" for k, v in first.items()))


# ---------------------------------------------------------------- main
def run_sweep(args, model, store, cache):
    """One fresh-process sweep; its wall time and the child's JSON line (with the store's per-batch seconds)."""
    from equipoise.sweeps import Store

    env = dict(os.environ, EQUIPOISE_CACHE=cache)
    cmd = [sys.executable, os.path.abspath(__file__), "--child", "--model", model, "--store", store,
           "--points", str(args.points), "--batch", str(args.batch), "--starts", str(args.starts),
           "--deviation-starts", str(args.deviation_starts), "--engine", args.engine]
    if args.workers:
        cmd += ["--workers", str(args.workers)]
    t = time.perf_counter()
    done = subprocess.run(cmd, env=env, capture_output=True, text=True)
    wall = time.perf_counter() - t
    if done.returncode != 0:
        sys.exit(f"the equipoise sweep process failed:\n{done.stderr}")
    res = json.loads(done.stdout.strip().splitlines()[-1])
    db = Store.read(store)
    res["batch_seconds"] = [s for _, s in db.conn.execute("SELECT id, seconds FROM batches ORDER BY id")]
    db.close()
    return wall, res


def describe(label, wall, res, points, batch):
    """One line of the wall-time split of a fresh-process sweep; the seconds not spent in steady batches."""
    bs = np.array(res["batch_seconds"])
    steady = float(np.median(bs[1:])) if bs.size > 1 else float(bs[0])
    first_extra = float(bs[0] - steady)  # compilation, mostly
    outside = res["seconds"] - float(bs.sum())  # model load, checks, store writes
    fixed = wall - steady * bs.size
    if res.get("engine", "inprocess") != "inprocess":  # batches overlap in time: only the wall time means anything
        print(f"equipoise sweep(), fresh process, {label}, engine {res['engine']}: {wall:.1f} s wall = "
              f"{points / wall:.0f} points/s [interpreter start-up {wall - res['child']:.1f} s, imports "
              f"{res['imports']:.1f} s, {bs.size} batches summing to {bs.sum():.1f} s of worker time]")
        return float("nan")
    print(f"equipoise sweep(), fresh process, {label}: {wall:.1f} s wall = {points / wall:.0f} points/s "
          f"[interpreter start-up {wall - res['child']:.1f} s, imports {res['imports']:.1f} s, "
          f"first batch over a steady one (compilation) {first_extra:.1f} s, "
          f"{bs.size} batches {bs.sum():.1f} s (steady {1e6 * steady / batch:.0f} us/point), "
          f"sweep() outside batches (load, checks, store writes) {outside:.1f} s; "
          f"everything but steady batches (start-up, imports, compilation, checks, store writes): {fixed:.1f} s]")
    return fixed


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--points", type=int, default=100_000)
    ap.add_argument("--ref-points", type=int, default=2000)
    ap.add_argument("--batch", type=int, default=256)
    ap.add_argument("--starts", type=int, default=1)
    ap.add_argument("--deviation-starts", type=int, default=1)
    ap.add_argument("--dev-ref-points", type=int, default=200,
                    help="subsample for the secondary reference that adds a scipy deviation search")
    ap.add_argument("--no-warm", action="store_true", help="skip the second run with the compilation cache filled")
    ap.add_argument("--engine", default="inprocess", choices=("inprocess", "processes", "dask"),
                    help="the sweep's engine (batch seconds then overlap: read the wall time)")
    ap.add_argument("--workers", type=int, help="worker processes for --engine processes or dask")
    ap.add_argument("--profile", action="store_true")
    ap.add_argument("--profile-batches", type=int, default=8)
    ap.add_argument("--quick", action="store_true", help="a smoke run: small sizes, no warm run")
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--model", help=argparse.SUPPRESS)
    ap.add_argument("--store", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        return child(args)
    if args.quick:
        args.points, args.ref_points, args.dev_ref_points, args.no_warm = 2048, 200, 20, True

    folder = tempfile.mkdtemp(prefix="bench-sweep-")
    try:
        measure(args, folder)
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def measure(args, folder):
    """Both sides in ``folder`` (model file, stores, compilation cache), then the printed figures."""
    import _common as C

    note = C.machine_note()
    model = os.path.join(folder, "orrin_yoghurts.py")
    with open(model, "w", encoding="utf-8") as fh:
        fh.write(MODEL)
    store = os.path.join(folder, "sweep.sqlite")
    cache = os.path.join(folder, "jax-cache")  # empty: the first run compiles everything it runs
    t_cold, res = run_sweep(args, model, store, cache)
    if not args.no_warm:  # the same sweep into a new store, compiled functions read from the cache
        t_warm, res_warm = run_sweep(args, model, os.path.join(folder, "sweep-warm.sqlite"), cache)

    from equipoise.sweeps import Store

    spec = make_spec(model, args.points, args.batch, args.starts, args.deviation_starts)
    costs = spec.points()
    R = min(args.ref_points, args.points)
    pick = np.unique(np.linspace(0, args.points - 1, R).round().astype(int))
    unit = qmc.Sobol(d=9, scramble=True, seed=spec.seed).random(args.starts)[0]
    t_ref_sub = np.inf
    for _ in range(2):  # the faster of two passes: a noisy moment does not slow the reference
        t = time.perf_counter()
        ref_x, ref_abscissa, ref_ok = reference(costs[pick], unit)
        t_ref_sub = min(t_ref_sub, time.perf_counter() - t)
    t_ref = t_ref_sub * args.points / len(pick)

    # Secondary reference: the same, plus the deviation search equipoise's verification runs.
    sub = pick[np.linspace(0, len(pick) - 1, min(args.dev_ref_points, len(pick))).round().astype(int)]
    sub = np.unique(sub)
    unit_dev = qmc.Sobol(d=9, scramble=True, seed=spec.seed + 1).random(args.deviation_starts)
    t = time.perf_counter()
    sub_x, _, _ = reference(costs[sub], unit)
    dev_gains = deviation_check(sub_x, costs[sub], unit_dev)
    t_dev_sub = time.perf_counter() - t
    t_dev = t_dev_sub * args.points / len(sub)

    db = Store.read(store)
    eqs = {e["point"]: e for e in db.equilibria() if e["k"] == 0}
    db.close()
    have = np.array([p in eqs for p in pick])
    both = have & ref_ok
    ours_x = np.array([eqs[p]["actions"] if p in eqs else [np.nan] * 9 for p in pick])
    diff = np.max(np.abs(ours_x[both] - ref_x[both])) if both.any() else np.nan
    ours_stable = np.array([eqs[p]["equal_speeds"] == "stable" if p in eqs else False for p in pick])
    label_agree = np.mean(ours_stable[both] == (ref_abscissa[both] < 0)) if both.any() else np.nan

    print(f"sweep of {args.points} cost points, 9 prices (3 firms x 3 products); batch {args.batch}, "
          f"starts {args.starts}, deviation_starts {args.deviation_starts}, labels 'equal'")
    print(f"  outcome: status {res['counts']}, nash {res['verdicts'].get('nash', {})}, "
          f"equal speeds {res['verdicts'].get('equal_speeds', {})}")
    fixed = {"empty cache": describe("empty compilation cache", t_cold, res, args.points, args.batch)}
    if not args.no_warm:
        fixed["filled cache"] = describe("compilation cache filled by the first run", t_warm, res_warm,
                                         args.points, args.batch)
    print(f"reference scipy hybr + forward-difference Jacobian + eigvals: {t_ref_sub:.1f} s for {len(pick)} "
          f"evenly spaced points (faster of 2 passes) -> {len(pick) / t_ref_sub:.0f} points/s, "
          f"extrapolated to {args.points} points: "
          f"{t_ref:.1f} s (hybr success {ref_ok.mean():.1%})")
    runs = [("empty cache", t_cold)] + ([] if args.no_warm else [("filled cache", t_warm)])
    for label, wall in runs:
        print(f"ratio, reference time / equipoise time end to end, {label}: {t_ref / wall:.2f}x "
              f"(goal >= 10x: {'met' if t_ref / wall >= 10 else 'missed'}); "
              f"ceiling if batches cost nothing (reference time / time outside steady batches): "
              f"{t_ref / fixed[label]:.1f}x")
    print(f"secondary reference, the same plus a scipy L-BFGS-B deviation search per firm from the point and "
          f"{args.deviation_starts} Sobol start(s) (as equipoise's verification): {len(sub) / t_dev_sub:.0f} points/s "
          f"on {len(sub)} points, extrapolated {t_dev:.1f} s; max gain found {dev_gains.max():.1e}; ratio to "
          + ", ".join(f"equipoise {label} {t_dev / wall:.2f}x" for label, wall in runs))
    print(f"agreement on the {int(both.sum())} subsample points solved by both: max |price diff| {diff:.1e}; "
          f"equal-speed verdict agrees on {label_agree:.2%}")
    rows = []
    for label, wall in runs:
        rows.append([f"{args.points:,} points, batch {args.batch}, starts {args.starts}, deviation_starts "
                     f"{args.deviation_starts}, labels \"equal\", {label}",
                     f"{wall:.1f} s ({args.points / wall:,.0f} points/s)",
                     f"root + Jacobian + eigenvalues: {len(pick) / t_ref_sub:,.0f} points/s, {t_ref:.1f} s extrapolated "
                     f"({t_ref / wall:.2f}x); with a scipy deviation search: {len(sub) / t_dev_sub:,.0f} points/s "
                     f"({t_dev / wall:.1f}x)",
                     C.goal(t_ref / wall >= 10, ">= 10x end to end")])
    print(C.markdown_section(
        "sweep", "Sweeps end to end (`python benchmarks/bench_sweep.py`)",
        [f"A scrambled Sobol sample of {args.points:,} cost vectors for the invented 9-price logit game; equipoise: one "
         f"`sweep(spec, store)` call in a fresh Python process (start-up, imports, compilation, verification with the "
         f"global deviation search, equal-speed label, SQLite store), timed whole. Reference: a loop of scipy "
         f"`root(method=\"hybr\")` + forward-difference Jacobian + `eigvals` on {len(pick):,} evenly spaced points "
         f"(faster of two passes), **extrapolated**; a secondary reference adds a scipy L-BFGS-B deviation search per "
         f"firm ({len(sub)} points). Outcome: status {res['counts']}; agreement on the {int(both.sum())} reference "
         f"points: max abs price difference {diff:.1e}, equal-speed verdicts agree on {label_agree:.2%}. {note}."],
        ["figure", "equipoise", "in-run reference", "goal"], rows))
    if args.profile:
        per, first = profile(model, args, args.profile_batches)
        print_profile(per, first, args.batch, args.deviation_starts)


if __name__ == "__main__":
    main()

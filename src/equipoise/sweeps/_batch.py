"""Solve one batch of sweep points: batched Newton, warm starts, verification, labels.

Everything a batch computes depends on the spec and the batch's points alone
(shapes are padded to the batch size, starts are fixed Sobol samples, warm
starts come from neighbours inside the batch), so every engine, and a resumed
run, produces the same rows.

Steps
-----
1. Newton from ``starts`` Sobol points of each point's search region, for all
   points at once (``vmap`` over points and starts; one compilation per model
   and batch shape).
2. With ``all_equilibria``, deflation rounds at each point (as :func:`equipoise.solve`).
3. Warm starts: where points of the batch found different numbers of
   equilibria, Newton runs again at each point from its neighbours' roots and
   from a pool of one representative per branch found anywhere in the batch.
4. De-duplication per point, then verification of every (point, root) pair
   in one ``vmap``ed call, then stability labels on the free coordinates.
"""

from __future__ import annotations

from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from .._checks import user_code
from .._newton import newton_solve
from .._sampling import unit_sample
from .._solve import distinct, run_deflation
from .._status import Nash, PointStatus, Status
from .._verify import verify
from ..stability import classify_batch
from ..stability._classify import unit_scaled
from ..stability._evidence import compute
from ..stability._spectral import VERDICTS

#: Newton settings of every sweep (those of :func:`equipoise.solve`).
NEWTON = {"ftol": 1e-10, "xtol": 1e-10, "max_steps": 100}
#: Scaled distance under which two roots of one point are one (as in :func:`equipoise.solve`).
DEDUP_TOL = 1e-6
#: Warm starts per point: up to this many roots from each of the two neighbours.
WARM_PER_NEIGHBOUR = 8
#: ... and up to this many representatives of the roots found anywhere in the batch.
WARM_POOL = 16
#: Scaled distance under which roots of different points count as one branch for the pool.
POOL_TOL = 1e-2
#: Deflation rounds per point with ``all_equilibria``.
DEFLATION_ROUNDS = 8


def _pad(a: np.ndarray, size: int) -> np.ndarray:
    if a.shape[0] >= size:
        return a
    return np.concatenate([a, np.repeat(a[-1:], size - a.shape[0], axis=0)])


def _compiled(game, spec):
    newton = game.cached(("sweep_newton", tuple(NEWTON.items())), lambda: jax.jit(jax.vmap(jax.vmap(
        lambda x, th: newton_solve(game, x, th, **NEWTON), in_axes=(0, None)), in_axes=(0, 0))))
    region = game.cached("sweep_region", lambda: jax.jit(jax.vmap(game.region)))

    def check(x, th, unit):
        return verify(game, x, th, unit_starts=unit), game.payoff_vector(x, th)

    checker = game.cached("sweep_verify", lambda: jax.jit(jax.vmap(check, in_axes=(0, 0, None))))
    return newton, region, checker


def solve_batch(game, spec, base: dict[str, np.ndarray], indices: np.ndarray, values: np.ndarray) -> list[dict]:
    """Records of the points ``indices`` (axis ``values``), see :mod:`equipoise.sweeps._store`."""
    count, B, n = len(indices), min(int(spec.batch), spec.size), game.n  # no padding beyond the sweep
    newton, region, checker = _compiled(game, spec)
    thetas = spec.thetas(base, _pad(values, B))
    th = {k: jnp.asarray(v) for k, v in thetas.items()}
    with user_code(game, "search_box"):
        lo, hi = (np.asarray(v) for v in region(th))
    region_ok = np.all(np.isfinite(lo) & np.isfinite(hi) & (lo <= hi), axis=1)
    lo, hi = np.where(region_ok[:, None], lo, 0.0), np.where(region_ok[:, None], hi, 1.0)
    unit = unit_sample(int(spec.starts), n, int(spec.seed))
    x0 = lo[:, None, :] + (hi - lo)[:, None, :] * unit[None]
    with user_code(game, "payoffs"):
        out = jax.tree.map(np.asarray, newton(jnp.asarray(x0), th))
    found, resid = _converged(out, count)
    statuses = out.status[:count]

    if spec.all_equilibria:
        for p in np.nonzero(region_ok[:count])[0]:
            th_p = {k: jnp.asarray(v[p]) for k, v in thetas.items()}
            extra, extra_res, _ = run_deflation(game, th_p, x0[p], found[p], resid[p], DEFLATION_ROUNDS,
                                                DEDUP_TOL, dict(NEWTON))
            found[p], resid[p] = np.concatenate([found[p], extra]), np.concatenate([resid[p], extra_res])
    roots = [_distinct(found[p], resid[p]) for p in range(count)]
    # After deflation, so that what deflation found at some points is tried at all of them.
    if count > 1 and len({len(r) for r in roots}) > 1:
        warm = _warm_starts(roots, x0[:, 0, :])
        with user_code(game, "payoffs"):
            out2 = jax.tree.map(np.asarray, newton(jnp.asarray(warm), th))
        more, more_res = _converged(out2, count)
        found = [np.concatenate([a, b]) for a, b in zip(found, more)]
        resid = [np.concatenate([a, b]) for a, b in zip(resid, more_res)]
        roots = [_distinct(found[p], resid[p]) for p in range(count)]

    owners = np.array([p for p in range(count) if region_ok[p] for _ in roots[p]], dtype=int)
    xs = np.array([x for p in range(count) if region_ok[p] for x, _ in roots[p]]).reshape(-1, n)
    hits = [c for p in range(count) if region_ok[p] for _, c in roots[p]]
    v, u = _verify_pairs(checker, thetas, owners, xs, spec) if len(owners) else (None, None)
    labels = _labels(game, v, len(owners), spec.labels, B)
    nash = [m.value for m in Nash]
    eqs_of: list[list[dict]] = [[] for _ in range(count)]
    for k, p in enumerate(owners):
        eqs_of[p].append({"actions": xs[k].tolist(), "payoffs": u[k].tolist(), "residual": float(v.residual[k]),
                          "nash": nash[int(v.label[k])], "starts": int(hits[k]), **labels[k]})
    records = []
    for p in range(count):
        status, reason = _status(bool(region_ok[p]), eqs_of[p], statuses[p])
        records.append({"index": int(indices[p]), "values": values[p].tolist(), "status": status.name,
                        "reason": reason, "equilibria": eqs_of[p]})
    return records


def _converged(out, count: int) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Per point: the converged end points ``(k, n)`` and their residuals."""
    ok = out.status == Status.success.code
    return [out.x[p][ok[p]] for p in range(count)], [out.residual[p][ok[p]] for p in range(count)]


def _distinct(points: np.ndarray, residuals: np.ndarray) -> list[tuple[np.ndarray, int]]:
    if points.shape[0] <= 1:  # the common case of one start or one converged run: nothing to merge
        return [(points[0], 1)] if points.shape[0] else []
    return distinct(points, residuals, DEDUP_TOL)


def _warm_starts(roots, filler: np.ndarray) -> np.ndarray:
    """Warm starts for each point, shape ``(B, S, n)``: its neighbours' roots, then the batch's pool.

    The pool holds one representative of each group of roots found anywhere in
    the batch (grouped at the looser ``POOL_TOL``, most-hit first), so a branch
    that only some points found is tried everywhere in one pass. ``S`` is a
    power of two (few compiled shapes); unused slots repeat the point's first
    Sobol start.
    """
    B, n = filler.shape
    every = [(x, c) for r in roots for x, c in r]
    pool = distinct(np.array([x for x, _ in every]), -np.array([c for _, c in every], dtype=float), POOL_TOL)
    pool = [x for x, _ in pool[:WARM_POOL]]
    mine = [[x for q in (p - 1, p + 1) if 0 <= q < len(roots) for x, _ in roots[q][:WARM_PER_NEIGHBOUR]] + pool
            for p in range(len(roots))]
    S = 1 << max(1, (max(len(m) for m in mine) - 1).bit_length())
    out = np.repeat(filler[:, None, :], S, axis=1)
    for p, m in enumerate(mine):
        if m:
            out[p, : len(m)] = np.asarray(m)
    return out


def _verify_pairs(checker, thetas, owners: np.ndarray, xs: np.ndarray, spec):
    """Verification and payoffs of every (point, root) pair, batched: arrays with a leading pair axis."""
    count = len(owners)
    size = max(min(int(spec.batch), spec.size), 1 << max(0, (count - 1).bit_length()))  # few shapes
    idx = _pad(owners, size)
    th = {k: jnp.asarray(v[idx]) for k, v in thetas.items()}
    unit = jnp.asarray(unit_sample(int(spec.deviation_starts), xs.shape[1], int(spec.seed) + 1))
    v, u = jax.tree.map(np.asarray, checker(jnp.asarray(_pad(xs, size)), th, unit))
    return jax.tree.map(lambda a: a[:count], v), u[:count]


def _free_blocks(game, free: np.ndarray) -> tuple[int, ...]:
    sub = [int(np.sum(free[game.owner == i])) for i in range(len(game.sizes))]
    return tuple(m for m in sub if m > 0)


def _labels(game, v, count: int, kind: str, batch: int) -> list[dict[str, Any]]:
    """Stability fields per verified pair; stacks grouped by free-coordinate pattern and labelled together."""
    empty = {"equal_speeds": None, "equal_abscissa": None, "player_speeds": None, "coordinate_speeds": None,
             "hicksian": None, "learning_rate_limit": None, "best_response_radius": None, "stability": None}
    out = [dict(empty) for _ in range(count)]
    if kind == "none" or not count:
        return out
    masks, group = np.unique(v.interior.astype(bool), axis=0, return_inverse=True)
    for g, free in enumerate(masks):
        idx = np.nonzero(group.reshape(-1) == g)[0]
        Js = _padded(v.jacobian[idx][:, free][:, :, free], batch)
        if kind == "full":
            for i, rep in zip(idx, classify_batch(Js, _free_blocks(game, free))):
                d = rep.to_dict()
                out[i].update(equal_speeds=d["equal_speeds"]["verdict"], equal_abscissa=d["equal_speeds"]["abscissa"],
                              player_speeds=rep.player_speeds.verdict, coordinate_speeds=rep.coordinate_speeds.verdict,
                              hicksian=rep.hicksian, learning_rate_limit=rep.learning_rate_limit,
                              best_response_radius=rep.best_response["spectral_radius"], stability=d)
        else:
            for i, (verdict, abscissa) in zip(idx, equal_labels(Js)):
                out[i].update(equal_speeds=verdict, equal_abscissa=abscissa)
    return out


def _padded(Js: np.ndarray, batch: int) -> np.ndarray:
    """The stack padded with -I to the batch size (or a power of two above it).

    Evidence compiles once per stack size; -I is decided by the cheap evidence
    alone, so padding never triggers a search.
    """
    count, n = Js.shape[0], Js.shape[1]
    size = max(batch, 1 << max(0, (count - 1).bit_length()))
    if size == count:
        return Js
    return np.concatenate([Js, np.repeat(-np.eye(n)[None], size - count, axis=0)])


def equal_labels(Js: np.ndarray) -> list[tuple[str, float | None]]:
    """Equal-speed verdict and spectral abscissa of each matrix, as :func:`equipoise.stability.classify` gives them."""
    if Js.shape[1] == 0:
        return [("stable", None)] * Js.shape[0]
    scaled, units = unit_scaled(Js)
    res = compute("equal", (), scaled)
    return [(VERDICTS[int(code)], float(a) * u) for (code, a), u in zip(res, units)]


def _status(region_ok: bool, eqs: list, outcomes: np.ndarray) -> tuple[PointStatus, str | None]:
    if not region_ok:
        return PointStatus.failed, "the search region is not a finite box at these parameters"
    if any(e["nash"] != Nash.not_nash.value for e in eqs):
        return PointStatus.solved, None
    if eqs:
        return PointStatus.no_equilibrium, "every first-order point found failed verification (not_nash)"
    codes, counts = np.unique(outcomes, return_counts=True)
    named = {Status.from_code(k).name: int(v) for k, v in zip(codes, counts)}
    if set(named) == {"nonfinite"}:
        return PointStatus.failed, "payoffs or their derivatives were non-finite from every start"
    return PointStatus.no_equilibrium, "no start converged: " + ", ".join(f"{k} {v}" for k, v in sorted(named.items()))

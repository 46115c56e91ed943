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
2. Warm starts: where neighbouring points of the batch found different numbers
   of equilibria, Newton runs again at each point from its neighbours' roots.
3. With ``all_equilibria``, deflation rounds at each point (as :func:`equipoise.solve`).
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
from .._solve import _deflate, distinct
from .._status import Nash, PointStatus, Status
from .._verify import verify
from ..stability import classify_batch
from ..stability._evidence import compute
from ..stability._spectral import VERDICTS

#: Newton settings of every sweep (those of :func:`equipoise.solve`).
NEWTON = {"ftol": 1e-10, "xtol": 1e-10, "max_steps": 100}
#: Scaled distance under which two roots of one point are one (as in :func:`equipoise.solve`).
DEDUP_TOL = 1e-6
#: Warm starts per point: up to this many roots from each of the two neighbours.
WARM_PER_NEIGHBOUR = 2
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
    count, B, n = len(indices), int(spec.batch), game.n
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
    found: list[list[np.ndarray]] = [[] for _ in range(B)]
    resid: list[list[float]] = [[] for _ in range(B)]
    _collect(out, found, resid)
    outcomes = [dict(zip(*np.unique(out.status[p], return_counts=True))) for p in range(B)]

    roots = [distinct(np.array(found[p]).reshape(-1, n), np.array(resid[p]), DEDUP_TOL) for p in range(count)]
    if count > 1 and len({len(r) for r in roots}) > 1:
        warm = _warm_starts(roots, x0[:, 0, :], B)
        with user_code(game, "payoffs"):
            out2 = jax.tree.map(np.asarray, newton(jnp.asarray(warm), th))
        _collect(out2, found, resid)
        roots = [distinct(np.array(found[p]).reshape(-1, n), np.array(resid[p]), DEDUP_TOL) for p in range(count)]
    if spec.all_equilibria:
        for p in range(count):
            if not region_ok[p]:
                continue
            th_p = {k: jnp.asarray(v[p]) for k, v in thetas.items()}
            pts = np.array(found[p]).reshape(-1, n)
            extra, extra_res, _ = _deflate(game, th_p, x0[p], pts, np.array(resid[p]), DEFLATION_ROUNDS,
                                           DEDUP_TOL, dict(NEWTON))
            roots[p] = distinct(np.concatenate([pts, extra]), np.concatenate([np.array(resid[p]), extra_res]),
                                DEDUP_TOL)

    pairs = [(p, x, c) for p in range(count) if region_ok[p] for x, c in roots[p]]
    checked = _verify_pairs(checker, thetas, pairs, spec, n) if pairs else []
    labels = _labels(game, checked, spec.labels, int(spec.batch))
    records = []
    i = 0
    for p in range(count):
        eqs = []
        for _ in range(len(roots[p]) if region_ok[p] else 0):
            (v, u), (x, c), lab = checked[i], pairs[i][1:], labels[i]
            eqs.append({"actions": [float(a) for a in x], "payoffs": [float(a) for a in u],
                        "residual": float(v.residual), "nash": Nash.from_code(v.label).value, "starts": int(c),
                        **lab})
            i += 1
        status, reason = _status(region_ok[p], eqs, outcomes[p], game, lo[p], hi[p])
        records.append({"index": int(indices[p]), "values": [float(a) for a in values[p]], "status": status.name,
                        "reason": reason, "equilibria": eqs})
    return records


def _collect(out, found, resid) -> None:
    ok = out.status == Status.success.code
    for p in range(len(found)):
        found[p] += list(out.x[p][ok[p]])
        resid[p] += list(out.residual[p][ok[p]])


def _warm_starts(roots, filler: np.ndarray, starts: int) -> np.ndarray:
    """Each point's neighbours' roots as starts, shape ``(B, S, n)`` (padded with the first Sobol start)."""
    B, n = filler.shape
    S = max(starts, 2 * WARM_PER_NEIGHBOUR)
    out = np.repeat(filler[:, None, :], S, axis=1)
    for p in range(len(roots)):
        mine = [x for q in (p - 1, p + 1) if 0 <= q < len(roots) for x, _ in roots[q][:WARM_PER_NEIGHBOUR]]
        if mine:
            out[p, : len(mine)] = np.asarray(mine)
    return out


def _verify_pairs(checker, thetas, pairs, spec, n) -> list:
    size = 1 << max(0, (len(pairs) - 1).bit_length())
    size = max(size, int(spec.batch))  # few shapes: the batch size, then powers of two
    idx = _pad(np.array([p for p, _, _ in pairs]), size)
    xs = _pad(np.array([x for _, x, _ in pairs]), size)
    th = {k: jnp.asarray(v[idx]) for k, v in thetas.items()}
    unit = jnp.asarray(unit_sample(int(spec.deviation_starts), n, int(spec.seed) + 1))
    v, u = jax.tree.map(np.asarray, checker(jnp.asarray(xs), th, unit))
    return [(jax.tree.map(lambda a, k=k: a[k], v), u[k]) for k in range(len(pairs))]


def _free_blocks(game, free: np.ndarray) -> tuple[int, ...]:
    sub = [int(np.sum(free[game.owner == i])) for i in range(len(game.sizes))]
    return tuple(m for m in sub if m > 0)


def _labels(game, checked: list, kind: str, batch: int) -> list[dict[str, Any]]:
    """Stability fields per verified pair; stacks grouped by free-coordinate pattern and labelled together."""
    empty = {"equal_speeds": None, "equal_abscissa": None, "player_speeds": None, "coordinate_speeds": None,
             "hicksian": None, "learning_rate_limit": None, "best_response_radius": None, "stability": None}
    out = [dict(empty) for _ in checked]
    if kind == "none" or not checked:
        return out
    groups: dict[tuple, list[int]] = {}
    for i, (v, _) in enumerate(checked):
        groups.setdefault(tuple(bool(b) for b in v.interior), []).append(i)
    for mask, idx in groups.items():
        free = np.array(mask)
        Js = _padded(np.stack([checked[i][0].jacobian[np.ix_(free, free)] for i in idx]), batch)
        if kind == "full":
            for i, rep in zip(idx, classify_batch(Js, _free_blocks(game, free))):
                d = rep.to_dict()
                out[i].update(equal_speeds=d["equal_speeds"]["verdict"], equal_abscissa=d["equal_speeds"]["abscissa"],
                              player_speeds=rep.player_speeds.verdict, coordinate_speeds=rep.coordinate_speeds.verdict,
                              hicksian=rep.hicksian, learning_rate_limit=rep.learning_rate_limit,
                              best_response_radius=rep.best_response["spectral_radius"], stability=d)
        else:
            for i, (verdict, abscissa) in zip(idx, equal_labels(Js)):
                out[i].update(equal_speeds=verdict, equal_abscissa=abscissa,
                              stability={"equal_speeds": {"verdict": verdict, "abscissa": abscissa}})
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
    units = np.max(np.abs(Js), axis=(1, 2))
    units = np.where(units > 0, units, 1.0)
    res = compute("equal", (), Js / units[:, None, None])
    return [(VERDICTS[int(code)], float(a) * u) for (code, a), u in zip(res, units)]


def _status(region_ok: bool, eqs: list, outcomes: dict, game, lo, hi) -> tuple[PointStatus, str | None]:
    if not region_ok:
        return PointStatus.failed, "the search region is not a finite box at these parameters"
    if any(e["nash"] != Nash.not_nash.value for e in eqs):
        return PointStatus.solved, None
    if eqs:
        return PointStatus.no_equilibrium, "every first-order point found failed verification (not_nash)"
    named = {Status.from_code(k).name: int(v) for k, v in outcomes.items()}
    if set(named) == {"nonfinite"}:
        return PointStatus.failed, "payoffs or their derivatives were non-finite from every start"
    return PointStatus.no_equilibrium, "no start converged: " + ", ".join(f"{k} {v}" for k, v in sorted(named.items()))

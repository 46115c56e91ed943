r"""Follow an equilibrium branch along a straight path in parameter space.

The path is :math:`\theta(\lambda) = \theta_A + \lambda (\theta_B - \theta_A)`,
:math:`\lambda \in [0, 1]`. On the current active set (coordinates held at a
bound) the branch solves :math:`G(x, \lambda) = 0` with :math:`G_k = F_k` on
free coordinates and :math:`G_k = x_k - b_k` on held ones. It is followed by
pseudo-arclength continuation (Keller 1977; Allgower & Georg, *Numerical
Continuation Methods*, 1990): a tangent predictor, a Newton corrector on
:math:`G = 0` plus the arclength hyperplane, adaptive step length. Actions are
scaled by the search-box widths, so arclength is unit-free.

Events between two accepted points are located by bisection on the arclength
hyperplane (each trial point corrected onto the branch) to
``event_tol`` in scaled arclength (``VERDICT_TOL`` for speed verdicts):

* ``fold``: the tangent's :math:`\lambda` component changes sign (a turning
  point, :math:`\det J = 0`: two equilibria meet);
* ``real_crossing``: :math:`\det J` on the free coordinates changes sign
  without a turn (a real eigenvalue crosses zero at a branch point);
* ``hopf``: the number of non-real eigenvalues with positive real part changes
  (a complex pair crosses the imaginary axis: equal-speed gradient play starts
  or stops cycling);
* ``bound``: a free action reaches a bound, or a held action's gradient turns
  to pull it off its bound; the active set is switched and the branch goes on;
* ``speed_verdict``: the per-player or per-coordinate stability verdict changes.

The driver is a Python loop over jitted kernels (the corrector, the tangent);
those kernels are pure JAX.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from ._errors import InputError
from .stability import classify_free


#: The starting actions must solve the KKT conditions to this scaled residual (then are polished).
START_TOL = 1e-6
#: Scaled-arclength tolerance for locating ``speed_verdict`` events (other events: ``event_tol``).
VERDICT_TOL = 1e-6


@dataclass(frozen=True)
class BranchPoint:
    """One accepted point: path position, parameter value, actions, labels."""

    lam: float
    param: float
    x: np.ndarray
    stability: Any
    free: np.ndarray | None = None


@dataclass(frozen=True)
class Event:
    """A located event: its kind (see the module docstring), path position, parameter value, actions."""

    kind: str
    lam: float
    param: float
    x: np.ndarray
    detail: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class Branch:
    """A followed branch: its points in path order, the located events, how it ended."""

    points: list[BranchPoint]
    events: list[Event]
    status: str
    stats: dict[str, Any]


def _kernels(game):
    key = ("continuation",)

    def build():
        def theta_at(lam, tha, thb):
            return {k: tha[k] + lam * (thb[k] - tha[k]) for k in tha}

        def G(y, fixed, bound, w, tha, thb):
            x = y[:-1] * w
            F = game.pseudo_gradient(x, theta_at(y[-1], tha, thb))
            return jnp.where(fixed, y[:-1] - bound, F * w)

        def DG(y, fixed, bound, w, tha, thb):
            return jax.jacfwd(G)(y, fixed, bound, w, tha, thb)

        def correct(y_pred, t, fixed, bound, w, tha, thb):
            def body(carry, _):
                y = carry
                r = jnp.concatenate([G(y, fixed, bound, w, tha, thb), (t @ (y - y_pred))[None]])
                A = jnp.concatenate([DG(y, fixed, bound, w, tha, thb), t[None]])
                dy = jnp.linalg.solve(A, -r)
                return y + jnp.where(jnp.all(jnp.isfinite(dy)), dy, 0.0), jnp.max(jnp.abs(r))
            y, res = jax.lax.scan(body, y_pred, None, length=8)
            final = jnp.max(jnp.abs(G(y, fixed, bound, w, tha, thb)))
            return y, final, res

        def tangent(y, t_prev, fixed, bound, w, tha, thb):
            A = jnp.concatenate([DG(y, fixed, bound, w, tha, thb), t_prev[None]])
            rhs = jnp.zeros(y.shape[0]).at[-1].set(1.0)
            t = jnp.linalg.solve(A, rhs)
            return t / jnp.linalg.norm(t)

        def jac(y, w, tha, thb):
            return game.jacobian(y[:-1] * w, theta_at(y[-1], tha, thb))

        def field_at(y, w, tha, thb):
            return game.pseudo_gradient(y[:-1] * w, theta_at(y[-1], tha, thb))

        return tuple(jax.jit(f) for f in (correct, tangent, jac, field_at))

    return game.cached(key, build)


def trace(game, param: str, start: float, end: float, x0, params: dict | None = None, *,
          index: int | None = None, max_points: int = 400, step: float = 0.02, max_step: float = 0.1,
          min_step: float = 1e-7, event_tol: float = 1e-10, tol: float = 1e-10,
          stability: bool = True) -> Branch:
    """Follow the equilibrium at ``x0`` (an equilibrium at ``param = start``) to ``param = end``.

    Parameters
    ----------
    game : Game
    param : str
        Parameter name; with ``index``, one entry of a vector parameter.
    start, end : float
        Values of that parameter (entry) at the two ends of the path.
    x0 : array (n,)
        Stacked actions of an equilibrium at ``start`` (e.g. from :func:`solve`).
    params : dict, optional
        Other parameter overrides, fixed along the path.
    step, max_step, min_step : float
        Initial, largest and smallest step in scaled arclength.
    event_tol : float
        Events are located to this scaled arclength.
    tol : float
        Corrector tolerance on the scaled first-order residual.
    stability : bool
        Label every point (and locate ``speed_verdict`` events).

    Returns
    -------
    Branch
        ``status``: ``reached_end``, ``returned`` (the branch turned back to
        ``start``), ``max_points`` or ``step_too_small``.
    """
    a_val, b_val = with_entry(game, param, index, params, start), with_entry(game, param, index, params, end)
    label = param if index is None else f"{param}[{index}]"
    return _follow(game, {**(params or {}), param: a_val.tolist()}, {**(params or {}), param: b_val.tolist()},
                   x0, lambda lam: float(start + lam * (end - start)), f"{label} = {float(start):g}",
                   max_points=max_points, step=step, max_step=max_step, min_step=min_step,
                   event_tol=event_tol, tol=tol, stability=stability)


def with_entry(game, param: str, index: int | None, params: dict | None, value: float) -> np.ndarray:
    """Parameter ``param`` (at ``params``) with its value, or entry ``index``, set to ``value``.

    One clear line when ``param`` is not a parameter or ``index`` does not fit its shape.
    """
    base = game.theta(params)
    if param not in base:
        where = f" of {game.source}" if game.source else " of the model"
        raise InputError(f"--param {param}: not a parameter{where} (has {', '.join(base) or 'none'})")
    out = np.array(base[param], dtype=float)
    if index is None and out.ndim != 0:
        raise InputError(f"--param {param}: has shape {out.shape}; give an entry, e.g. {param}[0]")
    if index is not None and (out.ndim != 1 or not 0 <= index < out.size):
        raise InputError(f"--param {param}[{index}]: expected an index into a vector of {out.size} entries")
    if index is None:
        return np.asarray(float(value))
    out[index] = float(value)
    return out


def trace_between(game, x0, start_params: dict, end_params: dict, **options) -> Branch:
    """Follow the equilibrium at ``x0`` along the straight line between two parameter settings.

    Every parameter may move; points and events report the path position
    ``lambda`` in [0, 1] as their ``param``. ``options`` as for :func:`trace`.
    """
    return _follow(game, dict(start_params), dict(end_params), x0, float, "the start of the path", **options)


def _follow(game, params_a: dict, params_b: dict, x0, param_at, where: str, *, max_points: int = 400,
            step: float = 0.02, max_step: float = 0.1, min_step: float = 1e-7, event_tol: float = 1e-10,
            tol: float = 1e-10, stability: bool = True) -> Branch:
    """The continuation driver of :func:`trace` and :func:`trace_between`."""
    tha = {k: jnp.asarray(v) for k, v in game.theta(params_a).items()}
    thb = {k: jnp.asarray(v) for k, v in game.theta(params_b).items()}
    correct, tangent, jac, field_at = _kernels(game)

    lo_box, hi_box = (np.asarray(v) for v in game.region(game.theta(params_a)))
    w = np.maximum(hi_box - lo_box, 1e-12)
    lower, upper = np.asarray(game.lower, dtype=float), np.asarray(game.upper, dtype=float)
    x0 = np.asarray(x0, dtype=float)
    F0 = np.asarray(field_at(jnp.concatenate([jnp.asarray(x0 / w), jnp.zeros(1)]), w, tha, thb))
    natural = np.max(np.abs(x0 - np.clip(x0 + F0, lower, upper)) / w)
    if not natural <= START_TOL:
        raise InputError(f"the starting actions are not an equilibrium at {where} "
                         f"(scaled KKT residual {natural:.1e}, expected <= {START_TOL:g})")
    fixed, bound = _active_set(x0, F0, lower, upper, w)

    def run_correct(y_pred, t, fixed, bound):
        y, res, _ = correct(jnp.asarray(y_pred), jnp.asarray(t), jnp.asarray(fixed), jnp.asarray(bound / w),
                            jnp.asarray(w), tha, thb)
        return np.asarray(y), float(res)

    def run_tangent(y, t_prev, fixed, bound):
        return np.asarray(tangent(jnp.asarray(y), jnp.asarray(t_prev), jnp.asarray(fixed),
                                  jnp.asarray(bound / w), jnp.asarray(w), tha, thb))

    # G uses scaled bounds: x - b in scaled units is (u - b / w) * w; pass b / w and compare u.
    y = np.concatenate([x0 / w, [0.0]])
    y, res = run_correct(y, np.eye(y.size)[-1], fixed, bound)
    if not res <= tol * 10:
        raise InputError(f"the starting actions are not an equilibrium at {where} "
                         f"(scaled residual {res:.1e} after correction)")
    t = run_tangent(y, np.eye(y.size)[-1], fixed, bound)
    if t[-1] < 0:
        t = -t

    def info(y, t, fixed):
        J = np.asarray(jac(jnp.asarray(y), jnp.asarray(w), tha, thb))
        free = ~fixed
        Jf = J[np.ix_(free, free)]
        lam_eigs = np.linalg.eigvals(Jf) if Jf.size else np.zeros(0)
        det_sign = float(np.sign(np.prod(np.sign(lam_eigs.real)) if Jf.size else 1.0))
        hopf_count = int(np.sum((lam_eigs.real > 0) & (np.abs(lam_eigs.imag) > 1e-9 * (1 + np.abs(lam_eigs)))))
        labels = classify_free(J, game.sizes, free) if stability else None
        verdicts = (labels.player_speeds.verdict, labels.coordinate_speeds.verdict) if labels else None
        F = np.asarray(field_at(jnp.asarray(y), jnp.asarray(w), tha, thb))
        return {"det": det_sign, "hopf": hopf_count, "verdicts": verdicts, "labels": labels, "F": F,
                "turn": float(np.sign(t[-1]))}

    cur = info(y, t, fixed)
    points = [BranchPoint(float(y[-1]), param_at(y[-1]), y[:-1] * w, cur["labels"], ~fixed)]
    events: list[Event] = []
    h, status, corrections = step, "max_points", 0
    while len(points) < max_points:
        # Do not step past the end of the path: aim the predictor at lambda = 1 when it is near.
        hh = h
        if t[-1] > 0 and y[-1] + hh * t[-1] > 1.0:
            hh = (1.0 - y[-1]) / t[-1]
        y_new, res = run_correct(y + hh * t, t, fixed, bound)
        corrections += 1
        if not (res <= tol and np.all(np.isfinite(y_new))):
            h *= 0.5
            if h < min_step:
                status = "step_too_small"
                break
            continue
        t_new = run_tangent(y_new, t, fixed, bound)
        new = info(y_new, t_new, fixed)
        x_new = y_new[:-1] * w
        # Bound events first: they change the system being followed.
        hit = _bound_change(x_new, new["F"], fixed, bound, lower, upper)
        if hit is not None:
            def crossed(s, k=hit):
                ys, _ = run_correct(y + s * t, t, fixed, bound)
                Fs = np.asarray(field_at(jnp.asarray(ys), jnp.asarray(w), tha, thb))
                return _bound_change(ys[:-1] * w, Fs, fixed, bound, lower, upper, only=k)
            s_ev = _bisect(lambda s: crossed(s) is not None, 0.0, hh, event_tol)
            y_ev, _ = run_correct(y + s_ev * t, t, fixed, bound)
            k = hit
            fixed = fixed.copy()
            bound = bound.copy()
            if fixed[k]:
                fixed[k] = False
                action = "leaves"
            else:
                fixed[k] = True
                x_k = y_ev[k] * w[k]
                bound[k] = lower[k] if abs(x_k - lower[k]) <= abs(x_k - upper[k]) else upper[k]
                action = "reaches"
            y_ev, _ = run_correct(y_ev, np.eye(y.size)[-1], fixed, bound)  # onto the new system, same lambda
            events.append(Event("bound", float(y_ev[-1]), param_at(y_ev[-1]), y_ev[:-1] * w,
                                {"coordinate": game.coordinate_name(k), "action": action,
                                 "bound": float(bound[k]) if action == "reaches" else None}))
            t = run_tangent(y_ev, t, fixed, bound)
            y = y_ev
            cur = info(y, t, fixed)
            points.append(BranchPoint(float(y[-1]), param_at(y[-1]), y[:-1] * w, cur["labels"], ~fixed))
            continue
        for kind, changed in (("fold", new["turn"] != cur["turn"]),
                              ("real_crossing", new["det"] != cur["det"] and new["turn"] == cur["turn"]),
                              ("hopf", new["hopf"] != cur["hopf"] and new["det"] == cur["det"]),
                              ("speed_verdict", stability and new["verdicts"] != cur["verdicts"])):
            if changed:
                events.append(_locate(kind, y, t, hh, cur, fixed, bound, run_correct, run_tangent, info,
                                      event_tol, param_at, w))
        y, t, cur = y_new, t_new, new
        if y[-1] >= 1.0 - 1e-6 and t[-1] > 0:
            # Land exactly on the end of the path: correct at lambda = 1 with lambda held.
            y_end = y.copy()
            y_end[-1] = 1.0
            y_end, res = run_correct(y_end, np.eye(y.size)[-1], fixed, bound)
            if res <= tol:
                y = y_end
                cur = info(y, run_tangent(y, t, fixed, bound), fixed)
                points.append(BranchPoint(1.0, param_at(1.0), y[:-1] * w, cur["labels"], ~fixed))
                status = "reached_end"
                break
        points.append(BranchPoint(float(y[-1]), param_at(y[-1]), y[:-1] * w, cur["labels"], ~fixed))
        if y[-1] < 0.0:
            status = "returned"
            break
        h = min(max_step, h * 1.5)
    stats = {"points": len(points), "corrector_runs": corrections}
    return Branch(points, events, status, stats)


def _active_set(x, F, lower, upper, w):
    """Coordinates held at a bound: on it (to scaled 1e-9) with the gradient pushing into it."""
    at_lo = np.isfinite(lower) & (np.abs(x - lower) <= 1e-9 * w) & (F <= 0)
    at_hi = np.isfinite(upper) & (np.abs(x - upper) <= 1e-9 * w) & (F >= 0)
    fixed = at_lo | at_hi
    bound = np.where(at_lo, lower, np.where(at_hi, upper, 0.0))
    return fixed, bound


def _bound_change(x, F, fixed, bound, lower, upper, only=None):
    """Index of the first coordinate whose bound status must change, or None."""
    for k in range(x.size) if only is None else [only]:
        if not fixed[k]:
            if (np.isfinite(lower[k]) and x[k] < lower[k]) or (np.isfinite(upper[k]) and x[k] > upper[k]):
                return k
        elif F is not None:
            if (bound[k] == lower[k] and F[k] > 0) or (bound[k] == upper[k] and F[k] < 0):
                return k
    return None


def _bisect(changed, lo, hi, tol):
    """Smallest s in (lo, hi] (to ``tol``) with ``changed(s)``, given not changed(lo), changed(hi)."""
    while hi - lo > tol:
        mid = 0.5 * (lo + hi)
        if changed(mid):
            hi = mid
        else:
            lo = mid
    return hi


def _locate(kind, y, t, h, cur, fixed, bound, run_correct, run_tangent, info, tol, param_at, w) -> Event:
    key = {"fold": "turn", "real_crossing": "det", "hopf": "hopf", "speed_verdict": "verdicts"}[kind]

    def changed(s):
        ys, _ = run_correct(y + s * t, t, fixed, bound)
        ts = run_tangent(ys, t, fixed, bound)
        return info(ys, ts, fixed)[key] != cur[key]

    # A verdict costs a full classification per trial point: located more coarsely.
    s = _bisect(changed, 0.0, h, max(tol, VERDICT_TOL) if kind == "speed_verdict" else tol)
    ys, _ = run_correct(y + s * t, t, fixed, bound)
    detail = {}
    if kind == "speed_verdict":
        after = info(ys, run_tangent(ys, t, fixed, bound), fixed)["verdicts"]
        detail = {"before": {"player_speeds": cur["verdicts"][0], "coordinate_speeds": cur["verdicts"][1]},
                  "after": {"player_speeds": after[0], "coordinate_speeds": after[1]}}
    return Event(kind, float(ys[-1]), param_at(ys[-1]), ys[:-1] * w, detail)

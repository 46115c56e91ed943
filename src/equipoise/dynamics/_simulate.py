r"""Simulate learning and adjustment dynamics, and classify how each run ends.

``simulate`` runs one trajectory (from a start, or from a small perturbation of
an equilibrium); ``basins`` runs many starts at once (``vmap``) and reports the
share that reaches each equilibrium. Runs are one jitted ``lax.scan``; the
speeds, step size and learning rate are arguments, so new values do not
recompile.

Outcome criteria (:class:`equipoise.Outcome`), with distances in the sup norm
scaled by ``s = 1 + max |x|`` over the known equilibria and the start:

* ``converged``: the last state is within ``CONVERGED_TOL`` of a known
  equilibrium (``equilibrium`` names it), or the state moved less than
  ``CONVERGED_TOL`` over the last tenth of the run (a stationary point that is
  not a known equilibrium, where the KKT residual is small too: ``equilibrium``
  is None); ``converged_at`` is the
  first recorded time after which the run stays within ``10 * CONVERGED_TOL``;
* ``diverged``: a non-finite state, a state larger than ``BLOWUP`` times
  ``s`` (or the start's size, if larger), or a distance from the reference
  point (the equilibrium perturbed, or the known equilibrium nearest the
  start) that grew to ``DIVERGE_FACTOR`` times its initial value and kept
  growing (the last quarter's largest distance at least ten times the first
  quarter's);
* ``cycling``: none of these, and over the last quarter of the run the state
  still sweeps a range above ``CYCLE_FLOOR`` that is at least half the range
  it swept over the quarter before, and some action turns back at least twice
  (an oscillation that does not decay, not a slow monotone approach);
* ``undecided``: otherwise (e.g. still settling at the horizon: run longer).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from .._checks import user_code
from .._errors import InputError
from .._sampling import unit_sample
from .._status import Outcome
from . import _rules

CONVERGED_TOL = 1e-8
DIVERGE_FACTOR = 1e3
BLOWUP = 1e6
CYCLE_FLOOR = 1e-10
#: Largest number of recorded values (steps x actions) of one run.
MAX_RECORDED = 50_000_000


@dataclass(frozen=True)
class Simulation:
    """One simulated run (see :func:`simulate`).

    Attributes
    ----------
    path : ndarray (T + 1, n)
        Stacked actions at every step, the start first.
    times : ndarray (T + 1,)
        Time (``flow``: steps times ``dt``) or step number (discrete rules).
    outcome : Outcome
    equilibrium : int or None
        Index into ``equilibria`` of the equilibrium reached (``converged``).
    converged_at : float or None
        Time or step after which the run stays near where it ends.
    equilibria : list of ndarray
        Known equilibria used to name the outcome.
    rule : dict
        ``{player: rule}``.
    speeds : ndarray (n,)
        Per-coordinate speeds ``K`` (largest 1 when given as a certificate).
    settings : dict
        ``dt`` or ``lr``, ``steps``, ``start``, ``perturb``.
    stats : dict
        ``final_distance`` (to the nearest known equilibrium), ``growth``
        (distance from the reference point over its initial value),
        ``amplitude`` (range swept over the last quarter).
    """

    path: np.ndarray
    times: np.ndarray
    outcome: Outcome
    equilibrium: int | None
    converged_at: float | None
    equilibria: list[np.ndarray]
    rule: dict[str, str]
    speeds: np.ndarray
    settings: dict[str, Any] = field(default_factory=dict)
    stats: dict[str, Any] = field(default_factory=dict)

    @property
    def message(self) -> str:
        return self.outcome.value


@dataclass(frozen=True)
class Basins:
    """Where many starts end (see :func:`basins`).

    Attributes
    ----------
    starts : ndarray (S, n)
    outcomes : list of Outcome
    reached : ndarray of int (S,)
        Index of the equilibrium each start converged to, -1 otherwise.
    shares : list of float
        Share of starts converging to each known equilibrium.
    counts : dict
        Starts per outcome name.
    equilibria : list of ndarray
    """

    starts: np.ndarray
    outcomes: list[Outcome]
    reached: np.ndarray
    shares: list[float]
    counts: dict[str, int]
    equilibria: list[np.ndarray]
    rule: dict[str, str]
    speeds: np.ndarray
    settings: dict[str, Any] = field(default_factory=dict)


# ---------------------------------------------------------------- inputs
def _speeds(game, speeds) -> np.ndarray:
    if speeds is None:
        return np.ones(game.n)
    try:
        k = np.asarray(speeds, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError(f"speeds: expected a list of positive numbers, got {speeds!r}") from None
    if k.size == len(game.sizes) and k.size != game.n:
        k = np.repeat(k, game.sizes)
    elif k.size == len(game.sizes):
        pass  # one action per player: per-player and per-coordinate speeds coincide
    elif k.size != game.n:
        raise InputError(f"speeds: expected {len(game.sizes)} numbers (one per player) or {game.n} "
                         f"(one per action), got {k.size}")
    if not np.all(np.isfinite(k) & (k > 0)):
        raise InputError(f"speeds: expected positive finite numbers, got {k.tolist()}")
    return k


def _rules_per_player(game, rule) -> dict[str, str]:
    if isinstance(rule, str):
        rule = {p: rule for p in game.players}
    if not isinstance(rule, Mapping) or set(rule) != set(game.players):
        raise InputError(f"rule: expected one of {', '.join(_rules.RULES)}, or a mapping from each player "
                         f"({', '.join(game.players)}) to an optimiser rule")
    for p, r in rule.items():
        if r not in _rules.RULES:
            raise InputError(f"rule for {p}: {r!r}; expected one of {', '.join(_rules.RULES)}")
    kinds = set(rule.values())
    if len(kinds) > 1 and not kinds <= set(_rules.OPTAX):
        raise InputError("rule: players may mix only the optimiser rules "
                         f"({', '.join(_rules.OPTAX)}); flow and best responses apply to everyone")
    return {p: rule[p] for p in game.players}


def _positive(name: str, value, whole: bool = False):
    if value is None:
        return None
    ok = isinstance(value, (int, np.integer)) if whole else isinstance(value, (int, float, np.floating, np.integer))
    if isinstance(value, bool) or not ok or not np.isfinite(value) or value <= 0:
        kind = "a positive whole number" if whole else "a positive number"
        raise InputError(f"{name}: expected {kind}, got {value!r}")
    return value


def _step_options(kind: str, dt, lr) -> None:
    """``dt`` and ``lr`` checked, and refused where the rule has no use for them (not ignored)."""
    _positive("dt", dt), _positive("lr", lr)
    if dt is not None and kind != "flow":
        raise InputError(f"dt: only the flow rule takes a time step; the rule here is {kind} "
                         f"({'give lr instead' if kind in _rules.OPTAX else 'best responses take no step size'})")
    if lr is not None and kind not in _rules.OPTAX:
        raise InputError(f"lr: only the optimiser rules ({', '.join(_rules.OPTAX)}) take a learning rate; the rule "
                         f"here is {kind}" + (" (give dt for its time step)" if kind == "flow" else ""))


def _start_vector(game, start) -> np.ndarray:
    if isinstance(start, Mapping):
        try:
            start = np.asarray(game.stack(start))
        except (KeyError, TypeError, ValueError):
            raise InputError(f"start: expected actions for every player ({', '.join(game.players)})") from None
    try:
        x = np.asarray(start, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError(f"start: expected {game.n} numbers, got {start!r}") from None
    if x.size != game.n or not np.all(np.isfinite(x)):
        raise InputError(f"start: expected {game.n} finite numbers (stacked actions), got {x.tolist()}")
    outside = np.nonzero((x < game.lower) | (x > game.upper))[0]
    if outside.size:
        k = int(outside[0])
        raise InputError(f"start: {game.coordinate_name(k)} = {x[k]:g} lies outside its bounds "
                         f"[{game.lower[k]:g}, {game.upper[k]:g}]; expected a start inside them")
    return x


def _known(game, params, equilibria, seed) -> list[np.ndarray]:
    if equilibria is not None:
        return [np.asarray(e, dtype=float).reshape(game.n) for e in equilibria]
    from .._solve import solve

    return [e.x for e in solve(game, params, seed=seed, stability=False).nash]


# ---------------------------------------------------------------- running
def _scale(known: list[np.ndarray], fallback: np.ndarray) -> float:
    """Distances are measured on the equilibria's scale (the start's only when none is known)."""
    sizes = [float(np.max(np.abs(e))) for e in known] or [float(np.max(np.abs(fallback)))]
    return 1.0 + max(sizes)


def _rest(game, theta, x: np.ndarray, scale: float) -> float | None:
    """Scaled natural KKT residual at ``x`` (None if not finite)."""
    if not np.all(np.isfinite(x)):
        return None
    field = game.cached("field", lambda: jax.jit(game.pseudo_gradient))
    F = np.asarray(field(jnp.asarray(x), theta))
    r = x - np.clip(x + F, game.lower, game.upper)
    return float(np.max(np.abs(r))) / scale if np.all(np.isfinite(r)) else None



def _runner(game, rules: dict[str, str], steps: int, inner_steps: int):
    kind = next(iter(rules.values()))
    key = ("dynamics", tuple(rules.items()), steps, inner_steps)

    def build():
        def run(x0, theta, speeds, size):
            if kind == "flow":
                rule = _rules.flow(game, speeds, size)
            elif kind in ("best_response", "alternating"):
                rule = _rules.best_responses(game, kind == "alternating", inner_steps)
            else:
                rule = _rules.learning(game, rules, {p: size for p in game.players}, speeds)

            def body(state, _):
                state = rule.step(state, theta)
                return state, state[0]

            _, xs = lax.scan(body, rule.init(x0), None, length=steps)
            return jnp.concatenate([x0[None], xs])

        return jax.jit(run), jax.jit(jax.vmap(run, in_axes=(0, None, None, None)))

    return game.cached(key, build)


def _step_size(game, theta, x_ref: np.ndarray, speeds: np.ndarray, kind: str, dt, lr) -> float:
    """``dt`` (flow) or ``lr`` (optimisers); defaults scaled by the spectral radius of ``K J`` at ``x_ref``."""
    if kind in ("best_response", "alternating"):
        return 1.0
    given = dt if kind == "flow" else lr
    if given is not None:
        return float(given)
    jac = game.cached("jacobian", lambda: jax.jit(game.jacobian))
    with user_code(game, "payoffs"):
        J = np.asarray(jac(jnp.asarray(x_ref), theta))
    rho = float(np.max(np.abs(np.linalg.eigvals(speeds[:, None] * J)))) if np.all(np.isfinite(J)) else 0.0
    rho = rho if rho > 0 else 1.0
    if kind == "flow":
        return 0.2 / rho  # RK4 is stable for |dt lambda| up to about 2.8
    if kind == "adam":
        return 1e-3 * (1.0 + float(np.max(np.abs(x_ref))))  # Adam's steps are about lr in size
    return 0.1 / rho


def classify_path(path: np.ndarray, equilibria: list[np.ndarray], reference: np.ndarray | None,
                  scale: float, rest_residual: float | None = None) -> tuple[Outcome, int | None, int | None, dict[str, float]]:
    """``(outcome, equilibrium index, index of the step it settled, stats)``; see the module docstring.

    ``reference`` is the point whose distance growth means divergence (None: only a blow-up does).
    ``rest_residual``, the scaled KKT residual at the last state, must be small for a run that
    stopped moving away from any known equilibrium to count as converged (a tiny step is not rest).
    """
    T = path.shape[0]
    stats: dict[str, float] = {}
    finite = np.all(np.isfinite(path), axis=1)
    limit = BLOWUP * max(scale, 1.0 + float(np.max(np.abs(path[0]))) if finite[0] else scale)
    if not finite.all() or np.max(np.abs(path[finite])) > limit:
        if reference is None:
            return Outcome.diverged, None, None, {"blowup": True}
        if not finite[0]:
            return Outcome.diverged, None, None, {"blowup": True}
        g = np.max(np.abs(path[finite] - reference), axis=1) / scale
        return Outcome.diverged, None, None, {"blowup": True, "growth": float(np.max(g) / max(g[0], 1e-300))}
    E = np.stack(equilibria) if equilibria else np.zeros((0, path.shape[1]))
    if len(E):
        D = np.max(np.abs(path[:, None, :] - E[None]), axis=2) / scale
        best = int(np.argmin(D[-1]))
        stats["final_distance"] = float(D[-1, best])
    if reference is not None:  # with no known equilibrium only a blow-up counts as divergence
        g = np.max(np.abs(path - reference), axis=1) / scale
        stats["growth"] = float(np.max(g[-max(1, T // 4):]) / max(g[0], 1e-300))
    tail = path[-max(2, T // 10):]
    moving = float(np.max(np.max(tail, axis=0) - np.min(tail, axis=0))) / scale
    if len(E) and D[-1, best] <= CONVERGED_TOL:
        settled = np.nonzero(D[:, best] > 10 * CONVERGED_TOL)[0]
        return Outcome.converged, best, int(settled[-1] + 1) if settled.size else 0, stats
    if moving <= CONVERGED_TOL and (rest_residual is None or rest_residual <= CONVERGED_TOL * 1e2):
        return Outcome.converged, None, None, stats
    q = max(1, T // 4)
    if reference is not None and stats["growth"] >= DIVERGE_FACTOR and g[-1] > g[0] \
            and np.max(g[-q:]) >= 10 * np.max(g[:q]):  # sustained growth, not one early jump
        return Outcome.diverged, None, None, stats
    q = max(1, T // 4)
    last, before = path[-q:], path[-2 * q:-q]
    amp = float(np.max(np.max(last, axis=0) - np.min(last, axis=0))) / scale
    amp_before = float(np.max(np.max(before, axis=0) - np.min(before, axis=0))) / scale if len(before) else 0.0
    stats["amplitude"] = amp
    steps_taken = np.diff(last, axis=0)
    signs = np.sign(np.where(np.abs(steps_taken) > CYCLE_FLOOR * scale, steps_taken, 0.0))
    turns = max(int(np.sum(np.abs(np.diff(s[s != 0])) > 0)) for s in signs.T) if len(signs) > 1 else 0
    stats["turns"] = turns
    if amp > CYCLE_FLOOR and amp >= 0.5 * amp_before and turns >= 2:
        return Outcome.cycling, None, None, stats
    return Outcome.undecided, None, None, stats


def simulate(game, params: Mapping[str, Any] | None = None, *, rule="flow", speeds=None, start=None,
             equilibrium: int = 0, perturb: float = 1e-6, steps: int = 2000, dt: float | None = None,
             lr: float | None = None, seed: int = 0, equilibria=None, inner_steps: int = 20) -> Simulation:
    r"""Simulate learning or adjustment dynamics and say how the run ends.

    Parameters
    ----------
    game : Game
    params : mapping, optional
        Parameter overrides.
    rule : str or mapping
        ``"flow"`` (:math:`\dot x = K F(x)`), ``"gradient"``, ``"momentum"``,
        ``"adam"``, ``"optimistic"`` (each player's optax optimiser on its own
        payoff; a mapping ``{player: rule}`` mixes them), ``"best_response"``
        (simultaneous) or ``"alternating"`` (players in order).
    speeds : sequence of float, optional
        One per player or one per action (``K``); default all 1. Discrete
        rules use ``lr * k`` as each coordinate's learning rate.
    start : sequence or mapping, optional
        Starting actions; default: equilibrium ``equilibrium`` moved by
        ``perturb * (1 + max|x*|)`` in a seeded random direction.
    equilibrium : int
        Which known equilibrium (0-based, in :func:`equipoise.solve`'s order) to perturb.
    perturb : float
        Relative size of that perturbation.
    steps : int
        Steps to simulate.
    dt, lr : float, optional
        Step of the flow / learning rate; defaults scale with the spectral
        radius of :math:`K J` at the start (``0.2 / rho``, ``0.1 / rho``; Adam
        ``1e-3 (1 + max|x|)``).
    seed : int
        Seed of the perturbation direction (and of the solve for equilibria).
    equilibria : sequence of arrays, optional
        Known equilibria (default: the Nash equilibria :func:`equipoise.solve` finds).
    inner_steps : int
        Newton steps of each best response.

    Returns
    -------
    Simulation

    Examples
    --------
    >>> import equipoise
    >>> game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 10.0])
    >>> equipoise.simulate(game, rule="best_response", steps=60).outcome.name
    'converged'
    """
    rules = _rules_per_player(game, rule)
    kind = next(iter(rules.values()))
    steps = _positive("steps", steps, whole=True)
    inner_steps = _positive("inner_steps", inner_steps, whole=True)
    if steps * game.n > MAX_RECORDED:
        raise InputError(f"steps: {steps} steps of {game.n} actions exceed the {MAX_RECORDED} numbers a run "
                         "records; expected fewer steps")
    _step_options(kind, dt, lr)
    if isinstance(perturb, bool) or not isinstance(perturb, (int, float)) or not np.isfinite(perturb) or perturb < 0:
        raise InputError(f"perturb: expected a non-negative number, got {perturb!r}")
    theta = game.theta(params)
    K = _speeds(game, speeds)
    known = _known(game, params, equilibria, seed)
    if start is None:
        if not known:
            raise InputError("no equilibrium was found to start from; give a start")
        if isinstance(equilibrium, bool) or not isinstance(equilibrium, (int, np.integer)) \
                or not 0 <= equilibrium < len(known):
            raise InputError(f"equilibrium: {len(known)} equilibria were found; expected an index from 0 to "
                             f"{len(known) - 1} (the command line's --equilibrium counts from 1), got {equilibrium!r}")
        x_star = known[int(equilibrium)]
        u = np.random.default_rng(seed).standard_normal(game.n)
        with np.errstate(over="ignore", invalid="ignore"):  # a huge perturbation is refused just below
            x0 = np.clip(x_star + perturb * (1.0 + np.max(np.abs(x_star))) * u / np.max(np.abs(u)),
                         game.lower, game.upper)
        reference = x_star
    else:
        x0 = _start_vector(game, start)
        reference = min(known, key=lambda e: np.max(np.abs(e - x0))) if known else None
    if not np.all(np.isfinite(x0)):
        raise InputError(f"perturb: {perturb!r} gives a non-finite start; expected a small relative perturbation")
    size = _step_size(game, theta, x0, K, kind, dt, lr)
    one, _ = _runner(game, rules, int(steps), int(inner_steps))
    with user_code(game, "payoffs"):
        path = np.asarray(one(jnp.asarray(x0), theta, jnp.asarray(K), jnp.asarray(size)))
    scale = _scale(known, x0)
    outcome, which, at, stats = classify_path(path, known, reference, scale, _rest(game, theta, path[-1], scale))
    times = np.arange(path.shape[0]) * (size if kind == "flow" else 1.0)
    settings = {"steps": int(steps), "start": x0.tolist(), "perturb": float(perturb) if start is None else None}
    settings["dt" if kind == "flow" else "lr"] = size if kind not in ("best_response", "alternating") else None
    return Simulation(path, times, outcome, which, None if at is None else float(times[at]), known, rules, K,
                      settings, stats)


def basins(game, params: Mapping[str, Any] | None = None, *, rule="flow", speeds=None, starts: int = 256,
           steps: int = 2000, dt: float | None = None, lr: float | None = None, seed: int = 0, equilibria=None,
           inner_steps: int = 20) -> Basins:
    """Run the dynamics from ``starts`` Sobol points of the search region at once; where do they end?

    Parameters are those of :func:`simulate`; default step sizes are set at the
    first known equilibrium (or the centre of the region).

    Returns
    -------
    Basins
        The share of starts converging to each known equilibrium, and the count of each outcome.
    """
    rules = _rules_per_player(game, rule)
    kind = next(iter(rules.values()))
    starts = _positive("starts", starts, whole=True)
    steps = _positive("steps", steps, whole=True)
    _step_options(kind, dt, lr)
    theta = game.theta(params)
    K = _speeds(game, speeds)
    known = _known(game, params, equilibria, seed)
    lo, hi = (np.asarray(v) for v in game.region(theta))
    x0 = lo + (hi - lo) * unit_sample(int(starts), game.n, seed)
    size = _step_size(game, theta, known[0] if known else 0.5 * (lo + hi), K, kind, dt, lr)
    _, many = _runner(game, rules, int(steps), int(inner_steps))
    with user_code(game, "payoffs"):
        paths = np.asarray(many(jnp.asarray(x0), theta, jnp.asarray(K), jnp.asarray(size)))
    scale = _scale(known, np.concatenate([lo, hi]))
    outcomes, reached = [], []
    for s in range(paths.shape[0]):
        ref = min(known, key=lambda e: np.max(np.abs(e - x0[s]))) if known else None
        out, which, _, _ = classify_path(paths[s], known, ref, scale, _rest(game, theta, paths[s, -1], scale))
        outcomes.append(out)
        reached.append(-1 if which is None else which)
    reached = np.array(reached)
    shares = [float(np.mean(reached == k)) for k in range(len(known))]
    counts = {o.name: sum(1 for x in outcomes if x is o) for o in Outcome if any(x is o for x in outcomes)}
    settings = {"steps": int(steps), "starts": int(starts)}
    settings["dt" if kind == "flow" else "lr"] = size if kind not in ("best_response", "alternating") else None
    return Basins(x0, outcomes, reached, shares, counts, known, rules, K, settings)

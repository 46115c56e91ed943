"""Multistart solve: every equilibrium Newton finds from a sample of starts.

Starts are a scrambled Sobol sample of the game's search region. Newton runs
from all of them at once (one compiled, ``vmap``ed call); converged points
are de-duplicated and each distinct one is verified.
"""

from __future__ import annotations

import functools
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from ._checks import check_payoffs, user_code
from ._errors import InputError
from ._fixed_point import fixed_point_solve
from ._newton import deflated_solve, newton_solve
from ._sampling import unit_sample
from ._status import Nash, Status
from ._trace_cache import compile_ahead
from ._verify import verify
from .stability import StabilityReport, classify_free
from .stability._classify import compile_ahead as stability_ahead
from .stability._rosen import is_constant, rosen_certificate


@dataclass(frozen=True)
class Equilibrium:
    """One distinct equilibrium candidate and the evidence about it.

    Attributes
    ----------
    x : ndarray (n,)
        Stacked actions.
    actions : dict
        ``{player: ndarray}``.
    payoffs : dict
        ``{player: float}``.
    residual : float
        Natural KKT residual (sup norm).
    nash : Nash
        Verification label.
    jacobian : ndarray (n, n)
        Game Jacobian at ``x``.
    own_curvature, gains : ndarray (N,)
        Per player: largest own-Hessian eigenvalue on interior coordinates,
        and best gain found by the deviation search.
    interior : ndarray of bool (n,)
        Coordinates strictly inside their bounds.
    starts : int
        How many starting points converged here.
    stability : StabilityReport or None
        Stability labels on the free (interior) coordinates, see
        :func:`equipoise.stability.classify`; None when not requested.
    """

    x: np.ndarray
    actions: dict[str, np.ndarray]
    payoffs: dict[str, float]
    residual: float
    nash: Nash
    jacobian: np.ndarray
    own_curvature: np.ndarray
    gains: np.ndarray
    interior: np.ndarray
    starts: int
    stability: StabilityReport | None = None


@dataclass(frozen=True)
class Solution:
    """Result of :func:`solve`.

    Attributes
    ----------
    equilibria : list of Equilibrium
        Distinct first-order points, sorted by stacked actions (coordinate by
        coordinate; differences within the de-duplication tolerance are
        ties). Points labelled ``not_nash`` are included and marked.
    status : Status
        ``success`` when at least one start converged.
    params : dict
        The parameter values used.
    stats : dict
        Effort: ``starts``, ``converged``, counts per status (``outcomes``),
        steps of the solver (``steps_mean``, ``steps_max``), ``method``,
        ``seconds``.
    rosen : dict or None
        For a game whose Jacobian is constant on the sampled starts
        (quadratic payoffs): ``{"quadratic": True, "weights": [...] or None,
        "max_eigenvalue": ...}``; weights found mean a unique equilibrium
        that gradient play reaches from anywhere at any per-player speeds
        (see :mod:`equipoise.stability._rosen`). ``{"quadratic": False}``
        otherwise; None when stability was not requested.
    """

    equilibria: list[Equilibrium]
    status: Status
    params: dict[str, np.ndarray]
    stats: dict[str, Any] = field(default_factory=dict)
    rosen: dict[str, Any] | None = None

    @property
    def success(self) -> bool:
        return self.status is Status.success

    @property
    def message(self) -> str:
        return self.status.message

    @property
    def nash(self) -> list[Equilibrium]:
        """The equilibria not labelled ``not_nash``."""
        return [e for e in self.equilibria if e.nash is not Nash.not_nash]


#: Ways :func:`solve` can solve each start.
METHODS = ("auto", "newton", "krylov", "fixed_point")

#: With ``method="auto"``, games with at least this many actions take Newton-Krylov steps (on
#: logit games of 50 and 200 prices the crossover of dense and Krylov steps lies between).
KRYLOV_FROM = 100


def resolve_method(game, method: str) -> str:
    """The solver ``method`` names for ``game``: ``auto`` becomes the family's fixed-point map if
    it has one, else Newton-Krylov from ``KRYLOV_FROM`` actions, else dense Newton."""
    if method not in METHODS:
        raise InputError(f"method: expected one of {', '.join(METHODS)}, got {method!r}")
    if method == "fixed_point" and game.fixed_point is None:
        raise InputError(f"method: {game.source or game.name or 'this game'} has no fixed-point map "
                         "(the logit families have one); use newton or krylov")
    if method == "auto":
        return "fixed_point" if game.fixed_point is not None else _newton_kind(game)
    return method


def _newton_kind(game) -> str:
    return "krylov" if game.n >= KRYLOV_FROM else "newton"


def _batch_solver(game, method: str, newton: dict):
    """The compiled solver of a stack of starts (one compilation per game, method and options)."""
    def one(x, th):
        if method == "fixed_point":
            return fixed_point_solve(game, x, th)
        return newton_solve(game, x, th, linear="krylov" if method == "krylov" else "dense", **newton)

    return game.cached(("solve_batch", method, tuple(sorted(newton.items()))),
                       lambda: jax.jit(jax.vmap(one, in_axes=(0, None))))


def starting_points(game, theta, count: int, seed: int) -> np.ndarray:
    """``count`` scrambled-Sobol starts in the game's search region."""
    with user_code(game, "search_box"):
        lo, hi = (np.asarray(v) for v in game.region(theta))
    bad = np.nonzero(~(np.isfinite(lo) & np.isfinite(hi) & (lo <= hi)))[0]
    if bad.size:
        k = int(bad[0])
        where = f"{game.source}: " if game.source else ""
        raise InputError(
            f"{where}search region for {game.coordinate_name(k)} is [{lo[k]:g}, {hi[k]:g}] at these "
            f"parameters; expected a finite interval (check the parameter values or the search box)"
        )
    return lo + (hi - lo) * unit_sample(count, game.n, seed)


def _same(a: np.ndarray, b: np.ndarray, tol: float) -> bool:
    return float(np.max(np.abs(a - b))) <= tol * (1.0 + max(np.max(np.abs(a)), np.max(np.abs(b))))


def distinct(points: np.ndarray, residuals: np.ndarray, tol: float) -> list[tuple[np.ndarray, int]]:
    """Greedy de-duplication; returns ``(representative, count)`` pairs.

    Two points are the same when
    ``max|a - b| <= tol * (1 + max(max|a|, max|b|))``; the representative is
    the one with the smallest residual.
    """
    kept: list[list] = []
    for k in np.argsort(residuals, kind="stable"):
        p = points[k]
        for entry in kept:
            if _same(p, entry[0], tol):
                entry[1] += 1
                break
        else:
            kept.append([p, 1])

    def order(a, b):
        for u, v in zip(a[0], b[0]):
            if abs(u - v) > tol * (1.0 + max(abs(u), abs(v))):
                return -1 if u < v else 1
        return 0

    kept.sort(key=functools.cmp_to_key(order))
    return [(p, c) for p, c in kept]


def solve(game, params: Mapping[str, Any] | None = None, *, starts: int = 64, seed: int = 0,
          ftol: float = 1e-10, xtol: float = 1e-10, max_steps: int = 100,
          dedup_tol: float = 1e-6, deviation_starts: int = 16, stability: bool = True,
          all_equilibria: bool = False, deflation_rounds: int = 8, method: str = "auto") -> Solution:
    """Find and verify the equilibria of ``game`` reachable from ``starts`` starts.

    Parameters
    ----------
    game : Game
    params : mapping, optional
        Parameter overrides (name to number or nested list); shapes must
        match the defaults.
    starts : int
        Size of the Sobol sample of the search region.
    seed : int
        Scrambling seed (starts and deviation search).
    ftol, xtol, max_steps
        Newton tolerances, see :func:`newton_solve`.
    dedup_tol : float
        Scaled tolerance under which two solutions are one, see :func:`distinct`.
    deviation_starts : int
        Starts per player of the global deviation check, see :func:`verify`.
    stability : bool
        Attach stability labels to each equilibrium (default True).
    all_equilibria : bool
        Search for every equilibrium: after the multistart, rerun Newton from
        the same starts on the deflated system (:func:`deflated_solve`), in
        rounds, each deflating every root found so far, until a round finds
        nothing new or ``deflation_rounds`` rounds have run. The effort is
        reported in ``stats["deflation"]``. No method can promise that every
        equilibrium of a nonlinear game was found; a last round that found
        nothing new is the evidence offered.
    deflation_rounds : int
        Most deflation rounds (with ``all_equilibria``).
    method : {"auto", "newton", "krylov", "fixed_point"}
        How each start is solved: semismooth Newton with a dense Jacobian
        (:func:`newton_solve`), matrix-free Newton-Krylov (``linear="krylov"``,
        for large games), or the family's fixed-point map
        (:func:`fixed_point_solve`; logit pricing), with Newton from the
        starts it leaves unsettled (counted in
        ``stats["newton_fallback_starts"]``). ``auto`` (default) picks the
        fixed-point map where the game has one, else Krylov from
        ``KRYLOV_FROM`` actions, else dense Newton (:func:`resolve_method`);
        ``stats["method"]`` says which ran. Deflation rounds always use dense
        Newton.

    Returns
    -------
    Solution

    Examples
    --------
    >>> import equipoise
    >>> sol = equipoise.solve(equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0]))
    >>> [e.nash.value for e in sol.equilibria]
    ['global']
    """
    if isinstance(starts, bool) or not isinstance(starts, (int, np.integer)) or starts < 1:
        raise InputError(f"starts: expected a positive whole number, got {starts!r}")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed: expected a non-negative whole number, got {seed!r}")
    method = resolve_method(game, method)
    t0 = time.perf_counter()
    theta = game.theta(params)
    x0 = starting_points(game, theta, int(starts), int(seed))
    check_payoffs(game, theta, x0)

    newton = dict(ftol=ftol, xtol=xtol, max_steps=max_steps)
    check = game.cached("verify", lambda: jax.jit(lambda x, th, u: verify(game, x, th, unit_starts=u)))
    unit = jnp.asarray(unit_sample(int(deviation_starts), game.n, int(seed) + 1))
    payoff_fn = game.cached("payoff", lambda: jax.jit(game.payoff_vector))
    # With an empty cache, what runs after the solver compiles beside it (on a second core).
    compile_ahead(check, x0[0], theta, unit)
    compile_ahead(payoff_fn, x0[0], theta)
    if stability:
        compile_ahead(_jacobian_batch(game), x0[:4], theta)
        stability_ahead(game.n, game.sizes)
    with user_code(game, "payoffs"):
        roots = jax.tree.map(np.asarray, _batch_solver(game, method, newton)(jnp.asarray(x0), theta))
        fallback = 0
        if method == "fixed_point":
            # Starts the iteration did not settle are solved again by Newton.
            missed = roots.status != Status.success.code
            fallback = int(missed.sum())
            if fallback:
                again = jax.tree.map(np.asarray, _batch_solver(game, _newton_kind(game), newton)(
                    jnp.asarray(x0), theta))
                roots = jax.tree.map(lambda a, b: np.where(missed.reshape((-1,) + (1,) * (a.ndim - 1)), b, a),
                                     roots, again)
    ok = roots.status == Status.success.code
    points, residuals = roots.x[ok], roots.residual[ok]
    deflation = None
    if all_equilibria:
        if isinstance(deflation_rounds, bool) or not isinstance(deflation_rounds, (int, np.integer)) \
                or deflation_rounds < 1:
            raise InputError(f"deflation_rounds: expected a positive whole number, got {deflation_rounds!r}")
        extra, extra_res, deflation = run_deflation(game, theta, x0, points, residuals, int(deflation_rounds),
                                               dedup_tol, dict(ftol=ftol, xtol=xtol, max_steps=max_steps))
        points, residuals = np.concatenate([points, extra]), np.concatenate([residuals, extra_res])

    equilibria = []
    for x, count in distinct(points, residuals, dedup_tol):
        v = jax.tree.map(np.asarray, check(jnp.asarray(x), theta, unit))
        u = np.asarray(payoff_fn(jnp.asarray(x), theta))
        equilibria.append(Equilibrium(
            x=x,
            actions={p: np.asarray(a) for p, a in game.split(x).items()},
            payoffs={p: float(u[i]) for i, p in enumerate(game.players)},
            residual=float(v.residual),
            nash=Nash.from_code(v.label),
            jacobian=v.jacobian,
            own_curvature=v.own_curvature,
            gains=v.gains,
            interior=v.interior,
            starts=int(count),
            stability=classify_free(v.jacobian, game.sizes, v.interior) if stability else None,
        ))
    counts = {s.name: int(np.sum(roots.status == s.code)) for s in Status if np.any(roots.status == s.code)}
    stats = {
        "starts": int(starts),
        "converged": int(ok.sum()),
        "outcomes": counts,
        "steps_mean": float(np.mean(roots.steps)),
        "steps_max": int(np.max(roots.steps)),
        "seconds": time.perf_counter() - t0,
        "method": method,
    }
    if method == "fixed_point":
        stats["newton_fallback_starts"] = fallback
    if deflation is not None:
        stats["deflation"] = deflation
    rosen = _rosen(game, theta, x0) if stability else None
    stats["seconds"] = time.perf_counter() - t0
    status = Status.success if equilibria else Status.no_equilibrium
    return Solution(equilibria, status, {k: np.asarray(v) for k, v in theta.items()}, stats, rosen)


def _jacobian_batch(game):
    return game.cached("jacobian_batch", lambda: jax.jit(jax.vmap(game.jacobian, (0, None))))


def _rosen(game, theta, x0: np.ndarray) -> dict[str, Any]:
    Js = np.asarray(_jacobian_batch(game)(jnp.asarray(x0[:4]), theta))
    if not (np.all(np.isfinite(Js)) and is_constant(Js)):
        return {"quadratic": False}
    cert = rosen_certificate(Js[0], game.sizes)
    if cert is None:
        return {"quadratic": True, "weights": None, "max_eigenvalue": None}
    return {"quadratic": True, **cert}


#: Deflation exponent p and shift s (see :func:`deflated_solve`): a milder exponent and a
#: larger shift than the usual (2, 1) keep the deflated merit free of spurious minima far from
#: the known roots on the bounded games in the tests.
DEFLATION_POWER, DEFLATION_SHIFT = 1.0, 2.0


def run_deflation(game, theta, x0: np.ndarray, points: np.ndarray, residuals: np.ndarray, rounds: int,
             dedup_tol: float, newton: dict) -> tuple[np.ndarray, np.ndarray, dict[str, Any]]:
    """Deflation rounds from the starts ``x0``; the new converged points, their residuals, the effort."""
    with user_code(game, "search_box"):
        lo, hi = (np.asarray(v) for v in game.region(theta))
    widths = np.maximum(hi - lo, 1e-12 * (1.0 + np.abs(lo) + np.abs(hi)))
    known = [p for p, _ in distinct(points, residuals, dedup_tol)]
    new_points, new_res, found_per_round, converged_per_round = [], [], [], []
    runs = 0
    for _ in range(rounds):
        capacity = max(8, 1 << max(0, (len(known) - 1).bit_length()))  # few buffer sizes, few compilations
        buffer = np.zeros((capacity, game.n))
        active = np.zeros(capacity, dtype=bool)
        if known:
            buffer[: len(known)] = np.asarray(known)
            active[: len(known)] = True
        run = game.cached(
            ("deflated_batch", capacity, tuple(sorted(newton.items()))),
            lambda: jax.jit(jax.vmap(
                lambda x, th, r, a, w: deflated_solve(game, x, th, r, a, w, power=DEFLATION_POWER,
                                                      shift=DEFLATION_SHIFT, **newton),
                in_axes=(0, None, None, None, None))),
        )
        # The same starts, and every known root nudged off itself (where deflation repels).
        starts = np.concatenate([x0, _nudged(np.asarray(known), widths, lo, hi)]) if known else x0
        used = starts.shape[0]
        # Pad to a size fixed by the buffer capacity, so rounds reuse one compilation.
        size = x0.shape[0] + capacity * _nudges_per_root(game.n)
        starts = np.concatenate([starts, np.repeat(x0[:1], size - used, axis=0)])
        with user_code(game, "payoffs"):
            out = jax.tree.map(np.asarray, run(jnp.asarray(starts), theta, jnp.asarray(buffer),
                                               jnp.asarray(active), jnp.asarray(widths)))
        out = jax.tree.map(lambda a: a[:used], out)
        runs += used
        ok = out.status == Status.success.code
        converged_per_round.append(int(ok.sum()))
        fresh = 0
        for p, _ in distinct(out.x[ok], out.residual[ok], dedup_tol):
            if not any(_same(p, q, dedup_tol) for q in known):
                known.append(p)
                fresh += 1
        new_points.append(out.x[ok])
        new_res.append(out.residual[ok])
        found_per_round.append(fresh)
        if fresh == 0:
            break
    stats = {
        "rounds": len(found_per_round),
        "new_per_round": found_per_round,
        "converged_per_round": converged_per_round,
        "newton_runs": runs,
        "exhausted": found_per_round[-1] == 0,
        "method": f"deflation M(x) = prod_k (|(x - r_k)/w|^-{DEFLATION_POWER:g} + {DEFLATION_SHIFT:g}) "
                  "from the same starts and from each known root nudged by 5 % of the search box",
    }
    empty = np.zeros((0, game.n))
    return (np.concatenate(new_points) if new_points else empty,
            np.concatenate(new_res) if new_res else np.zeros(0), stats)


#: Up to this many actions, each known root is also nudged along every axis.
NUDGE_AXES_UP_TO = 8


def _nudges_per_root(n: int) -> int:
    return 4 + (2 * n if n <= NUDGE_AXES_UP_TO else 0)


def _nudged(roots: np.ndarray, widths: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Starts 5 % of the search box away from each root, along the diagonals +-(1, -1, 1, ...)
    and +-(1, 1, ...) and, for few actions, +-each axis; kept inside the box."""
    n = roots.shape[1]
    pattern = np.where(np.arange(n) % 2 == 0, 1.0, -1.0)
    steps = [pattern, -pattern, np.ones(n), -np.ones(n)]
    if n <= NUDGE_AXES_UP_TO:
        steps += list(np.eye(n)) + list(-np.eye(n))
    steps = np.stack(steps)
    assert steps.shape[0] == _nudges_per_root(n)
    out = (roots[:, None, :] + 0.05 * widths * steps[None]).reshape(-1, n)
    return np.clip(out, np.minimum(lo, roots.min(axis=0)), np.maximum(hi, roots.max(axis=0)))

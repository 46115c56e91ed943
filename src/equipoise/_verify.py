r"""Is a first-order point a Nash equilibrium?

Three checks, all pure JAX (``jit`` and ``vmap`` apply):

1. the natural KKT residual;
2. the second-order condition: each player's own Hessian (diagonal block
   :math:`J_{ii}` of the game Jacobian) restricted to its coordinates strictly
   inside the bounds is negative definite;
3. a global deviation check: each player, the others held fixed, maximises
   its own payoff over its own actions by projected gradient ascent from a
   low-discrepancy sample of its action box (bounds where finite, otherwise
   the game's search box). A game whose family proves a closed-form global
   best response (``Game(best_response=...)``, e.g. logit pricing) is
   checked with it instead: each player's best gain is then exact.

Labels (:class:`Nash`): ``not_nash`` when some player's own Hessian has a
positive eigenvalue on interior coordinates, or a profitable deviation was
found and the second-order condition does not hold strictly (negative
definite on the interior coordinates and on those held at a bound with a
zero marginal payoff); ``local`` when that strict condition holds but a
profitable deviation was found (or the deviation search met only non-finite payoffs); ``global``
otherwise. A deviation is profitable when it gains more than
``gain_tol * (1 + |u_i(x)|)``.
"""

from __future__ import annotations

from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from ._newton import natural_residual
from ._sampling import unit_sample
from ._status import Nash


class Verification(NamedTuple):
    """Evidence behind a Nash label (a pytree: works under ``jit``/``vmap``).

    Attributes
    ----------
    label : int array
        A :class:`Nash` code.
    residual : array
        Natural KKT residual (sup norm).
    own_curvature : array (N,)
        Largest eigenvalue of each player's own Hessian on its interior
        coordinates (``-inf`` when the player has none).
    gains : array (N,)
        Best payoff gain each player's deviation search found (may be <= 0).
    deviations : array (N, n)
        The stacked action profile at which each best deviation was found.
    interior : bool array (n,)
        Coordinates strictly inside their bounds.
    jacobian : array (n, n)
        The game Jacobian at the point.
    """

    label: jax.Array
    residual: jax.Array
    own_curvature: jax.Array
    gains: jax.Array
    deviations: jax.Array
    interior: jax.Array
    jacobian: jax.Array


def verify(game, x, theta=None, *, starts=16, ascent_steps=200, seed=0, unit_starts=None,
           gain_tol=1e-8, curvature_tol=1e-8, bound_tol=1e-9):
    """Verify that stacked actions ``x`` form a Nash equilibrium of ``game``.

    Parameters
    ----------
    game : Game
    x : array (n,)
    theta : dict, optional
        Parameter arrays; defaults if omitted.
    starts : int
        Starting points per player for the deviation search (the point
        itself is always one more).
    ascent_steps : int
        Projected gradient-ascent steps from each start.
    seed : int
        Seed of the scrambled Sobol sample.
    unit_starts : array (S, n), optional
        Deviation starts in the unit cube, scaled to the action box; replaces
        ``starts`` and ``seed`` (pass it as an argument to avoid recompiling
        for each seed).
    gain_tol : float
        Relative gain that counts as a profitable deviation.
    curvature_tol : float
        Eigenvalues within ``curvature_tol * (1 + max|J_ii|)`` of zero count
        as zero.
    bound_tol : float
        A coordinate within ``bound_tol * (1 + |bound|)`` of a bound is at it.

    Returns
    -------
    Verification
    """
    if theta is None:
        theta = game.theta()
    x = jnp.asarray(x, dtype=float)
    lower, upper = game.lower, game.upper

    F = game.pseudo_gradient(x, theta)
    J = game.jacobian(x, theta)
    residual = jnp.max(jnp.abs(natural_residual(x, F, lower, upper)))

    lo_gap = x - jnp.where(np.isfinite(lower), lower, -jnp.inf)
    hi_gap = jnp.where(np.isfinite(upper), upper, jnp.inf) - x
    interior = (lo_gap > bound_tol * (1 + jnp.abs(jnp.where(np.isfinite(lower), lower, 0.0)))) & (
        hi_gap > bound_tol * (1 + jnp.abs(jnp.where(np.isfinite(upper), upper, 0.0))))

    # Coordinates held at a bound with a vanishing marginal payoff (no strict complementarity):
    # first-order information says nothing there, so strictness of the second-order condition
    # must also hold along them. A positive eigenvalue proves non-optimality only on interior
    # coordinates (a direction into the box cannot always be chosen along several bounds).
    degenerate = ~interior & (jnp.abs(F) <= curvature_tol * (1.0 + jnp.max(jnp.abs(F))))
    own_curv, curv_tol = _own_curvature(game, J, jnp.stack([interior, interior | degenerate]), curvature_tol)
    u_star = game.payoff_vector(x, theta)
    if game.best_response is not None:
        devs, gains, checked = _exact_gains(game, x, theta, u_star)
    else:
        devs, gains, checked = _searched_gains(game, x, theta, u_star, unit_starts, starts, seed, ascent_steps)
    thresholds = gain_tol * (1.0 + jnp.abs(u_star))
    found = jnp.any(gains > thresholds)
    soc_bad = jnp.any(own_curv[0] > curv_tol[0])
    soc_strict = jnp.all(own_curv[1] < -curv_tol[1])
    label = jnp.where(
        soc_bad | (found & ~soc_strict),
        Nash.not_nash.code,
        jnp.where(found | ~jnp.all(checked), Nash.local.code, Nash.global_.code),
    )
    return Verification(label, residual, own_curv[0], gains, devs, interior, J)


def _own_curvature(game, J, masks, curvature_tol):
    """Largest eigenvalue of each player's own (symmetrised) Hessian on the coordinates of each
    mask, ``-inf`` where a player has none, and its zero tolerance; arrays ``(len(masks), N)``.

    Each player's block is padded to the largest block, so one batched eigenvalue call of
    ``len(masks) * N`` blocks of size ``max m_i`` serves (not ``N`` calls of size ``n``).
    """
    H = 0.5 * (J + J.T)
    width = max(game.sizes)
    slots = np.arange(width)
    idx = np.array([o + np.minimum(slots, m - 1) for o, m in zip(game.offsets, game.sizes)])  # (N, width)
    used = np.array([slots < m for m in game.sizes])
    keep = jnp.asarray(used)[None] & masks[:, idx]  # (K, N, width)
    own = H[idx[:, :, None], idx[:, None, :]]  # (N, width, width)
    blocks = jnp.where(keep[..., :, None] & keep[..., None, :], own[None], 0.0)
    size = jnp.max(jnp.abs(blocks), axis=(2, 3))
    shift = 2.0 * size + 1.0
    pad = jnp.where(keep, 0.0, shift[..., None])
    eig = jnp.linalg.eigvalsh(blocks - pad[..., :, None] * jnp.eye(width))
    return jnp.where(jnp.any(keep, axis=2), eig[..., -1], -jnp.inf), curvature_tol * (1.0 + size)


def _exact_gains(game, x, theta, u_star):
    """Each player's gain from its closed-form best response; ``(deviations, gains, checked)``."""
    reply = jnp.asarray(game.best_response(x, theta), dtype=float)
    owner = jnp.asarray(game.owner)
    devs = jnp.where(owner[None, :] == jnp.arange(len(game.players))[:, None], reply[None, :], x[None, :])
    u = jax.vmap(lambda y: game.payoff_vector(y, theta))(devs)
    gains = jnp.diagonal(u) - u_star
    checked = jnp.isfinite(gains)
    return devs, jnp.where(checked, gains, -jnp.inf), checked


def _searched_gains(game, x, theta, u_star, unit_starts, starts, seed, ascent_steps):
    """Each player's best gain found by projected gradient ascent; ``(deviations, gains, checked)``."""
    n, N = game.n, len(game.players)
    owner = jnp.asarray(game.owner)
    lo, hi = game.region(theta)
    if unit_starts is None:
        unit_starts = unit_sample(starts, n, seed)
    sample = lo + (hi - lo) * jnp.asarray(unit_starts)
    starts_all = jnp.concatenate([x[None, :], sample], axis=0)  # (S, n)

    def payoff_i(y, i):
        return game.payoff_vector(y, theta)[i]

    value_grad_i = jax.value_and_grad(payoff_i)

    def ascend(i, start):
        mine = owner == i
        y0 = jnp.where(mine, start, x)
        width = jnp.where(mine, hi - lo, 0.0)

        def own_gradient(y):
            u, g = value_grad_i(y, i)
            g = jnp.where(mine, g, 0.0)
            return u, jnp.where(jnp.isfinite(g), g, 0.0)

        # Each step evaluates payoff and gradient once, at the trial point; an accepted
        # trial's gradient is the next step's direction.
        def step(_, c):
            y, u, g, eta = c
            y_try = jnp.where(mine, jnp.clip(y + eta * g, lo, hi), y)
            u_try, g_try = own_gradient(y_try)
            ok = jnp.isfinite(u_try) & (u_try >= u + 1e-4 * (g @ (y_try - y)))
            ok = ok & jnp.any(y_try != y)
            return (jnp.where(ok, y_try, y), jnp.where(ok, u_try, u), jnp.where(ok, g_try, g),
                    jnp.where(ok, 2.0 * eta, 0.25 * eta))

        u0, g0 = own_gradient(y0)
        gnorm = jnp.max(jnp.abs(g0))
        eta0 = 0.1 * jnp.max(width) / (gnorm + 1e-12)
        u0 = jnp.where(jnp.isfinite(u0), u0, -jnp.inf)
        y, u, _, _ = lax.fori_loop(0, ascent_steps, step, (y0, u0, g0, eta0))
        return y, u

    def search(i):
        ys, us = jax.vmap(lambda s: ascend(i, s))(starts_all)
        us = jnp.where(jnp.isfinite(us), us, -jnp.inf)
        best = jnp.argmax(us)
        return ys[best], us[best] - u_star[i], jnp.any(jnp.isfinite(us))

    return jax.vmap(search)(jnp.arange(N))

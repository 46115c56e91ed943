r"""Update rules of learning and adjustment dynamics, as pairs of pure functions.

A :class:`Rule` is ``(init, step)``: ``init(x) -> state`` and
``step(state, theta) -> state`` with ``state[0]`` the stacked actions, so a
run is one ``lax.scan`` (``jit`` and ``vmap`` apply). Every rule projects onto
the action bounds after each step.

* ``flow``: continuous-time gradient play :math:`\dot x = K F(x)`, classical
  fourth-order Runge--Kutta with step ``dt``;
* ``gradient``, ``momentum``, ``adam``, ``optimistic``: discrete learning, each
  player running its own optax optimiser on its own payoff (ascent: optax is
  given :math:`-F_i`), with its own learning rate ``lr * k``;
* ``best_response`` / ``alternating``: simultaneous or sequential (players in
  order) best responses, each an inner maximisation of the player's payoff
  over its own actions (projected Newton steps with backtracking, solved by
  conjugate gradients; a gradient step where the own Hessian is not negative
  definite).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any, NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
import optax
from jax import lax

#: Rules whose per-player optimiser is an optax transformation (learning rate -> transformation).
OPTAX = {
    "gradient": lambda lr: optax.sgd(lr),
    "momentum": lambda lr: optax.sgd(lr, momentum=0.9),
    "adam": lambda lr: optax.adam(lr),
    "optimistic": lambda lr: optax.optimistic_gradient_descent(lr),
}
RULES = ("flow", *OPTAX, "best_response", "alternating")


class Rule(NamedTuple):
    """``init(x) -> state`` and ``step(state, theta) -> state``; ``state[0]`` holds the actions."""

    init: Callable[[jax.Array], Any]
    step: Callable[[Any, Any], Any]


def _project(game):
    lo, hi = jnp.asarray(game.lower), jnp.asarray(game.upper)
    return lambda x: jnp.clip(x, lo, hi)


def flow(game, speeds, dt) -> Rule:
    """Runge--Kutta steps of the projected flow :math:`\\dot x = \\Pi(K F(x))`.

    The field is evaluated at projected points, and a coordinate at a bound
    whose velocity points out of the box stands still, so the intermediate
    stages never see infeasible actions (which would create false rest points).
    """
    project, K = _project(game), jnp.asarray(speeds)
    lo, hi = jnp.asarray(game.lower), jnp.asarray(game.upper)

    def step(state, theta):
        x = state[0]

        def f(y):
            y = project(y)
            v = K * game.pseudo_gradient(y, theta)
            return jnp.where(((y <= lo) & (v < 0)) | ((y >= hi) & (v > 0)), 0.0, v)

        k1 = f(x)
        k2 = f(x + 0.5 * dt * k1)
        k3 = f(x + 0.5 * dt * k2)
        k4 = f(x + dt * k3)
        return (project(x + dt / 6.0 * (k1 + 2 * k2 + 2 * k3 + k4)),)

    return Rule(lambda x: (x,), step)


def _scale_player(player: str, factor: jax.Array) -> optax.GradientTransformation:
    """Multiply ``player``'s updates by its per-coordinate speeds (other entries pass unchanged)."""
    def update(updates, state, params=None):
        return {k: (v * factor if k == player else v) for k, v in updates.items()}, state

    return optax.GradientTransformation(lambda params: optax.EmptyState(), update)


def learning(game, rules: Mapping[str, str], lr: Mapping[str, float], speeds) -> Rule:
    """Each player ``p`` runs optax rule ``rules[p]`` with learning rate ``lr[p]`` on its own payoff."""
    project = _project(game)
    factors = game.split(jnp.asarray(speeds))
    tx = optax.multi_transform(
        {p: optax.chain(OPTAX[rules[p]](lr[p]), _scale_player(p, factors[p])) for p in game.players},
        {p: p for p in game.players})

    def init(x):
        return x, tx.init(game.split(x))

    def step(state, theta):
        x, opt = state
        ascent = game.split(-game.pseudo_gradient(x, theta))
        updates, opt = tx.update(ascent, opt, game.split(x))
        y = game.stack(optax.apply_updates(game.split(x), updates))
        return project(y), opt

    return Rule(init, step)


def _conjugate_gradients(M, g):
    """Solve ``M d = g`` for positive definite ``M`` by ``n`` conjugate-gradient steps.

    No LAPACK call: factorisations inside a vmapped loop can deadlock jaxlib's CPU
    kernels (DEVELOPERS.md). Returns ``(d, ok)``; ``ok`` is False when a search
    direction met non-positive curvature (``M`` not positive definite).
    """
    n = g.shape[0]

    def body(_, c):
        d, r, p, rr, ok = c
        Mp = M @ p
        curv = p @ Mp
        live = rr > 1e-300
        ok = ok & ((curv > 0) | ~live)
        alpha = jnp.where(live & (curv > 0), rr / jnp.where(curv > 0, curv, 1.0), 0.0)
        d = d + alpha * p
        r = r - alpha * Mp
        rr_new = r @ r
        p = r + jnp.where(live, rr_new / jnp.where(live, rr, 1.0), 0.0) * p
        return d, r, p, rr_new, ok

    d, _, _, _, ok = lax.fori_loop(0, 2 * n, body, (jnp.zeros_like(g), g, g, g @ g, jnp.asarray(True)))
    return d, ok & jnp.all(jnp.isfinite(d))


def best_responses(game, alternating: bool, inner_steps: int) -> Rule:
    """Simultaneous (or, with ``alternating``, sequential) best responses by inner maximisation."""
    project = _project(game)
    owner = np.asarray(game.owner)
    N, n = len(game.sizes), game.n

    def respond(i, x, theta):
        mine = jnp.asarray(owner) == i
        block = mine[:, None] & mine[None, :]
        lo, hi = game.region(theta)
        width = jnp.max(jnp.where(mine, hi - lo, 0.0))

        def u(y):
            return game.payoff_vector(y, theta)[i]

        def inner(_, y):
            g = jnp.where(mine, game.pseudo_gradient(y, theta), 0.0)
            H = game.jacobian(y, theta)
            M = jnp.where(block, -H, jnp.eye(n))  # own block of -Hessian; identity elsewhere
            newton, ok = _conjugate_gradients(M, g)
            gmax = jnp.max(jnp.abs(g))
            d = jnp.where(ok, newton, g * (0.1 * width / (gmax + 1e-300)))
            d = jnp.where(jnp.isfinite(d), d, 0.0)
            u0 = u(y)

            def shorter(c):
                t, _ = c
                return t * 0.5, project(y + t * 0.5 * d)

            def worse(c):
                t, z = c
                return (u(z) < u0) & (t > 1e-12)

            t, z = lax.while_loop(worse, shorter, (1.0, project(y + d)))
            return jnp.where(u(z) >= u0, z, y)

        return lax.fori_loop(0, inner_steps, inner, x)

    def step(state, theta):
        x = state[0]
        if alternating:
            for i in range(N):  # players in order, each answering the latest actions
                x = jnp.where(jnp.asarray(owner) == i, respond(i, x, theta), x)
            return (x,)
        # A loop over players, not a vmap: a vmapped nested while loop was seen to hang XLA on CPU.
        answers = jnp.stack([respond(i, x, theta) for i in range(N)])
        return (jnp.sum(jnp.where(jnp.asarray(owner)[None, :] == jnp.arange(N)[:, None], answers, 0.0), axis=0),)

    return Rule(lambda x: (x,), step)

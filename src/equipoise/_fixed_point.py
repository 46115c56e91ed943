r"""Equilibria by iterating a family's fixed-point map.

Some families come with a map :math:`T` whose fixed points are exactly the
first-order points of the game and which converges by plain iteration (the
logit pricing family: the markup equation, see
:func:`equipoise.families.logit.logit_bertrand`). Iterating it costs one
evaluation of :math:`T` per step, far less than a Newton step on a large
game. The result is checked like any other: the natural KKT residual of the
true pseudo-gradient is reported, and the status is ``success`` only when
the iteration met its tolerance with finite values.

Reference: Morrow & Skerlos (2011), "Fixed-point approaches to computing
Bertrand-Nash equilibrium prices under mixed-logit demand", Operations
Research 59(2) (the markup equation as a fixed point).
"""

from __future__ import annotations

from typing import NamedTuple

import jax
import jax.numpy as jnp
from jax import lax

from ._errors import InputError
from ._newton import RootResult, natural_residual
from ._status import Status


class _State(NamedTuple):
    x: jax.Array
    step: jax.Array
    change: jax.Array


def fixed_point_solve(game, x0, theta=None, *, tol=1e-13, max_steps=5000) -> RootResult:
    r"""Iterate the game's fixed-point map :math:`x \leftarrow T(x)` from ``x0``.

    Parameters
    ----------
    game : Game
        A game with a ``fixed_point`` map (``logit_bertrand``, ``logit_products``).
    x0 : array (n,)
        Stacked starting actions.
    theta : dict, optional
        Parameter arrays; defaults if omitted.
    tol : float
        Converged when :math:`\|T(x) - x\|_\infty \le` ``tol`` :math:`(1 + \|x\|_\infty)`.
    max_steps : int
        Most iterations.

    Returns
    -------
    RootResult
        ``status`` is ``success``, ``max_steps`` or ``nonfinite``; ``residual``
        is the natural KKT residual of the pseudo-gradient at the final point.

    Notes
    -----
    Pure JAX: ``jax.jit`` and ``jax.vmap`` apply (over ``x0`` and ``theta``).

    Examples
    --------
    >>> import equipoise
    >>> game = equipoise.logit_bertrand(delta=[1.0, 1.0], alpha=1.0, costs=[1.0, 1.0])
    >>> res = equipoise.fixed_point_solve(game, jnp.array([2.0, 2.0]))
    >>> round(float(res.x[0]), 6)
    2.226751
    """
    if game.fixed_point is None:
        raise InputError(f"{game.name or 'this game'}: has no fixed-point map; use newton_solve "
                         "(maps come with the logit families)")
    if theta is None:
        theta = game.theta()
    x0 = jnp.asarray(x0, dtype=float)

    def body(s: _State) -> _State:
        x_new = game.fixed_point(s.x, theta)
        change = jnp.max(jnp.abs(x_new - s.x))
        return _State(x_new, s.step + 1, change)

    def cond(s: _State):
        small = s.change <= tol * (1.0 + jnp.max(jnp.abs(s.x)))
        return (s.step < max_steps) & ((s.step == 0) | (~small & jnp.isfinite(s.change)))

    out = lax.while_loop(cond, body, _State(x0, jnp.asarray(0), jnp.asarray(jnp.inf)))
    finite = jnp.isfinite(out.change) & jnp.all(jnp.isfinite(out.x))
    converged = finite & (out.change <= tol * (1.0 + jnp.max(jnp.abs(out.x))))
    status = jnp.where(converged, Status.success.code,
                       jnp.where(finite, Status.max_steps.code, Status.nonfinite.code))
    x = jnp.clip(out.x, jnp.asarray(game.lower), jnp.asarray(game.upper))
    F = game.pseudo_gradient(x, theta)
    residual = jnp.max(jnp.abs(natural_residual(x, F, game.lower, game.upper)))
    return RootResult(x, status, out.step, residual)

r"""Comparative statics by the implicit function theorem.

At an equilibrium with free coordinates :math:`f` and coordinates held at a
bound :math:`h` (strict complementarity, so the active set is locally
constant), :math:`F_f(x^*(\theta), \theta) = 0` and :math:`x_h` is fixed, so

.. math:: \frac{dx^*_f}{d\theta} = -J_{ff}^{-1} \frac{\partial F_f}{\partial \theta},
          \qquad \frac{dx^*_h}{d\theta} = 0,

with :math:`\partial F / \partial \theta` by automatic differentiation (not by
finite differences of the solver). Pass-through of costs into prices is the
derivative of the price actions with respect to the cost parameter; for
outcomes that are not actions (a Cournot market price) give ``outcome`` and
the chain rule is applied.

The derivatives are only meaningful where the equilibrium is regular
(:math:`J_{ff}` nonsingular), and their signs are trustworthy where it is
stable (Samuelson's correspondence principle); each result says whether it is.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from ._errors import InputError


def derivatives(game, x, theta, wrt: str, free=None, outcome=None):
    r"""Derivatives of the equilibrium (or of ``outcome``) with respect to parameter ``wrt``.

    Parameters
    ----------
    game : Game
    x : array (n,)
        An equilibrium at ``theta``.
    theta : dict
        Parameter arrays (``game.theta(...)``).
    wrt : str
        Parameter name.
    free : bool array (n,), optional
        Free coordinates (default all); held coordinates get zero derivatives.
    outcome : callable, optional
        ``outcome(x, theta) -> array (k,)``; when given, its total derivative
        :math:`\partial o / \partial x \cdot dx^*/d\theta + \partial o / \partial \theta`.

    Returns
    -------
    array (n, p) or (k, p)
        One row per stacked action (or outcome entry), one column per entry of
        the parameter (``p = 1`` for a scalar).

    Notes
    -----
    Pure JAX: ``jax.jit`` (with ``wrt`` and ``outcome`` static) and ``jax.vmap`` apply.
    """
    x = jnp.asarray(x, dtype=float)
    n = x.shape[0]
    free = jnp.ones(n, dtype=bool) if free is None else jnp.asarray(free, dtype=bool)
    value = theta[wrt]

    def field(v):
        return game.pseudo_gradient(x, {**theta, wrt: v})

    dF = jax.jacfwd(field)(value).reshape(n, -1)
    J = game.jacobian(x, theta)
    both = free[:, None] & free[None, :]
    A = jnp.where(both, J, jnp.where(jnp.eye(n, dtype=bool), 1.0, 0.0))
    dx = jnp.linalg.solve(A, -jnp.where(free[:, None], dF, 0.0))
    if outcome is None:
        return dx

    def out_x(y):
        return jnp.atleast_1d(outcome(y, theta))

    def out_theta(v):
        return jnp.atleast_1d(outcome(x, {**theta, wrt: v}))

    do_dx = jax.jacfwd(out_x)(x)
    do_dt = jax.jacfwd(out_theta)(value).reshape(do_dx.shape[0], -1)
    return do_dx @ dx + do_dt


def check_wrt(game, wrt: str) -> None:
    """One clear line when ``wrt`` is not a parameter of ``game``."""
    if wrt not in game.defaults:
        where = f"{game.source}: " if game.source else ""
        raise InputError(f"{where}--wrt {wrt}: not a parameter of the model "
                         f"(has {', '.join(game.defaults) or 'none'})")


def trust(stability) -> dict:
    """Whether an equilibrium's comparative statics can be relied on, and why not."""
    if stability is None:
        return {"stable": None, "hicksian": None, "flag": "stability not computed"}
    stable = stability.equal_speeds["verdict"] == "stable"
    hicksian = stability.hicksian
    flags = []
    if not stable:
        flags.append("the equilibrium is not stable at equal speeds: signs of comparative statics "
                     "are not reliable")
    if hicksian is False:
        flags.append("not Hicksian: own effects may change sign when other actions adjust")
    return {"stable": stable, "hicksian": hicksian, "flag": "; ".join(flags) or None}


def statics(game, params=None, wrt: str | None = None, *, outcome=None, **solve_options):
    """Solve, then the derivatives of every equilibrium with respect to ``wrt``.

    Returns a list of ``(equilibrium, derivative matrix, trust dict)``; see
    :func:`derivatives` and :func:`trust`. ``solve_options`` go to :func:`equipoise.solve`.
    """
    from ._solve import solve

    if wrt is None:
        raise InputError("wrt: give the name of the parameter to differentiate with respect to")
    check_wrt(game, wrt)
    solution = solve(game, params, **solve_options)
    theta = {k: jnp.asarray(v) for k, v in solution.params.items()}
    run = game.cached(("statics", wrt, outcome), lambda: jax.jit(
        lambda x, th, free: derivatives(game, x, th, wrt, free, outcome)))
    out = []
    for e in solution.equilibria:
        D = np.asarray(run(jnp.asarray(e.x), theta, jnp.asarray(e.interior)))
        out.append((e, D, trust(e.stability)))
    return out

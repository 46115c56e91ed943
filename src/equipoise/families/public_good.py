"""Voluntary contributions to a public good with logarithmic benefit."""

from __future__ import annotations

from collections.abc import Sequence

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names


def public_good(a: Sequence[float], wealth: Sequence[float] | None = None,
                names: Sequence[str] | None = None) -> Game:
    r"""Public good: donor :math:`i` gives :math:`x_i \in [0, w_i]` towards a shared total.

    .. math:: u_i = w_i - x_i + a_i \log(1 + X), \qquad X = \textstyle\sum_j x_j .

    Donor :math:`i` alone would bring the total to :math:`a_i - 1`; in
    equilibrium the total is set by the donors who value it most and the
    others give nothing (Bergstrom, Blume & Varian 1986). Without wealth
    limits and with a single largest :math:`a_i > 1`, that donor alone gives
    :math:`X^* = a_i - 1`.

    Parameters
    ----------
    a : sequence of float
        Valuations :math:`a_i > 0` (parameter ``a``); their number sets the
        number of donors.
    wealth : sequence of float, optional
        :math:`w_i > 0`, the upper bounds on gifts (fixed when the game is
        made, as bounds are; they enter payoffs as constants). Default: no
        upper bound and :math:`w_i = 0` in the payoff.
    names : sequence of str, optional
        Donor names, default ``donor1 .. donorN``.

    Returns
    -------
    Game
        Gifts are bounded below by 0 (and above by ``wealth`` if given); the
        search box is :math:`[0, \max_j a_j]`. The solver uses the marginal
        payoffs times :math:`1 + X`, i.e. :math:`a_i - 1 - X`, which keeps
        their roots and signs and stays steep at large gifts.

    Notes
    -----
    Donors with equal :math:`a_i` who both give leave a continuum of
    equilibria (only their sum is determined).

    Examples
    --------
    >>> import equipoise
    >>> sol = equipoise.solve(public_good([3.0, 5.0, 4.0]))
    >>> [round(float(v), 6) for v in sol.equilibria[0].x]
    [0.0, 4.0, 0.0]
    """
    a_vec = np.atleast_1d(np.asarray(a, dtype=float))
    if a_vec.ndim != 1 or a_vec.size < 1:
        raise InputError("a: expected a non-empty list of valuations, one per donor")
    if not np.all(np.isfinite(a_vec)) or np.any(a_vec <= 0):
        raise InputError(f"a: expected positive valuations, got {a_vec.tolist()}")
    n = a_vec.size
    if wealth is None:
        w = np.zeros(n)
        upper = None
    else:
        w = np.atleast_1d(np.asarray(wealth, dtype=float))
        if w.shape != (n,) or not np.all(np.isfinite(w)) or np.any(w <= 0):
            raise InputError(f"wealth: expected {n} positive amounts, one per donor, got {np.ravel(w).tolist()}")
        upper = {p: float(v) for p, v in zip(player_names(names, n, prefix="donor"), w)}
    players = player_names(names, n, prefix="donor")
    endow = jnp.asarray(w)

    def payoffs(x, theta):
        g = jnp.concatenate([x[p] for p in players])
        u = endow - g + theta["a"] * jnp.log1p(jnp.sum(g))
        return {p: u[i] for i, p in enumerate(players)}

    def foc(x, theta):
        g = jnp.concatenate([x[p] for p in players])
        # (1 + X) (a_i / (1 + X) - 1): a positive multiple of the marginal payoff where X > -1.
        out = theta["a"] - 1.0 - jnp.sum(g)
        return {p: out[i:i + 1] for i, p in enumerate(players)}

    def box(theta):
        return {p: (0.0, jnp.max(theta["a"])) for p in players}

    return Game(
        players={p: 1 for p in players},
        payoffs=payoffs,
        params={"a": a_vec.tolist()},
        lower={p: 0.0 for p in players},
        upper=upper,
        search_box=box,
        foc=foc,
        name="public_good",
    )

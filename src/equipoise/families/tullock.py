"""Tullock rent-seeking contests with asymmetric prize values."""

from __future__ import annotations

from collections.abc import Sequence

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names
from ._shares import impact, shares, steep_foc

#: For r < 1 the infinite slope of x^r at 0 is replaced by its slope at FLOOR * max(V).
FLOOR = 1e-12
#: Profiles with every effort below IDLE * max(V) count as "nobody spends" (see ``_shares``).
IDLE = 1e-7


def tullock(values: Sequence[float], r: float = 1.0, names: Sequence[str] | None = None) -> Game:
    r"""Tullock contest: player :math:`i` spends effort :math:`x_i \ge 0` to win a prize.

    .. math:: u_i = V_i \frac{x_i^r}{\sum_j x_j^r} - x_i .

    Where nobody spends each player wins with probability :math:`1/n`. The
    payoff jumps there (any positive effort wins the prize), so that profile
    is never an equilibrium; profiles with every effort below
    ``IDLE * max(V)`` (:math:`10^{-7}`) count as nobody spending and are given
    marginal payoffs :math:`+1`, so they fail the first-order conditions (see
    :mod:`equipoise.families._shares`). Elsewhere payoffs are smooth for
    :math:`r \ge 1` (for :math:`r < 1` too, away from :math:`x_i = 0`, where
    the true slope is infinite and a large finite one stands in). A player at
    zero effort sees the true one-sided slope of :math:`x^r`, so entry is
    judged correctly. Values more than about :math:`10^6` apart can put
    every equilibrium effort inside the idle region: not supported.

    Parameters
    ----------
    values : sequence of float
        Prize values :math:`V_i > 0` (parameter ``v``); their number (at least
        two) sets the number of players.
    r : float
        Exponent of the contest success function, :math:`r > 0` (parameter ``r``).
    names : sequence of str, optional
        Player names, default ``contestant1 .. contestantN``.

    Returns
    -------
    Game
        Efforts are bounded below by 0; the search box for player :math:`i` is
        :math:`[0, V_i]` (more effort than the prize is worth loses for sure).
        The solver uses the marginal payoffs times
        :math:`1 + (\sum_j x_j / \max V)^2`, which keeps their roots and signs
        and stays steep at large efforts.

    Notes
    -----
    Symmetric with :math:`r = 1`: :math:`x_i = (n-1) V / n^2` (Tullock 1980,
    "Efficient rent seeking"). A pure symmetric equilibrium exists iff
    :math:`r \le n/(n-1)` (Perez-Castrillo & Verdier 1992).

    Examples
    --------
    >>> game = tullock([4.0, 4.0])
    >>> import equipoise
    >>> [round(float(v), 6) for v in equipoise.solve(game).equilibria[0].x]
    [1.0, 1.0]
    """
    v = np.atleast_1d(np.asarray(values, dtype=float))
    if v.ndim != 1 or v.size < 2:
        raise InputError("values: expected a list of at least two prize values, one per player")
    if not np.all(np.isfinite(v)) or np.any(v <= 0):
        raise InputError(f"values: expected positive prize values, got {v.tolist()}")
    if not np.isfinite(r) or r <= 0:
        raise InputError(f"r: expected a positive exponent, got {r!r}")
    players = player_names(names, v.size, prefix="contestant")

    def utility(e, theta):
        top = jnp.max(theta["v"])
        h = impact(e, theta["r"], FLOOR * top)
        # Marginal payoff V_i * (2 / V_i) - 1 = +1 where nobody spends.
        p = shares(h, e, 2.0 / theta["v"], IDLE * top)
        return theta["v"] * p - e

    def payoffs(x, theta):
        u = utility(jnp.concatenate([x[p] for p in players]), theta)
        return {q: u[i] for i, q in enumerate(players)}

    def box(theta):
        return {q: (0.0, theta["v"][i]) for i, q in enumerate(players)}

    return Game(
        players={p: 1 for p in players},
        payoffs=payoffs,
        params={"v": v.tolist(), "r": float(r)},
        lower={p: 0.0 for p in players},
        search_box=box,
        foc=steep_foc(utility, players, lambda theta: jnp.max(theta["v"])),
        name="tullock",
    )

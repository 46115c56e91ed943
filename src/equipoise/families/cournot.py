"""Cournot quantity competition with linear inverse demand."""

from __future__ import annotations

from collections.abc import Sequence

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names


def cournot(a: float = 100.0, b: float = 1.0, costs: Sequence[float] = (10.0, 10.0),
            quadratic: Sequence[float] | None = None, names: Sequence[str] | None = None) -> Game:
    r"""Cournot competition: firm :math:`i` chooses output :math:`q_i \ge 0`.

    .. math:: u_i = q_i (a - b Q) - c_i q_i - \tfrac{d_i}{2} q_i^2,
              \quad Q = \textstyle\sum_j q_j.

    Inverse demand is linear throughout (it is not truncated at zero price).

    Parameters
    ----------
    a, b : float
        Demand intercept and slope (parameters ``a``, ``b``).
    costs : sequence of float
        Constant marginal costs :math:`c_i` (parameter ``c``); their number
        sets the number of firms.
    quadratic : sequence of float, optional
        Quadratic cost coefficients :math:`d_i` (parameter ``d``), default 0.
    names : sequence of str, optional
        Firm names, default ``firm1 .. firmN``.

    Returns
    -------
    Game
        Quantities are bounded below by 0; the search box is
        :math:`[0, a / b]` for every firm.

    Examples
    --------
    >>> game = cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0])
    >>> game.players
    ('firm1', 'firm2', 'firm3')
    """
    c = np.atleast_1d(np.asarray(costs, dtype=float))
    if c.ndim != 1 or c.size < 1:
        raise InputError("costs: expected a non-empty list of marginal costs")
    d = np.zeros_like(c) if quadratic is None else np.asarray(quadratic, dtype=float)
    if d.shape != c.shape:
        raise InputError(f"quadratic: expected {c.size} coefficients, one per firm, got {d.size}")
    players = player_names(names, c.size)

    def payoffs(x, theta):
        q = jnp.concatenate([x[p] for p in players])
        price = theta["a"] - theta["b"] * jnp.sum(q)
        profit = q * price - theta["c"] * q - 0.5 * theta["d"] * q * q
        return {p: profit[i] for i, p in enumerate(players)}

    def box(theta):
        top = theta["a"] / theta["b"]
        return {p: (0.0, top) for p in players}

    return Game(
        players={p: 1 for p in players},
        payoffs=payoffs,
        params={"a": float(a), "b": float(b), "c": c.tolist(), "d": d.tolist()},
        lower={p: 0.0 for p in players},
        search_box=box,
        name="cournot",
    )

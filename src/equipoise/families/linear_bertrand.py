"""Bertrand price competition with linear differentiated demand."""

from __future__ import annotations

from collections.abc import Sequence

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names


def linear_bertrand(a: float | Sequence[float] = 10.0, b: float = 2.0, d: float = 0.5,
                    costs: Sequence[float] = (1.0, 1.0),
                    names: Sequence[str] | None = None) -> Game:
    r"""Bertrand competition with linear demand: firm :math:`i` sets :math:`p_i \ge 0`.

    .. math:: q_i = a_i - b p_i + d \textstyle\sum_{j \ne i} p_j,
              \quad u_i = (p_i - c_i) q_i.

    Parameters
    ----------
    a : float or sequence of float
        Demand intercepts (parameter ``a``, one per firm; a number is shared).
    b, d : float
        Own-price and cross-price slopes (parameters ``b``, ``d``).
    costs : sequence of float
        Marginal costs (parameter ``c``); their number sets the number of firms.
    names : sequence of str, optional
        Firm names, default ``firm1 .. firmN``.

    Returns
    -------
    Game
        Prices are bounded below by 0. The search box for each price is
        :math:`[0, c_{max} + 4 (a_{max} + b c_{max}) / D]` with
        :math:`D = \max(2b - (n-1)|d|, b/10)`, a few times the symmetric
        equilibrium price.
    """
    c = np.atleast_1d(np.asarray(costs, dtype=float))
    if c.ndim != 1 or c.size < 1:
        raise InputError("costs: expected a non-empty list of marginal costs")
    n = c.size
    a_vec = np.broadcast_to(np.asarray(a, dtype=float), (n,)) if np.ndim(a) == 0 else np.asarray(a, dtype=float)
    if a_vec.shape != (n,):
        raise InputError(f"a: expected a number or {n} intercepts, one per firm, got {np.size(a)}")
    players = player_names(names, n)

    def payoffs(x, theta):
        p = jnp.concatenate([x[f] for f in players])
        q = theta["a"] - theta["b"] * p + theta["d"] * (jnp.sum(p) - p)
        profit = (p - theta["c"]) * q
        return {f: profit[i] for i, f in enumerate(players)}

    def box(theta):
        denom = jnp.maximum(2 * theta["b"] - (n - 1) * jnp.abs(theta["d"]), 0.1 * theta["b"])
        cmax = jnp.max(theta["c"])
        top = cmax + 4.0 * (jnp.max(theta["a"]) + theta["b"] * cmax) / denom
        return {f: (0.0, top) for f in players}

    return Game(
        players={f: 1 for f in players},
        payoffs=payoffs,
        params={"a": a_vec.tolist(), "b": float(b), "d": float(d), "c": c.tolist()},
        lower={f: 0.0 for f in players},
        search_box=box,
        name="linear_bertrand",
    )

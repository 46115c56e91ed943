"""Bertrand price competition with multinomial logit demand and multi-product firms."""

from __future__ import annotations

from collections.abc import Sequence

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game

#: The search box for a price runs from its cost to cost + LOGIT_BOX / alpha.
LOGIT_BOX = 10.0


def logit_shares(prices, delta, alpha):
    r"""Logit shares :math:`s_j = e^{v_j} / (1 + \sum_k e^{v_k})`, :math:`v = \delta - \alpha p`.

    Computed stably (the outside good has :math:`v_0 = 0`).
    """
    v = delta - alpha * prices
    top = jnp.maximum(jnp.max(v), 0.0)
    e = jnp.exp(v - top)
    return e / (jnp.exp(-top) + jnp.sum(e))


def logit_bertrand(delta: Sequence[float], alpha: float, costs: Sequence[float],
                   owner: Sequence[str] | None = None, market_size: float = 1.0) -> Game:
    r"""Logit Bertrand pricing: each firm sets the prices of the products it owns.

    .. math:: u_f = M \sum_{j \in f} (p_j - c_j)\, s_j(p),
              \quad s_j = \frac{e^{\delta_j - \alpha p_j}}{1 + \sum_k e^{\delta_k - \alpha p_k}}.

    Parameters
    ----------
    delta : sequence of float
        Mean utilities :math:`\delta_j` (parameter ``delta``).
    alpha : float
        Price coefficient :math:`\alpha > 0` (parameter ``alpha``).
    costs : sequence of float
        Marginal costs :math:`c_j` (parameter ``c``).
    owner : sequence of str, optional
        The firm owning each product; default: each product its own firm
        ``firm1 .. firmJ``. Ownership defines the players: firms appear in
        order of their first product, and a firm's actions are the prices of
        its products in product order. Parameters stay in product order.
    market_size : float
        :math:`M` (parameter ``size``).

    Returns
    -------
    Game
        Prices are unbounded; the search box for product :math:`j` is
        :math:`[c_j, c_j + 10/\alpha]`. The solver uses the first-order
        conditions divided by each product's (positive) share.
    """
    delta = np.atleast_1d(np.asarray(delta, dtype=float))
    c = np.atleast_1d(np.asarray(costs, dtype=float))
    J = delta.size
    if delta.ndim != 1 or J < 1:
        raise InputError("delta: expected a non-empty list of mean utilities, one per product")
    if c.shape != delta.shape:
        raise InputError(f"costs: expected {J} marginal costs, one per product, got {c.size}")
    if owner is None:
        owner = [f"firm{j + 1}" for j in range(J)]
    owner = [str(o) for o in owner]
    if len(owner) != J:
        raise InputError(f"owner: expected {J} firm names, one per product, got {len(owner)}")
    firms = list(dict.fromkeys(owner))
    products = {f: [j for j in range(J) if owner[j] == f] for f in firms}
    order = np.concatenate([products[f] for f in firms])

    def prices_of(x):
        stacked = jnp.concatenate([x[f] for f in firms])
        return jnp.zeros(J, dtype=stacked.dtype).at[order].set(stacked)

    def payoffs(x, theta):
        p = prices_of(x)
        s = logit_shares(p, theta["delta"], theta["alpha"])
        margin = theta["size"] * (p - theta["c"]) * s
        return {f: jnp.sum(margin[np.asarray(products[f])]) for f in firms}

    def foc(x, theta):
        # dU_f/dp_j = M s_j [1 - alpha m_j + alpha sum_{k in f} m_k s_k]; dividing by
        # M s_j > 0 keeps roots and signs and removes the flat tails where s_j -> 0.
        p = prices_of(x)
        s = logit_shares(p, theta["delta"], theta["alpha"])
        m = p - theta["c"]
        out = {}
        for f in firms:
            idx = np.asarray(products[f])
            out[f] = 1.0 - theta["alpha"] * m[idx] + theta["alpha"] * jnp.sum(m[idx] * s[idx])
        return out

    def box(theta):
        lo = theta["c"]
        hi = theta["c"] + LOGIT_BOX / theta["alpha"]
        return {f: (lo[np.asarray(products[f])], hi[np.asarray(products[f])]) for f in firms}

    def consumer_surplus(x, theta):
        # Inclusive value (Small & Rosen 1981), up to a constant: (M / alpha) log(1 + sum exp(v)).
        v = theta["delta"] - theta["alpha"] * prices_of(x)
        top = jnp.maximum(jnp.max(v), 0.0)
        return theta["size"] / theta["alpha"] * (top + jnp.log(jnp.exp(-top) + jnp.sum(jnp.exp(v - top))))

    game = Game(
        players={f: len(products[f]) for f in firms},
        payoffs=payoffs,
        params={"delta": delta.tolist(), "alpha": float(alpha), "c": c.tolist(), "size": float(market_size)},
        search_box=box,
        foc=foc,
        name="logit_bertrand",
        consumer_surplus=consumer_surplus,
    )
    return game

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


def inclusive_value(prices, theta):
    r"""Logit consumer surplus (Small & Rosen 1981), up to a constant:
    :math:`(M / \alpha) \log(1 + \sum_j e^{\delta_j - \alpha p_j})`, computed without overflow."""
    v = theta["delta"] - theta["alpha"] * prices
    top = jnp.maximum(jnp.max(v), 0.0)
    return theta["size"] / theta["alpha"] * (top + jnp.log(jnp.exp(-top) + jnp.sum(jnp.exp(v - top))))


def _checked(delta, costs, owner):
    """Validated ``(delta, costs, owner)`` as float arrays and a list of firm names."""
    delta = np.atleast_1d(np.asarray(delta, dtype=float))
    c = np.atleast_1d(np.asarray(costs, dtype=float))
    J = delta.size
    if delta.ndim != 1 or J < 1:
        raise InputError("delta: expected a non-empty list of mean utilities, one per product")
    if c.shape != delta.shape:
        raise InputError(f"costs: expected {J} marginal costs, one per product, got {c.size}")
    owner = [f"firm{j + 1}" for j in range(J)] if owner is None else [str(o) for o in owner]
    if len(owner) != J:
        raise InputError(f"owner: expected {J} firm names, one per product, got {len(owner)}")
    return delta, c, owner


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
    delta, c, owner = _checked(delta, costs, owner)
    J = delta.size
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
        return inclusive_value(prices_of(x), theta)

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


def ownership_matrix(owner: Sequence[str]) -> np.ndarray:
    """``Omega[j, k] = 1`` when products ``j`` and ``k`` have the same owner, else 0."""
    owner = [str(o) for o in owner]
    return np.array([[1.0 if a == b else 0.0 for b in owner] for a in owner])


def logit_products(delta: Sequence[float], alpha: float, costs: Sequence[float],
                   owner: Sequence[str] | None = None, names: Sequence[str] | None = None,
                   market_size: float = 1.0) -> Game:
    r"""Logit Bertrand with ownership as a parameter: each product's price is a player.

    Product :math:`j`'s price maximises its owner's profit weighted by the
    ownership matrix :math:`\Omega` (parameter ``ownership``, ``J x J``):

    .. math:: u_j = \sum_k \Omega_{jk} M (p_k - c_k) s_k .

    With :math:`\Omega` from an assignment of products to firms
    (:func:`ownership_matrix`; 1 for products of the same firm), the
    first-order conditions are exactly those of :func:`logit_bertrand` with
    that ``owner``, so the equilibria coincide. Because :math:`\Omega` is a
    parameter, a merger is a counterfactual on it: ``--to ownership=...``
    with the post-merger matrix (:func:`merged_ownership`), and intermediate
    matrices along the path are partial-ownership weights. Verification
    checks each price separately (a firm's joint deviation in several prices
    is covered by the firm-level game). A product's payoff is its owner's
    weighted profit; producer surplus counts each product's profit once.

    Parameters are ``delta``, ``alpha``, ``c``, ``size`` and ``ownership``;
    ``owner`` defaults to one firm per product; ``names`` name the products
    (default ``product1 ..``).
    """
    delta, c, owner = _checked(delta, costs, owner)
    J = delta.size
    names = [f"product{j + 1}" for j in range(J)] if names is None else [str(n) for n in names]
    if len(names) != J or len(set(names)) != J:
        raise InputError(f"names: expected {J} distinct product names")

    def prices_of(x):
        return jnp.concatenate([x[n] for n in names])

    def payoffs(x, theta):
        p = prices_of(x)
        s = logit_shares(p, theta["delta"], theta["alpha"])
        profit = theta["size"] * (p - theta["c"]) * s
        u = theta["ownership"] @ profit
        return {n: u[j] for j, n in enumerate(names)}

    def foc(x, theta):
        # du_j/dp_j = M s_j [Omega_jj (1 - alpha m_j) + alpha sum_k Omega_jk m_k s_k], divided by M s_j > 0.
        p = prices_of(x)
        s = logit_shares(p, theta["delta"], theta["alpha"])
        m = p - theta["c"]
        W = theta["ownership"]
        g = jnp.diag(W) * (1.0 - theta["alpha"] * m) + theta["alpha"] * (W @ (m * s))
        return {n: g[j:j + 1] for j, n in enumerate(names)}

    def consumer_surplus(x, theta):
        return inclusive_value(prices_of(x), theta)

    def box(theta):
        return {n: (theta["c"][j], theta["c"][j] + LOGIT_BOX / theta["alpha"]) for j, n in enumerate(names)}

    return Game(
        players={n: 1 for n in names},
        payoffs=payoffs,
        params={"delta": delta.tolist(), "alpha": float(alpha), "c": c.tolist(), "size": float(market_size),
                "ownership": ownership_matrix(owner).tolist()},
        search_box=box,
        foc=foc,
        name="logit_products",
        consumer_surplus=consumer_surplus,
        producer_surplus=lambda x, theta: jnp.sum(
            theta["size"] * (prices_of(x) - theta["c"]) * logit_shares(prices_of(x), theta["delta"], theta["alpha"])),
    )


def merged_ownership(owner: Sequence[str], merging: Sequence[str], name: str | None = None) -> np.ndarray:
    """The ownership matrix after the firms in ``merging`` combine (under ``name``)."""
    merging = [str(m) for m in merging]
    unknown = [m for m in merging if m not in set(map(str, owner))]
    if unknown:
        raise InputError(f"merging: {', '.join(unknown)} own no product (owners: {', '.join(dict.fromkeys(owner))})")
    label = name or "+".join(merging)
    return ownership_matrix([label if str(o) in merging else str(o) for o in owner])

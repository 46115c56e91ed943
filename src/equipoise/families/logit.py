"""Bertrand price competition with multinomial logit demand and multi-product firms."""

from __future__ import annotations

from collections.abc import Sequence

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

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


def _product_log(w_log_target, steps=40):
    r"""Solve :math:`w e^{w} = e^{L}` for :math:`w > 0` (the principal Lambert W of :math:`e^L`).

    Newton on :math:`h(u) = e^u + u - L` with :math:`w = e^u`; :math:`h` is increasing and
    convex, so the iteration converges from any start (after at most one step it approaches
    from the right, monotonically). Works elementwise, under ``jit`` and ``vmap``.
    """
    L = w_log_target
    u0 = jnp.where(L > 1.0, jnp.log(jnp.maximum(L, 1.0)), L)

    def step(_, u):
        e = jnp.exp(u)
        return u - (e + u - L) / (e + 1.0)

    return jnp.exp(lax.fori_loop(0, steps, step, u0))


def markup_map(prices, theta, weights):
    r"""One step of the logit markup equation, :math:`m \leftarrow 1/\alpha + (W (s \circ m)) / \mathrm{diag}(W)`.

    With ownership weights :math:`W` (1 for products of the same firm) the first-order
    condition of product :math:`j` divided by :math:`M s_j` reads
    :math:`W_{jj}(1 - \alpha m_j) + \alpha \sum_k W_{jk} m_k s_k = 0`, i.e.
    :math:`m = T(m)`; prices in, prices out (product order).
    """
    s = logit_shares(prices, theta["delta"], theta["alpha"])
    m = prices - theta["c"]
    return theta["c"] + 1.0 / theta["alpha"] + (weights @ (s * m)) / jnp.diag(weights)


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

    Notes
    -----
    Two facts of this demand system make the game cheap to solve and to verify.

    *Equal markups.* Dividing firm :math:`f`'s first-order condition for product
    :math:`j` by :math:`M s_j` gives :math:`1 - \alpha m_j + \alpha \sum_{k \in f}
    m_k s_k = 0`, so at every critical point all of a firm's products carry the
    same markup :math:`m_f = 1/(\alpha (1 - s_f))`, :math:`s_f` the firm's total
    share. The game's ``fixed_point`` map iterates this markup equation
    (:func:`markup_map`; Morrow & Skerlos 2011, "Fixed-point approaches to
    computing Bertrand-Nash equilibrium prices under mixed-logit demand",
    Operations Research 59(2)).

    *Exact best responses.* Given the others' prices, write
    :math:`A_f = \sum_{j \in f} e^{\delta_j - \alpha c_j}` and :math:`B_f = 1 +
    \sum_{k \notin f} e^{\delta_k - \alpha p_k}`; with a common markup :math:`m`,
    :math:`1 - s_f = B_f / (B_f + A_f e^{-\alpha m})` and the condition becomes
    :math:`(\alpha m - 1) e^{\alpha m - 1} = A_f / (B_f e)`: one root
    :math:`\alpha m = 1 + W(A_f / (B_f e))` (principal Lambert W). So the firm's
    profit has exactly one critical point. Profit tends to :math:`-\infty` as a
    price falls without bound and to the profit without that product as it
    rises, and the best profit, :math:`M w / \alpha` with :math:`w = W(A_f/(B_f e))`,
    increases with :math:`A_f`, so dropping products never pays: the maximum is
    attained at a finite point, which must be the critical point. It is the
    firm's global best response (the equal-markup property is in Anderson,
    de Palma & Thisse (1992), "Discrete Choice Theory of Product
    Differentiation", MIT Press, ch. 7, from memory). Verification uses it
    (``best_response``) to compute each firm's best gain exactly instead of
    searching for deviations.
    """
    delta, c, owner = _checked(delta, costs, owner)
    J = delta.size
    firms = list(dict.fromkeys(owner))
    products = {f: [j for j in range(J) if owner[j] == f] for f in firms}
    order = np.concatenate([products[f] for f in firms])  # stacked position -> product
    back = np.argsort(order)  # product -> stacked position
    firm_of = np.array([firms.index(o) for o in owner])  # product -> firm
    F = len(firms)
    # Vectorised over products (no per-firm Python loop), so the traced graph stays small.

    def stacked(x):
        return jnp.concatenate([x[f] for f in firms])

    def prices_of_stacked(x):
        return x[back]

    def firm_sum(v):
        return jax.ops.segment_sum(v, firm_of, num_segments=F)

    def split(v):
        return {f: v[o:o + len(products[f])] for f, o in zip(firms, np.cumsum([0] + [len(products[f]) for f in firms]))}

    def payoffs(x, theta):
        p = prices_of_stacked(stacked(x))
        s = logit_shares(p, theta["delta"], theta["alpha"])
        profit = firm_sum(theta["size"] * (p - theta["c"]) * s)
        return {f: profit[i] for i, f in enumerate(firms)}

    def foc(x, theta):
        # dU_f/dp_j = M s_j [1 - alpha m_j + alpha sum_{k in f} m_k s_k]; dividing by
        # M s_j > 0 keeps roots and signs and removes the flat tails where s_j -> 0.
        p = prices_of_stacked(stacked(x))
        s = logit_shares(p, theta["delta"], theta["alpha"])
        m = p - theta["c"]
        g = 1.0 - theta["alpha"] * m + theta["alpha"] * firm_sum(m * s)[firm_of]
        return split(g[order])

    def box(theta):
        lo = theta["c"][order]
        hi = lo + LOGIT_BOX / theta["alpha"]
        return {f: (a, b) for (f, a), b in zip(split(lo).items(), split(hi).values())}

    def consumer_surplus(x, theta):
        return inclusive_value(prices_of_stacked(stacked(x)), theta)

    same = jnp.asarray(ownership_matrix(owner))
    member = firm_of[None, :] == np.arange(F)[:, None]  # (F, J)

    def fixed_point(x, theta):
        return markup_map(prices_of_stacked(x), theta, same)[order]

    def best_response(x, theta):
        # Firm f's best reply to the others' prices: every own product at the markup
        # (1 + w) / alpha with w e^w = A_f / (B_f e), A_f = sum_{j in f} e^{delta_j - alpha c_j},
        # B_f = 1 + sum_{k not in f} e^{delta_k - alpha p_k} (see the notes above).
        p = prices_of_stacked(x)
        a = theta["delta"] - theta["alpha"] * theta["c"]
        v = theta["delta"] - theta["alpha"] * p
        log_a = jax.nn.logsumexp(jnp.where(member, a, -jnp.inf), axis=1)
        others = jnp.where(member, -jnp.inf, v)
        log_b = jax.nn.logsumexp(jnp.concatenate([jnp.zeros((F, 1)), others], axis=1), axis=1)
        w = _product_log(log_a - log_b - 1.0)
        markup = (1.0 + w) / theta["alpha"]  # (F,)
        return (theta["c"] + markup[firm_of])[order]

    game = Game(
        players={f: len(products[f]) for f in firms},
        payoffs=payoffs,
        params={"delta": delta.tolist(), "alpha": float(alpha), "c": c.tolist(), "size": float(market_size)},
        search_box=box,
        foc=foc,
        name="logit_bertrand",
        consumer_surplus=consumer_surplus,
        fixed_point=fixed_point,
        best_response=best_response,
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

    The game's ``fixed_point`` map is the markup equation with the
    ownership weights (:func:`markup_map`), for :func:`equipoise.fixed_point_solve`.

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
        fixed_point=lambda x, theta: markup_map(x, theta, theta["ownership"]),
    )


def merged_ownership(owner: Sequence[str], merging: Sequence[str], name: str | None = None) -> np.ndarray:
    """The ownership matrix after the firms in ``merging`` combine (under ``name``)."""
    merging = [str(m) for m in merging]
    unknown = [m for m in merging if m not in set(map(str, owner))]
    if unknown:
        raise InputError(f"merging: {', '.join(unknown)} own no product (owners: {', '.join(dict.fromkeys(owner))})")
    label = name or "+".join(merging)
    return ownership_matrix([label if str(o) in merging else str(o) for o in owner])

"""Proportional allocation of a divisible resource among price-anticipating bidders."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import NamedTuple

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names
from ._shares import impact, shares, steep_foc

#: Profiles with every bid below IDLE * (largest U_r(C)) count as "nobody bids" (see ``_shares``).
IDLE = 1e-7


def log_utility(d, a, s):
    r"""The bidders' utility :math:`U(d) = a\, s \log(1 + d / s)` (elementwise)."""
    return a * s * jnp.log1p(d / s)


def proportional_allocation(a: Sequence[float], s: float | Sequence[float] = 1.0, capacity: float = 1.0,
                            names: Sequence[str] | None = None) -> Game:
    r"""Proportional allocation: bidder :math:`r` bids :math:`w_r \ge 0` for a share of capacity :math:`C`.

    .. math:: d_r = C \frac{w_r}{\sum_k w_k}, \qquad
              u_r = U_r(d_r) - w_r, \qquad U_r(d) = a_r s_r \log(1 + d / s_r).

    Bidders anticipate the price :math:`\sum_k w_k / C` their bids set
    (Johari & Tsitsiklis 2004). :math:`a_r = U_r'(0)` is the marginal value of
    the first unit and :math:`s_r` the amount at which it has halved; large
    :math:`s_r` approaches linear utility :math:`a_r d`. Where nobody bids each
    gets :math:`C/n` (never an equilibrium: a tiny bid takes everything; see
    :mod:`equipoise.families._shares` for how the solver is kept away).

    Parameters
    ----------
    a : sequence of float
        Marginal values at zero, :math:`a_r > 0` (parameter ``a``); their
        number (at least two) sets the number of bidders.
    s : float or sequence of float
        Saturation scales :math:`s_r > 0` (parameter ``s``; a number is shared).
    capacity : float
        :math:`C > 0` (parameter ``capacity``).
    names : sequence of str, optional
        Bidder names, default ``bidder1 .. bidderN``.

    Returns
    -------
    Game
        Bids are bounded below by 0; the search box for bidder :math:`r` is
        :math:`[0, U_r(C)]` (a larger bid costs more than the whole resource
        is worth to it).

    Notes
    -----
    At an equilibrium every bidder with :math:`w_r > 0` satisfies
    :math:`U_r'(d_r)(1 - w_r / W)\, C / W = 1`, :math:`W = \sum_k w_k`; see
    :func:`allocation_efficiency` for the comparison with the optimum.

    Examples
    --------
    >>> game = proportional_allocation(a=[2.0, 1.5], capacity=4.0)
    >>> game.players, sorted(game.defaults)
    (('bidder1', 'bidder2'), ['a', 'capacity', 's'])
    """
    a_vec = np.atleast_1d(np.asarray(a, dtype=float))
    if a_vec.ndim != 1 or a_vec.size < 2:
        raise InputError("a: expected a list of at least two marginal values, one per bidder")
    n = a_vec.size
    s_vec = np.broadcast_to(np.asarray(s, dtype=float), (n,)) if np.ndim(s) == 0 else np.asarray(s, dtype=float)
    if s_vec.shape != (n,):
        raise InputError(f"s: expected a number or {n} saturation scales, one per bidder, got {np.size(s)}")
    for field, arr in (("a", a_vec), ("s", s_vec), ("capacity", np.asarray([capacity], dtype=float))):
        if not np.all(np.isfinite(arr)) or np.any(arr <= 0):
            raise InputError(f"{field}: expected positive numbers, got {arr.tolist()}")
    players = player_names(names, n, prefix="bidder")

    def worth(theta):
        return log_utility(theta["capacity"], theta["a"], theta["s"])

    def utility(w, theta):
        C, av, sv = theta["capacity"], theta["a"], theta["s"]
        h = impact(w, 1.0, 1.0)
        # Marginal payoff U'(C/n) C * slope - 1 = +1 where nobody bids.
        slope = 2.0 / (C * av * sv / (sv + C / n))
        d = C * shares(h, w, slope, IDLE * jnp.max(worth(theta)))
        return log_utility(d, av, sv) - w

    def payoffs(x, theta):
        u = utility(jnp.concatenate([x[p] for p in players]), theta)
        return {q: u[i] for i, q in enumerate(players)}

    def box(theta):
        top = worth(theta)
        return {q: (0.0, top[i]) for i, q in enumerate(players)}

    return Game(
        players={p: 1 for p in players},
        payoffs=payoffs,
        params={"a": a_vec.tolist(), "s": s_vec.tolist(), "capacity": float(capacity)},
        lower={p: 0.0 for p in players},
        search_box=box,
        foc=steep_foc(utility, players, lambda theta: jnp.max(worth(theta))),
        name="proportional_allocation",
    )


class Efficiency(NamedTuple):
    """Aggregate utility at a bid profile against the best division of the capacity.

    Attributes
    ----------
    ratio : float
        ``achieved / optimum``.
    achieved, optimum : float
        :math:`\\sum_r U_r(d_r)` at the bids, and its maximum over
        :math:`d \\ge 0, \\sum_r d_r = C`.
    allocation, best_allocation : ndarray
        The amounts :math:`d_r` the bids buy, and the optimal ones.
    """

    ratio: float
    achieved: float
    optimum: float
    allocation: np.ndarray
    best_allocation: np.ndarray


def best_allocation(a, s, capacity) -> np.ndarray:
    r"""The division of ``capacity`` maximising :math:`\sum_r a_r s_r \log(1 + d_r / s_r)`.

    Water-filling: :math:`U_r'(d_r) = a_r s_r / (s_r + d_r) = \lambda` on the
    bidders with :math:`a_r > \lambda`, :math:`d_r = 0` for the rest, so
    :math:`d_r = s_r (a_r / \lambda - 1)` and, over the served set :math:`A`,
    :math:`\lambda = \sum_A a_r s_r / (C + \sum_A s_r)`.
    """
    a, s = np.asarray(a, dtype=float), np.asarray(s, dtype=float)
    order = np.argsort(-a, kind="stable")
    for k in range(a.size, 0, -1):
        top = order[:k]
        lam = np.sum(a[top] * s[top]) / (capacity + np.sum(s[top]))
        if a[top[-1]] > lam:  # every served bidder values the first unit above the water level
            d = np.zeros_like(a)
            d[top] = s[top] * (a[top] / lam - 1.0)
            return d
    raise AssertionError("the bidder with the largest a is always served")


def allocation_efficiency(game: Game, bids, params: Mapping | None = None) -> Efficiency:
    r"""Efficiency of bids in a :func:`proportional_allocation` game.

    .. math:: \frac{\sum_r U_r(C w_r / W)}{\max_{d \ge 0,\ \sum d_r = C} \sum_r U_r(d_r)}

    At a Nash equilibrium this is at least 3/4 (Johari & Tsitsiklis 2004).

    Parameters
    ----------
    game : Game
        Made by :func:`proportional_allocation`.
    bids : array (n,) or mapping of bidder name to bid
        For example ``solution.equilibria[0].x``.
    params : mapping, optional
        Parameter overrides, as passed to :func:`equipoise.solve`.

    Returns
    -------
    Efficiency

    Examples
    --------
    >>> game = proportional_allocation(a=[2.0, 1.0], s=100.0, capacity=1.0)
    >>> round(allocation_efficiency(game, [0.5, 0.5]).ratio, 3)
    0.752
    """
    if getattr(game, "name", None) != "proportional_allocation":
        raise InputError("game: expected a game made by proportional_allocation")
    theta = {k: np.asarray(v) for k, v in game.theta(params).items()}
    if isinstance(bids, Mapping):
        bids = [bids[p] for p in game.players]
    w = np.asarray(bids, dtype=float).reshape(-1)
    if w.shape != (len(game.players),) or np.any(w < 0) or w.sum() <= 0:
        raise InputError(f"bids: expected {len(game.players)} non-negative bids, not all zero, got {w.tolist()}")
    C, a, s = float(theta["capacity"]), theta["a"], theta["s"]
    d = C * w / w.sum()
    best = best_allocation(a, s, C)
    achieved = float(np.sum(a * s * np.log1p(d / s)))
    optimum = float(np.sum(a * s * np.log1p(best / s)))
    return Efficiency(achieved / optimum, achieved, optimum, d, best)

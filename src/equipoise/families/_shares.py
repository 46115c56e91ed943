r"""Ratio-form shares :math:`p_i = h(x_i) / \sum_j h(x_j)` for contests and proportional allocation.

Three places need care:

* :math:`h(x) = x^r` at :math:`x = 0`, where its one-sided slope is 1
  (:math:`r = 1`), 0 (:math:`r > 1`) or infinite (:math:`r < 1`). A player
  resting at zero needs the true one-sided slope, or the first-order
  conditions accept zero effort for players who would gain by entering.
  :func:`impact` returns 0 for :math:`x \le 0` with that slope (for
  :math:`r < 1` the slope of :math:`x^r` at a tiny ``floor`` stands in for
  infinity, so derivatives stay finite).
* the profile where nobody spends. The share is undefined there and jumps
  (a player spending anything wins all), and for :math:`r > 1` profiles where
  one player spends a vanishing amount and the rest nothing satisfy the
  first-order conditions ever more closely (the lone spender wants to spend
  less, the others' marginal gain from entering is 0). :func:`shares` treats
  every profile with all actions below ``idle`` (a tiny multiple of the
  game's scale) as "nobody spends": :math:`p_i = 1/n`, with a slope
  ``slope_i`` in the player's own action chosen by the family so that every
  marginal payoff there is :math:`+1`. That region then fails the
  first-order conditions by a clear margin, as it should (nobody spending is
  never an equilibrium), instead of offering the solver near-roots.
* large actions, where the share saturates and the marginal payoff tends to
  :math:`-1` with vanishing curvature: Newton steps from there run off to
  huge actions. :func:`steep_foc` gives the solver the marginal payoffs
  times :math:`1 + (\sum_j x_j / s)^2`, a positive factor (same roots and
  signs) that keeps the system steep far out.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp


def impact(x, r, floor):
    r""":math:`h(x) = x^r` for :math:`x > 0`, else 0 with the one-sided slope of :math:`x^r` at 0.

    The slope for :math:`x \le 0` is 0 when :math:`r > 1`, 1 when :math:`r = 1`
    and :math:`r\,\mathrm{floor}^{r-1}` (large) when :math:`r < 1`.

    Examples
    --------
    >>> import jax
    >>> float(jax.grad(lambda x: impact(x, 1.0, 1e-9))(0.0))
    1.0
    """
    pos = x > 0
    safe = jnp.where(pos, x, 1.0)
    slope = jax.lax.stop_gradient(jnp.where(r > 1, 0.0, r * floor ** (r - 1.0)))
    # value 0 and derivative `slope` on x <= 0: a - stop_gradient(a) is exactly 0
    kink = slope * x - jax.lax.stop_gradient(slope * x)
    return jnp.where(pos, safe ** r, kink)


def shares(h, x, slope, idle):
    r"""Shares :math:`h_i / \sum_j h_j`, or :math:`1/n` with own slope ``slope_i`` when all :math:`x_j \le` ``idle``.

    In the idle region
    :math:`p_i = 1/n + \mathrm{slope}_i \, \tfrac{n}{n-1} (x_i - \bar x)`,
    which sums to 1 and has :math:`\partial p_i / \partial x_i = \mathrm{slope}_i`.
    """
    n = h.shape[0]
    total = jnp.sum(h)
    active = (jnp.max(x) > idle) & (total > 0)
    safe = jnp.where(active, total, 1.0)
    tie = 1.0 / n + slope * (n / (n - 1.0)) * (x - jnp.mean(x))
    return jnp.where(active, h / safe, tie)


def steep_foc(utility, players, scale):
    r"""A solver system :math:`g_i = (1 + (\sum_j x_j / s)^2)\, \partial u_i / \partial x_i`.

    ``utility(e, theta)`` returns all payoffs for stacked actions ``e``;
    ``scale(theta)`` gives :math:`s`. Returns ``foc(x, theta)`` for :class:`Game`.
    """

    def foc(x, theta):
        e = jnp.concatenate([x[p] for p in players])
        grad = jnp.diagonal(jax.jacfwd(utility)(e, theta))
        g = grad * (1.0 + (jnp.sum(e) / scale(theta)) ** 2)
        return {p: g[i:i + 1] for i, p in enumerate(players)}

    return foc

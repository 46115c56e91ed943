r"""Welfare at an equilibrium, and how far a consumer-surplus change may be from exact welfare.

Producer surplus is the sum of the players' payoffs (or the model's own
``producer_surplus``); consumer surplus comes from
the model (``Game.consumer_surplus``; the logit family provides the inclusive
value); total welfare is their sum.

Willig (1976), "Consumer's surplus without apology", AER 66(4): for a
consumer-surplus change :math:`A`, income :math:`M` and an income elasticity
between :math:`\eta_L` and :math:`\eta_U`, the relative gap between :math:`A` and
the compensating (or equivalent) variation lies between
:math:`\eta_L |A| / (2M)` and :math:`\eta_U |A| / (2M)`, provided
:math:`|\eta A / (2M)| \le 0.05` and :math:`|A / M| \le 0.9` (conditions as
recalled from the source, not re-derived).
"""

from __future__ import annotations

from typing import Any

import numpy as np

#: Willig's conditions for the bound to hold.
WILLIG_MAX_TERM, WILLIG_MAX_SHARE = 0.05, 0.9


def welfare(game, x, theta) -> dict[str, float | None]:
    """Consumer surplus (None when the model has none), producer surplus (the model's, or the
    sum of payoffs), total."""
    x = np.asarray(x, dtype=float)
    if game.producer_surplus is not None:
        ps = float(game.producer_surplus(game.split(x), theta))
    else:
        ps = float(np.sum(np.asarray(game.payoff_vector(x, theta))))
    cs = None if game.consumer_surplus is None else float(game.consumer_surplus(game.split(np.asarray(x)), theta))
    return {"consumer_surplus": cs, "producer_surplus": ps, "total": None if cs is None else cs + ps}


def willig_bound(change: float, income: float, elasticity) -> dict[str, Any]:
    """Relative bound on the gap between a surplus change and compensating/equivalent variation.

    ``elasticity`` is one number or a ``(low, high)`` range. Returns
    ``{"bound": largest relative gap, "low": smallest, "conditions_hold": bool,
    "warning": str or None}``.
    """
    lo, hi = (float(elasticity), float(elasticity)) if np.ndim(elasticity) == 0 else map(float, elasticity)
    share = abs(change) / income
    low, high = abs(lo) * share / 2.0, abs(hi) * share / 2.0
    holds = max(low, high) <= WILLIG_MAX_TERM and share <= WILLIG_MAX_SHARE
    warning = None if holds else (
        f"Willig's conditions fail (|eta A / 2M| = {max(low, high):.3g} must be <= {WILLIG_MAX_TERM}, "
        f"|A / M| = {share:.3g} <= {WILLIG_MAX_SHARE}): the bound is not reliable")
    return {"bound": max(low, high), "low": min(low, high), "conditions_hold": holds, "warning": warning}

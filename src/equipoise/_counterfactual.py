"""Counterfactuals: the equilibrium a baseline equilibrium turns into under new parameters.

The counterfactual equilibrium is found by continuation from the baseline one
along the straight path between the two parameter settings
(:func:`equipoise.trace_between`), so like is compared with like. When the
path folds back (the equilibrium disappears), that is reported, with the
equilibria that :func:`equipoise.solve` finds at the counterfactual setting
instead.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ._continuation import Branch, trace_between
from ._errors import InputError
from ._welfare import welfare, willig_bound


@dataclass(frozen=True)
class Counterfactual:
    """Baseline and counterfactual ends of one path, with welfare and the path's events."""

    baseline: dict[str, Any]
    counterfactual: dict[str, Any] | None
    path: Branch
    alternatives: list[dict[str, Any]]
    willig: dict[str, Any] | None


def _end(game, x, theta, stability, free=None) -> dict[str, Any]:
    u = np.asarray(game.payoff_vector(np.asarray(x), theta))
    w = welfare(game, x, theta)
    return {"x": np.asarray(x), "actions": {p: np.asarray(a) for p, a in game.split(np.asarray(x)).items()},
            "payoffs": {p: float(u[i]) for i, p in enumerate(game.players)},
            "consumer_surplus": w["consumer_surplus"], "producer_surplus": w["producer_surplus"],
            "stability": stability, "free": None if free is None else np.asarray(free)}


def counterfactual(game, baseline: dict | None, changes: dict, *, equilibrium: int = 0, income=None,
                   elasticity=None, **solve_options) -> Counterfactual:
    """Compare the ``equilibrium``-th baseline equilibrium with what it becomes under ``changes``.

    Parameters
    ----------
    game : Game
    baseline : dict or None
        Parameter overrides of the baseline.
    changes : dict
        Overrides that define the counterfactual (applied on top of ``baseline``).
    equilibrium : int
        Which baseline equilibrium (0-based, in :func:`equipoise.solve` order).
    income, elasticity : float, optional
        Income ``M`` and income elasticity (a number or a ``(low, high)`` range);
        with both, the consumer-surplus change carries Willig's bound.
    """
    from ._solve import solve

    if not changes:
        raise InputError("--to: give at least one NAME=VALUE for the counterfactual")
    if (income is None) != (elasticity is None):
        raise InputError("--income and --income-elasticity go together: give both or neither")
    if income is not None and not income > 0:
        raise InputError(f"--income: expected a positive number, got {income}")
    base_params = dict(baseline or {})
    cf_params = {**base_params, **changes}
    game.theta(cf_params)  # unknown names and bad shapes fail here, with one line
    base = solve(game, base_params, **solve_options)
    if not base.equilibria:
        raise InputError("no baseline equilibrium was found (try more --starts)")
    if not 0 <= equilibrium < len(base.equilibria):
        raise InputError(f"--equilibrium {equilibrium + 1}: {len(base.equilibria)} baseline equilibria were found")
    eq = base.equilibria[equilibrium]
    path = trace_between(game, eq.x, base_params, cf_params)
    theta_b, theta_c = game.theta(base_params), game.theta(cf_params)
    start = _end(game, eq.x, theta_b, eq.stability, eq.interior)
    end, alternatives = None, []
    if path.status == "reached_end":
        end = _end(game, path.points[-1].x, theta_c, path.points[-1].stability, path.points[-1].free)
    else:
        alt = solve(game, cf_params, **solve_options)
        alternatives = [_end(game, e.x, theta_c, e.stability, e.interior) for e in alt.equilibria]
    willig = None
    if income is not None and end is not None and start["consumer_surplus"] is not None:
        willig = willig_bound(end["consumer_surplus"] - start["consumer_surplus"], float(income), elasticity)
    return Counterfactual(start, end, path, alternatives, willig)

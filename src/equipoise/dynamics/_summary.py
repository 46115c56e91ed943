"""JSON dicts and plain-words summaries of simulated runs and basins (for the command line)."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._report import CAUTION


def _finite(value):
    """JSON has no NaN or infinity: non-finite numbers (a blown-up run) become null."""
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    if value is None or isinstance(value, bool):
        return value
    v = float(value)
    return v if np.isfinite(v) else None


def _rule_text(rule: dict[str, str]) -> str:
    kinds = set(rule.values())
    return next(iter(kinds)) if len(kinds) == 1 else ", ".join(f"{p}: {r}" for p, r in rule.items())


def simulation_dict(sim, game, model: str) -> dict[str, Any]:
    """One run: settings, outcome, where it ended; the path every ``stride`` steps (at most 1000 rows)."""
    stride = max(1, (len(sim.times) - 1) // 1000)
    return {
        "model": model,
        "rule": dict(sim.rule),
        "speeds": sim.speeds.tolist(),
        "settings": dict(sim.settings),
        "outcome": sim.outcome.name,
        "criterion": sim.outcome.value,
        "equilibrium": None if sim.equilibrium is None else sim.equilibrium + 1,
        "converged_at": _finite(sim.converged_at),
        "final": {game.coordinate_name(k): _finite(v) for k, v in enumerate(sim.path[-1])},
        "equilibria": [e.tolist() for e in sim.equilibria],
        "stats": {k: _finite(v) for k, v in sim.stats.items()},
        "path": {"times": sim.times[::stride].tolist(), "actions": _finite(sim.path[::stride].tolist())},
        "caution": CAUTION,
    }


def simulation_text(sim, game, model: str) -> str:
    unit = "time" if "dt" in sim.settings else "step"
    size = sim.settings.get("dt", sim.settings.get("lr"))
    lines = [f"model: {model}",
             f"rule: {_rule_text(sim.rule)}; speeds {np.round(sim.speeds, 6).tolist()}; "
             f"{sim.settings['steps']} steps" + (f" of {'dt' if unit == 'time' else 'lr'} {size:.4g}" if size else "")]
    if sim.settings.get("perturb") is not None:
        lines.append(f"start: equilibrium perturbed by {sim.settings['perturb']:g} (relative)")
    what = sim.outcome.name
    if sim.equilibrium is not None:
        what += f" to equilibrium {sim.equilibrium + 1}"
    elif sim.outcome.name == "converged":
        what += " to a rest point that is not among the known Nash equilibria"
    if sim.converged_at is not None:
        what += f" (settled by {unit} {sim.converged_at:.4g})"
    lines.append(f"outcome: {what} -- {sim.outcome.value}")
    lines.append("final actions: " + ", ".join(f"{game.coordinate_name(k)} = {v:.6g}"
                                               for k, v in enumerate(sim.path[-1])))
    if "growth" in sim.stats:
        lines.append(f"distance from the reference point grew by a factor {sim.stats['growth']:.3g}")
    lines += ["", CAUTION]
    return "\n".join(lines)


def basins_dict(b, game, model: str) -> dict[str, Any]:
    return {"model": model, "rule": dict(b.rule), "speeds": b.speeds.tolist(),
            "settings": {k: _finite(v) if isinstance(v, float) else v for k, v in b.settings.items()},
            "equilibria": [{"actions": e.tolist(), "share": s} for e, s in zip(b.equilibria, b.shares)],
            "outcomes": dict(b.counts), "caution": CAUTION}


def basins_text(b, game, model: str) -> str:
    lines = [f"model: {model}",
             f"rule: {_rule_text(b.rule)}; speeds {np.round(b.speeds, 6).tolist()}; "
             f"{b.settings['starts']} starts, {b.settings['steps']} steps each"]
    for k, (e, share) in enumerate(zip(b.equilibria, b.shares)):
        acts = ", ".join(f"{game.coordinate_name(i)} = {v:.6g}" for i, v in enumerate(e))
        lines.append(f"  equilibrium {k + 1} ({acts}): reached from {share:.1%} of starts")
    lines.append("outcomes: " + ", ".join(f"{n} {c}" for n, c in b.counts.items()))
    lines += ["", CAUTION]
    return "\n".join(lines)

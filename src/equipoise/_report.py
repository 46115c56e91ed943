"""Reports of a solve: a JSON-ready dict and a plain-text table."""

from __future__ import annotations

from typing import Any

import numpy as np

from ._status import Nash

CAUTION = (
    "Caution: results are only as good as the model and its parameters. For antitrust, "
    "regulatory or other consequential use, follow the applicable guidelines and seek "
    "qualified expert review."
)

NASH_WORDS = {
    Nash.global_: "Nash equilibrium: no player found a profitable deviation",
    Nash.local: "local Nash equilibrium only: second-order conditions hold, but a player "
                "gains by a larger deviation",
    Nash.not_nash: "NOT a Nash equilibrium: a first-order point some player can improve on",
}


def _plain(value) -> Any:
    arr = np.asarray(value)
    return float(arr) if arr.ndim == 0 else arr.tolist()


def solution_dict(solution, game, model: str) -> dict[str, Any]:
    """The JSON object for ``equipoise solve --json``."""
    return {
        "model": model,
        "players": {p: m for p, m in zip(game.players, game.sizes)},
        "params": {k: _plain(v) for k, v in solution.params.items()},
        "status": solution.status.name,
        "message": solution.message,
        "equilibria": [
            {
                "actions": {p: np.asarray(a).tolist() for p, a in e.actions.items()},
                "payoffs": dict(e.payoffs),
                "residual": e.residual,
                "nash": e.nash.value,
                "jacobian": np.asarray(e.jacobian).tolist(),
                "deviation_gains": {p: float(g) for p, g in zip(game.players, e.gains)},
                "starts": e.starts,
            }
            for e in solution.equilibria
        ],
        "stats": solution.stats,
        "caution": CAUTION,
    }


def _num(v: float) -> str:
    return f"{v:.6g}"


def _param_text(v) -> str:
    arr = np.asarray(v)
    if arr.ndim == 0:
        return _num(float(arr))
    return np.array2string(arr, separator=", ", formatter={"float_kind": _num})


def solution_table(solution, game, model: str) -> str:
    """A plain-text report, one block per equilibrium."""
    st = solution.stats
    lines = [
        f"model: {model}   ({len(game.players)} players, {game.n} actions)",
        "parameters: " + (", ".join(f"{k} = {_param_text(v)}" for k, v in solution.params.items()) or "none"),
        f"{len(solution.equilibria)} distinct first-order point(s) from {st['starts']} starts "
        f"({st['converged']} converged) in {st['seconds']:.1f} s",
    ]
    if not solution.equilibria:
        lines.append(f"no equilibrium: {solution.message}")
    width = max(len("player"), *(len(p) for p in game.players))
    for k, e in enumerate(solution.equilibria, 1):
        lines.append("")
        lines.append(f"equilibrium {k}: {NASH_WORDS[e.nash]}")
        lines.append(f"  {'player'.ljust(width)}  {'actions':<28}  payoff")
        for i, p in enumerate(game.players):
            acts = ", ".join(_num(float(a)) for a in e.actions[p])
            lines.append(f"  {p.ljust(width)}  {acts:<28}  {_num(e.payoffs[p])}")
        at_bound = [game.coordinate_name(j) for j in range(game.n) if not e.interior[j]]
        lines.append(f"  KKT residual {e.residual:.1e}; reached from {e.starts} start(s)"
                     + (f"; at a bound: {', '.join(at_bound)}" if at_bound else ""))
        if e.nash is not Nash.global_:
            gainers = [f"{p} (+{_num(float(g))})" for p, g in zip(game.players, e.gains) if g > 0]
            if gainers:
                lines.append("  best deviation gains: " + ", ".join(gainers))
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)

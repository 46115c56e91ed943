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
                "stability": _stability_dict(e, game),
            }
            for e in solution.equilibria
        ],
        "rosen": solution.rosen,
        "stats": solution.stats,
        "caution": CAUTION,
    }


def _stability_dict(e, game) -> dict[str, Any] | None:
    """The stability object, naming the free coordinates its certificates refer to."""
    return _labels_dict(e.stability, e.interior, game)


def _labels_dict(report, free, game) -> dict[str, Any] | None:
    if report is None:
        return None
    out = report.to_dict()
    out["coordinates"] = [game.coordinate_name(k) for k in range(game.n) if free[k]]
    return out


def branches_dict(branches, game, model: str, param: str, start: float, end: float) -> dict[str, Any]:
    """The JSON object for ``equipoise trace --json``."""
    def actions(x):
        return {p: np.asarray(a).tolist() for p, a in game.split(np.asarray(x)).items()}

    return {
        "model": model,
        "param": param,
        "from": start,
        "to": end,
        "branches": [
            {
                "status": b.status,
                "points": [{"param": pt.param, "actions": actions(pt.x),
                            "stability": _labels_dict(pt.stability, pt.free, game)} for pt in b.points],
                "events": [{"kind": ev.kind, "param": ev.param, "actions": actions(ev.x), **ev.detail}
                           for ev in b.events],
                "stats": b.stats,
            }
            for b in branches
        ],
        "caution": CAUTION,
    }


def branches_table(branches, game, model: str, param: str, start: float, end: float) -> str:
    """A plain-text report of traced branches: where each starts and ends, and its events."""
    lines = [f"model: {model}   tracing {param} from {_num(start)} to {_num(end)}",
             f"{len(branches)} branch(es)"]

    def acts(x):
        return ", ".join(f"{game.coordinate_name(k)} = {_num(float(v))}" for k, v in enumerate(np.asarray(x)))

    for k, b in enumerate(branches, 1):
        lines.append("")
        lines.append(f"branch {k}: {b.status.replace('_', ' ')} after {len(b.points)} points")
        lines.append(f"  start ({param} = {_num(b.points[0].param)}): {acts(b.points[0].x)}")
        lines.append(f"  end   ({param} = {_num(b.points[-1].param)}): {acts(b.points[-1].x)}")
        if not b.events:
            lines.append("  no events")
        for ev in b.events:
            extra = ""
            if ev.kind == "bound":
                extra = f" ({ev.detail['coordinate']} {ev.detail['action']} its bound)"
            elif ev.kind == "speed_verdict":
                extra = (f" (per-player {ev.detail['before']['player_speeds']} -> {ev.detail['after']['player_speeds']},"
                         f" per-coordinate {ev.detail['before']['coordinate_speeds']} -> "
                         f"{ev.detail['after']['coordinate_speeds']})")
            lines.append(f"  {ev.kind} at {param} = {_num(ev.param)}{extra}: {acts(ev.x)}")
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)


def _num(v: float) -> str:
    return f"{v:.6g}"


def _param_text(v) -> str:
    arr = np.asarray(v)
    if arr.ndim == 0:
        return _num(float(arr))
    return np.array2string(arr, separator=", ", formatter={"float_kind": _num})


_METHOD_NAMES = {"newton": "Newton", "krylov": "Newton-Krylov", "fixed_point": "the markup fixed point"}


def _method_text(stats) -> str:
    if "method" not in stats:
        return ""
    text = f"; by {_METHOD_NAMES.get(stats['method'], stats['method'])}"
    if stats.get("newton_fallback_starts"):
        text += f", Newton from {stats['newton_fallback_starts']} unsettled start(s)"
    return text


def solution_table(solution, game, model: str) -> str:
    """A plain-text report, one block per equilibrium."""
    st = solution.stats
    lines = [
        f"model: {model}   ({len(game.players)} players, {game.n} actions)",
        "parameters: " + (", ".join(f"{k} = {_param_text(v)}" for k, v in solution.params.items()) or "none"),
        f"{len(solution.equilibria)} distinct first-order point(s) from {st['starts']} starts "
        f"({st['converged']} converged{_method_text(st)}) in {st['seconds']:.1f} s",
    ]
    if "deflation" in st:
        d = st["deflation"]
        lines.append(f"all-equilibria search: {d['rounds']} deflation round(s), {d['newton_runs']} Newton runs, "
                     f"new per round {d['new_per_round']}"
                     + ("; the last round found nothing new" if d["exhausted"] else "; stopped at the round limit"))
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
        if e.stability is not None:
            lines.extend("  " + text for text in stability_lines(e.stability))
        if e.nash is not Nash.global_:
            gainers = [f"{p} (+{_num(float(g))})" for p, g in zip(game.players, e.gains) if g > 0]
            if gainers:
                lines.append("  best deviation gains: " + ", ".join(gainers))
    rosen = solution.rosen or {}
    if rosen.get("weights"):
        lines.append("")
        lines.append("Rosen's condition holds (quadratic game) with player weights "
                     f"{_speeds_text(rosen['weights'])}: the equilibrium is unique and gradient play "
                     "(projected onto the bounds) reaches it from anywhere, at any per-player speeds.")
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)


def _speeds_text(v) -> str:
    return "[" + ", ".join(_num(k) for k in v) + "]"


def _interval_text(lo, hi) -> str:
    return f"({'0' if lo is None else _num(lo)}, {'inf' if hi is None else _num(hi)})"


def _speed_class_line(label: str, v) -> str:
    if v.verdict == "robust":
        return f"{label}: stable for any such speeds ({v.method})"
    if v.verdict == "fragile":
        c = v.certificate
        return (f"{label}: FRAGILE: speeds {_speeds_text(c['speeds'])} destabilise it "
                f"(scaled abscissa {c['abscissa']:.2g}; {v.method})")
    return f"{label}: undecided ({v.method})"


def stability_lines(rep) -> list[str]:
    """Stability verdicts in words, one per line."""
    eq = rep.equal_speeds
    words = {"stable": "stable", "borderline": "borderline (neither converges nor diverges locally)",
             "unstable": "UNSTABLE"}
    abscissa = "" if eq["abscissa"] is None else f" (spectral abscissa {eq['abscissa']:.3g})"
    lines = [f"equal speeds: {words[eq['verdict']]}{abscissa}",
             _speed_class_line("per-player speeds", rep.player_speeds)]
    if rep.player_speeds.stable_ratios is not None:
        spans = ", ".join(_interval_text(lo, hi) for lo, hi in rep.player_speeds.stable_ratios) or "none"
        lines.append(f"  stable speed ratios k2/k1: {spans}")
    lines.append(_speed_class_line("per-coordinate speeds", rep.coordinate_speeds))
    extras = []
    if rep.hicksian is not None:
        extras.append("Hicksian" if rep.hicksian else "not Hicksian")
    if rep.learning_rate_limit is not None:
        extras.append(f"gradient steps stable below step size {_num(rep.learning_rate_limit)}")
    br = rep.best_response
    if br["verdict"] is not None:
        extras.append(f"simultaneous best responses {br['verdict']} (radius {_num(br['spectral_radius'])})")
    if extras:
        lines.append("; ".join(extras))
    return lines


def statics_dict(results, game, model: str, wrt: str, params) -> dict[str, Any]:
    """The JSON object for ``equipoise statics --json``."""
    return {
        "model": model,
        "wrt": wrt,
        "params": {k: _plain(v) for k, v in params.items()},
        "rows": [game.coordinate_name(k) for k in range(game.n)],
        "equilibria": [
            {
                "actions": {p: np.asarray(a).tolist() for p, a in e.actions.items()},
                "nash": e.nash.value,
                "derivatives": {wrt: np.asarray(D).tolist()},
                "stability": _stability_dict(e, game),
                "trust": flags,
            }
            for e, D, flags in results
        ],
        "caution": CAUTION,
    }


def statics_table(results, game, model: str, wrt: str) -> str:
    """Derivative matrices in plain text, one block per equilibrium, with the trust flags."""
    lines = [f"model: {model}   derivatives of the equilibrium actions with respect to {wrt}"]
    names = [game.coordinate_name(k) for k in range(game.n)]
    width = max(len(n) for n in names)
    for k, (e, D, flags) in enumerate(results, 1):
        D = np.asarray(D)
        cols = [wrt] if D.shape[1] == 1 else [f"{wrt}[{j}]" for j in range(D.shape[1])]
        lines.append("")
        lines.append(f"equilibrium {k}: {NASH_WORDS[e.nash]}")
        lines.append("  " + " " * width + "  " + "  ".join(f"{c:>12}" for c in cols))
        for i, name in enumerate(names):
            lines.append(f"  {name.ljust(width)}  " + "  ".join(f"{_num(float(v)):>12}" for v in D[i]))
        if flags["flag"]:
            lines.append(f"  WARNING: {flags['flag']}")
        elif flags["stable"]:
            lines.append("  stable and " + ("Hicksian" if flags["hicksian"] else "Hicksian status unknown")
                         + ": comparative statics can be relied on locally")
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)


def _end_dict(end, game) -> dict[str, Any] | None:
    if end is None:
        return None
    stab = end["stability"]
    free = None
    if stab is not None:
        free = np.ones(game.n, dtype=bool) if end.get("free") is None else end["free"]
    return {
        "actions": {p: np.asarray(a).tolist() for p, a in end["actions"].items()},
        "payoffs": dict(end["payoffs"]),
        "consumer_surplus": end["consumer_surplus"],
        "producer_surplus": end["producer_surplus"],
        "stability": _labels_dict(stab, free, game) if stab is not None else None,
    }


def counterfactual_dict(result, game, model: str) -> dict[str, Any]:
    """The JSON object for ``equipoise counterfactual --json``."""
    def actions(x):
        return {p: np.asarray(a).tolist() for p, a in game.split(np.asarray(x)).items()}

    return {
        "model": model,
        "baseline": _end_dict(result.baseline, game),
        "counterfactual": _end_dict(result.counterfactual, game),
        "path": {"status": result.path.status,
                 "events": [{"kind": ev.kind, "param": ev.param, "actions": actions(ev.x), **ev.detail}
                            for ev in result.path.events]},
        "changes": None if result.counterfactual is None else {
            "actions": {p: (np.asarray(result.counterfactual["actions"][p]) - np.asarray(a)).tolist()
                        for p, a in result.baseline["actions"].items()},
            "payoffs": {p: result.counterfactual["payoffs"][p] - v for p, v in result.baseline["payoffs"].items()},
            "producer_surplus": result.counterfactual["producer_surplus"] - result.baseline["producer_surplus"],
            "consumer_surplus": None if result.baseline["consumer_surplus"] is None else
            result.counterfactual["consumer_surplus"] - result.baseline["consumer_surplus"],
        },
        "alternatives": [_end_dict(a, game) for a in result.alternatives],
        "willig_bound": None if result.willig is None else result.willig["bound"],
        "willig": result.willig,
        "caution": CAUTION,
    }


def counterfactual_table(result, game, model: str) -> str:
    """Baseline and counterfactual side by side, with changes, welfare and the path's events."""
    lines = [f"model: {model}   counterfactual by continuation from the baseline equilibrium"]
    b, c = result.baseline, result.counterfactual
    if c is None:
        lines.append(f"the baseline equilibrium does not continue to the counterfactual setting "
                     f"(path {result.path.status.replace('_', ' ')}); equilibria found there instead: "
                     f"{len(result.alternatives)}")
        rows = []
    else:
        rows = [(game.coordinate_name(k), float(b["x"][k]), float(c["x"][k])) for k in range(game.n)]
        rows += [(f"payoff {p}", b["payoffs"][p], c["payoffs"][p]) for p in game.players]
        rows.append(("producer surplus", b["producer_surplus"], c["producer_surplus"]))
        if b["consumer_surplus"] is not None:
            rows.append(("consumer surplus", b["consumer_surplus"], c["consumer_surplus"]))
    width = max([len(r[0]) for r in rows] + [8])
    if rows:
        lines.append(f"  {'':<{width}}  {'baseline':>12}  {'counterfactual':>14}  {'change':>12}")
        for name, x0, x1 in rows:
            lines.append(f"  {name:<{width}}  {_num(x0):>12}  {_num(x1):>14}  {_num(x1 - x0):>12}")
    for ev in result.path.events:
        lines.append(f"  event on the path: {ev.kind} at path position {_num(ev.param)}")
    for label, end in (("baseline", b), ("counterfactual", c)):
        if end is not None and end["stability"] is not None:
            lines.append(f"  {label}: " + "; ".join(stability_lines(end["stability"])[:1]))
    if result.willig is not None:
        w = result.willig
        lines.append(f"  Willig bound on the consumer-surplus change vs compensating/equivalent variation: "
                     f"{100 * w['bound']:.3g} %" + (f"  WARNING: {w['warning']}" if w["warning"] else ""))
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)


def sweep_dict(result) -> dict[str, Any]:
    """JSON summary of a sweep run (the rows themselves are in the store)."""
    return {"store": result.store, "points": result.points, "stored": result.stored, "computed": result.computed,
            "complete": result.complete, "interrupted": result.interrupted, "counts": dict(result.counts),
            "verdicts": {k: dict(v) for k, v in result.verdicts.items()}, "seconds": result.seconds,
            "stats": dict(result.stats), "caution": CAUTION}


def sweep_summary(result) -> str:
    """Plain-words summary of a sweep run."""
    c = result.counts
    lines = [f"store: {result.store}",
             f"points: {result.stored} of {result.points} stored ({result.computed} computed in this run, "
             f"{result.seconds:.1f} s)",
             f"  solved {c.get('solved', 0)}, no equilibrium found {c.get('no_equilibrium', 0)}, "
             f"failed {c.get('failed', 0)}; equilibria stored {c.get('equilibria', 0)}"]
    names = {"nash": "Nash label", "equal_speeds": "equal speeds", "player_speeds": "per-player speeds",
             "coordinate_speeds": "per-coordinate speeds"}
    for key, label in names.items():
        counts = result.verdicts.get(key) or {}
        if counts:
            lines.append(f"  {label}: " + ", ".join(f"{v} {k}" for k, v in sorted(counts.items())))
    if result.interrupted:
        lines.append(f"interrupted: {result.stored} of {result.points} points are stored; "
                     "run the same command again to resume")
    lines += ["", CAUTION]
    return "\n".join(lines)

"""Pictures of simulated dynamics (sizes, fonts, caution and checks as the sweep pictures): runs and basins."""

from __future__ import annotations

import math
import textwrap
from contextlib import contextmanager

import numpy as np

from .._errors import InputError
from ..sweeps._plot import PICTURE_CAUTION, _check_out, _check_size
from ._simulate import Basins, Simulation

#: Colours of coordinates (runs) and of equilibria (basins), cycled.
_PALETTE = ("#1f6f8b", "#d1495b", "#5f9e6e", "#e0a030", "#7b5ea7", "#2fb5c0", "#a05a2c", "#d77fb5", "#4c5b61")
_NONE = "#b3aca2"  # a warm grey, apart from the neutral greys of text and frames
_DPI, _INK, _REACHED, _DASH = 100, "#33415c", "#e07a1f", (0, (4, 3))
_OUTCOMES = {"converged": ("#5f9e6e", "o"), "cycling": ("#e0a030", "^"), "diverged": ("#d1495b", "X"),
             "undecided": ("#7d8ea6", "D")}  # bar colour, marker of a start reaching no known equilibrium
_RULE_WORDS = {"flow": "gradient flow", "gradient": "gradient play", "momentum": "gradient play with momentum",
               "adam": "Adam", "optimistic": "optimistic gradient play", "best_response": "simultaneous best responses",
               "alternating": "alternating best responses"}
_MAX_NAMED = 12  # coordinates named in the legend; further ones are drawn but not listed


def plot_simulation(sim, out, *, game=None, size: tuple[int, int] = (900, 650)) -> str:
    """Draw one simulated run to a PNG: actions and distance to equilibrium against time, and the plane if n = 2.

    Known equilibria's values are dashed in each action's colour. The max-norm distance to the nearest
    one is on a log scale (zeros left out): a run leaving a tiny perturbation shows as a straight rise.

    Parameters
    ----------
    sim : Simulation
        A run from :func:`equipoise.dynamics.simulate`.
    out : path
        The PNG file to write (``.png``).
    game : Game, optional
        The simulated game; names the coordinates (default ``x[k]``).
    size : (int, int)
        Width and height of the PNG in pixels.

    Returns
    -------
    str
        ``out``.
    """
    names, E, out = _prepare(sim, Simulation, "sim", "simulate", game, out)
    path, t, n = np.asarray(sim.path, dtype=float), np.asarray(sim.times, dtype=float), len(names)
    span = 1.0 + max([v for v in [*(np.max(np.abs(e)) for e in E), np.max(np.abs(path[0]))] if np.isfinite(v)],
                     default=0.0)  # where a symmetric log scale turns linear
    with _canvas(size, out) as (fig, scale, lines):
        rows = [[k] + ["phase"] * (n == 2) for k in ("act", "dist")[:1 + bool(E)]]
        axd = fig.subplot_mosaic(rows, width_ratios=[1.45, 1] if n == 2 else None)
        ax = axd["act"]
        for k in range(n):
            c = _PALETTE[k % len(_PALETTE)]
            ax.plot(t, path[:, k], color=c, linewidth=1.6 * scale, label=names[k] if k < _MAX_NAMED else None,
                    zorder=3)
            for e in E:
                ax.axhline(e[k], color=c, linewidth=0.8 * scale, linestyle=_DASH, alpha=0.85, zorder=2)
        _wide(ax, "y", path, span)
        ax.set_ylabel("action")
        if E:
            d = np.min(np.max(np.abs(path[:, None, :] - np.stack(E)[None]), axis=2), axis=1)
            good, dax = np.isfinite(d) & (d > 0), axd["dist"]
            dax.sharex(ax)
            ax.tick_params(axis="x", labelbottom=False)
            if good.any():
                dax.plot(t, np.where(good, d, np.nan), color=_INK, linewidth=1.6 * scale, zorder=3)
                dax.set_yscale("log")
            else:
                dax.text(0.5, 0.5, "zero throughout", transform=dax.transAxes, ha="center", color="#777777")
            dax.set_ylabel("distance to nearest\nequilibrium (max-norm)")
        axd.get("dist", ax).set_xlabel("time" if set(sim.rule.values()) == {"flow"} else "step")
        for a in [axd[k] for k in ("act", "dist") if k in axd]:
            if sim.converged_at is not None:
                a.axvline(sim.converged_at, color="#777777", linewidth=1.0 * scale, linestyle=":", zorder=1,
                          label="settled from here" if a is ax else None)
        if E:  # a legend entry only
            ax.plot([], [], color="#555555", linewidth=0.8 * scale, linestyle=_DASH, label="known equilibria (dashed)")
        if n == 2:
            _phase(axd["phase"], path, E, sim.equilibrium, names, span, scale)
        _legend(fig, scale, list(axd.values()))  # the actions' panel comes first
        reached = f" to equilibrium {sim.equilibrium}" if sim.equilibrium is not None else ""
        start = "from a given start" if sim.settings.get("perturb") is None else \
            f"from a {sim.settings['perturb']:g} relative perturbation of an equilibrium"
        more = f"; {n - _MAX_NAMED} more actions drawn, not named" if n > _MAX_NAMED else ""
        rule, how = _words(sim, len(t) - 1)
        lines += [f"{rule}: {sim.outcome.name}{reached}", sim.outcome.value, f"{how}, {start}{more}"]
    return out


def plot_basins(b, out, *, game=None, size: tuple[int, int] = (900, 650)) -> str:
    """Draw where many starts end to a PNG: the starts in the plane (n = 2) or bars of shares and outcomes.

    With two actions each start is a dot in the colour of the equilibrium it reached, grey (shaped by its
    outcome) if none. Otherwise bars give the share reaching each equilibrium and the count of each outcome.

    Parameters
    ----------
    b : Basins
        A record from :func:`equipoise.dynamics.basins`.
    out : path
        The PNG file to write (``.png``).
    game : Game, optional
        The simulated game; names the coordinates (default ``x[k]``).
    size : (int, int)
        Width and height of the PNG in pixels.

    Returns
    -------
    str
        ``out``.
    """
    names, E, out = _prepare(b, Basins, "b", "basins", game, out)
    starts, reached, kinds = np.asarray(b.starts, dtype=float), np.asarray(b.reached), [o.name for o in b.outcomes]
    S, n = starts.shape
    colours = [_PALETTE[i % len(_PALETTE)] for i in range(len(E))]
    with _canvas(size, out) as (fig, scale, lines):
        if n == 2:
            ax = fig.add_subplot()
            dot = float(np.clip(9000 / max(S, 1), 10, 80)) * scale ** 2
            groups = [(reached == i, colours[i], "o", f"start reaching equilibrium {i} ({b.shares[i]:.0%})")
                      for i in range(len(E))]
            groups += [((reached < 0) & (np.array(kinds) == k), _NONE, m, f"{k}, no known equilibrium")
                       for k, (_, m) in _OUTCOMES.items()]
            for sel, c, m, label in groups:
                if sel.any():
                    ax.scatter(*starts[sel].T, s=dot, c=c, marker=m, linewidths=0.4, edgecolors="white",
                               label=label if m == "o" and c != _NONE else f"{label} ({int(sel.sum())})")
            for i, e in enumerate(E):
                ax.scatter(e[0], e[1], s=5 * dot, marker="*", c=colours[i], edgecolors="black", linewidths=0.8,
                           zorder=4, label="known equilibrium" if i == 0 else None)
                ax.annotate(str(i), (e[0], e[1]), xytext=(8, 6), textcoords="offset points", zorder=5)
            ax.set(xlabel=names[0], ylabel=names[1])
            axes = [ax]
        else:
            axes = list(fig.subplots(1, 2, width_ratios=[len(E) + 1, 4]))
            bars = [([f"eq {i}" for i in range(len(E))] + ["none"], list(b.shares) + [float(np.mean(reached < 0))],
                     colours + [_NONE], 1.0, "{:.0%}", "share of starts", "equilibrium reached"),
                    (list(_OUTCOMES), [b.counts.get(k, 0) for k in _OUTCOMES], [c for c, _ in _OUTCOMES.values()],
                     S, "{:d}", "starts", "outcome")]
            for a, (labels, values, cs, top, fmt, ylabel, title) in zip(axes, bars):
                a.bar(labels, values, color=cs)
                for j, v in enumerate(values):
                    a.text(j, v, fmt.format(v), ha="center", va="bottom", fontsize=9 * scale)
                a.set(ylim=(0, 1.12 * top), ylabel=ylabel, title=title)
                a.grid(False, axis="x")
        _legend(fig, scale, axes)
        counts = ", ".join(f"{v} {k}" for k, v in b.counts.items())
        rule, how = _words(b, "?")
        lines += [f"where {S} starts end under {rule}", f"{counts}; {how}"]
    return out


# ---------------------------------------------------------------- helpers
def _prepare(record, kind, arg: str, maker: str, game, out):
    """Check the record, game and output path; coordinate names, known equilibria and the path."""
    if not isinstance(record, kind):
        raise InputError(f"{arg}: expected a {kind.__name__} record from equipoise.dynamics.{maker}, "
                         f"got {type(record).__name__}")
    n = np.asarray(record.path if kind is Simulation else record.starts).shape[1]
    if game is not None and (not hasattr(game, "coordinate_name") or getattr(game, "n", None) != n):
        raise InputError(f"game: expected the simulated game with {n} actions, got {game!r}")
    names = [f"x[{k}]" if game is None else game.coordinate_name(k) for k in range(n)]
    return names, [np.asarray(e, dtype=float).reshape(n) for e in record.equilibria], _check_out(out)


def _wide(ax, which: str, values: np.ndarray, span: float) -> None:
    """Symmetric log scale when the values reach far beyond the equilibria's size (a run blowing up)."""
    finite = values[np.isfinite(values)]
    if finite.size and float(np.max(np.abs(finite))) > 100 * span:
        (ax.set_xscale if which == "x" else ax.set_yscale)("symlog", linthresh=span)
        (ax.xaxis if which == "x" else ax.yaxis).get_major_locator().set_params(numticks=7)


def _phase(ax, path, E, which, names, span, scale) -> None:
    """The run in the plane: start (ring), end (square), known equilibria (the reached one a large star)."""
    ax.plot(path[:, 0], path[:, 1], color=_INK, linewidth=1.4 * scale, zorder=3, label="path")
    ax.scatter(*path[0], s=70 * scale ** 2, facecolors="white", edgecolors=_INK, linewidths=1.6 * scale,
               zorder=5, label="start")
    ax.scatter(*path[np.all(np.isfinite(path), axis=1)][-1], s=30 * scale ** 2, marker="s", c=_INK, zorder=5,
               label="end")  # the last finite state (the start is always finite)
    for i, e in enumerate(E):
        hit = i == which
        ax.scatter(e[0], e[1], s=(380 if hit else 110) * scale ** 2, marker="*" if hit else "P",
                   c=_REACHED if hit else "#8a8a8a", edgecolors="black", linewidths=0.6, zorder=4,
                   label="equilibrium reached" if hit else "other known equilibrium")
        ax.annotate(str(i), (e[0], e[1]), xytext=(7, 5), textcoords="offset points", zorder=6)
    ax.locator_params(axis="x", nbins=4)
    for which, k in (("x", 0), ("y", 1)):
        _wide(ax, which, path[:, k], span)
    ax.set(xlabel=names[0], ylabel=names[1], title="path in the plane")


def _words(record, steps) -> tuple[str, str]:
    """The rule(s) in words with the speeds (not for best responses: there they play no part); steps and step."""
    kinds, st = set(record.rule.values()), record.settings
    words = _RULE_WORDS[next(iter(kinds))] if len(kinds) == 1 else ", ".join(
        f"{p}: {_RULE_WORDS[r]}" for p, r in record.rule.items())
    if not kinds <= {"best_response", "alternating"}:
        k = [f"{v:.3g}" for v in np.asarray(record.speeds, dtype=float)]
        words += f", speeds ({', '.join(k[:8])}{', ...' if len(k) > 8 else ''})"
    step = f", dt = {st['dt']:.3g}" if st.get("dt") is not None else \
        f", learning rate {st['lr']:.3g}" if st.get("lr") is not None else ""
    return words, f"{st.get('steps', steps)} steps{step}"


@contextmanager
def _canvas(size, out: str):
    """Yield (panel area, font scale, title lines to fill) of an exact-size figure; save it to ``out`` after."""
    width, height = _check_size(size)
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    scale = min(max(math.sqrt(width * height / (900 * 650)), 0.75), 2.5)
    with matplotlib.rc_context({"font.size": 10 * scale, "axes.titlesize": 10.5 * scale,
                                "axes.labelsize": 10 * scale, "legend.fontsize": 9 * scale,
                                "figure.titlesize": 11.5 * scale, "axes.formatter.useoffset": False,
                                "axes.grid": True, "axes.axisbelow": True, "grid.color": "#ececec",
                                "grid.linewidth": 0.6}):
        fig = Figure(figsize=((width + 0.01) / _DPI, (height + 0.01) / _DPI), dpi=_DPI, layout="constrained")
        FigureCanvasAgg(fig)
        # The caution gets its own strip along the bottom, so the legend below the panels never covers it.
        top, foot = fig.subfigures(2, 1, height_ratios=[height - 14 * scale, 14 * scale])
        foot.text(0.995, 0.5, PICTURE_CAUTION, ha="right", va="center", fontsize=6.5 * scale, color="#777777")
        lines: list[str] = []
        yield top, scale, lines
        per_line = max(int(width / (0.55 * 11.5 * scale * _DPI / 72)), 20)  # wrap titles to the width
        top.suptitle("\n".join(textwrap.fill(t, per_line, break_on_hyphens=False) for t in lines))
        try:
            fig.savefig(out, dpi=_DPI, format="png")
        except OSError as exc:
            raise InputError(f"--out {out}: cannot write the PNG ({exc.strerror or exc})") from None


def _legend(fig, scale: float, axes) -> None:
    """One legend below the panels: the axes' entries in order, each label once."""
    found = [h for a in axes for h in a.get_legend_handles_labels()[0]]
    handles = [h for i, h in enumerate(found) if h.get_label() not in {g.get_label() for g in found[:i]}]
    if handles:  # as many columns as the longest label lets fit (about 0.55 em a character, 4.5 em of handle)
        em = 9 * scale * _DPI / 72
        column = em * (0.55 * max(len(h.get_label()) for h in handles) + 4.5)
        cols = min(len(handles), max(1, int(0.95 * fig.figure.get_figwidth() * _DPI / column)))
        fig.legend(handles=handles, loc="outside lower center", ncols=cols, frameon=False, handlelength=1.6,
                   columnspacing=1.6)


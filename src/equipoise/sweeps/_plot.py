"""Pictures of a results store: verdict maps over two axes, equilibrium branches over one.

Every point (map) or stored equilibrium (branches) gets one *category*: a
stability or verification verdict, a count of verified equilibria, or a
reason nothing was found. Categories have fixed colours and plain-word
legend labels, so the same colour means the same thing in every picture.
"""

from __future__ import annotations

import math
import os
import textwrap
from collections.abc import Mapping, Sequence

import numpy as np

from .._errors import InputError
from ._store import Store

#: What a picture can be coloured by.
COLOR_CHOICES = ("nash", "equal_speeds", "player_speeds", "coordinate_speeds", "count")

#: Printed small in a corner of every picture (see the README's caution).
PICTURE_CAUTION = "numerical results of a model; for consequential use follow applicable guidelines and qualified review"

#: Category key -> (legend label, colour). Order is legend order.
CATEGORIES: dict[str, tuple[str, str]] = {
    "robust": ("robust to any speeds", "#2a9d8f"),
    "stable": ("stable at equal speeds", "#2a9d8f"),
    "global": ("global Nash equilibrium", "#2a9d8f"),
    "local": ("local Nash only: no global guarantee", "#f4a259"),
    "fragile": ("fragile: some speeds destabilise", "#f4a259"),
    "borderline": ("borderline at equal speeds", "#9b72b0"),
    "undecided": ("undecided: no proof either way", "#5c7fb0"),
    "unstable": ("unstable at equal speeds", "#c8553d"),
    "unlabelled": ("no stability label stored", "#c9b58f"),
    "mixed": ("mixed: equilibria disagree", "#e07bb0"),
    "not_nash": ("failed verification (not Nash)", "#6f6f6f"),
    "none": ("no equilibrium found", "#dcdcdc"),
    "failed": ("point could not be solved", "#333333"),
}
#: Counts at or above this share one colour.
COUNT_CAP = 9
#: Colours of 1, 2, ... COUNT_CAP equilibria: darker with more, the hue turning so neighbours stay apart.
_COUNT_COLOURS = ("#a6dbc8", "#5fb3b3", "#3b85ad", "#3c5a9c", "#4b3a8a", "#6a2c7c", "#8a2470", "#a61e5c", "#4a0f2e")
for _n, _c in enumerate(_COUNT_COLOURS, start=1):
    _label = "1 equilibrium" if _n == 1 else f"{_n} equilibria" + (" or more" if _n == COUNT_CAP else "")
    CATEGORIES[f"n{_n}"] = (_label, _c)

_TITLES = {"nash": "Nash verification", "equal_speeds": "stability at equal speeds",
           "player_speeds": "stability for any per-player speeds",
           "coordinate_speeds": "stability for any per-coordinate speeds", "count": "verified equilibria"}
MAX_PANELS = 9
_DPI = 100


def verdict(eq: Mapping, color: str) -> str:
    """Category key of one stored equilibrium under ``color`` (not ``count``).

    A speeds verdict of ``fragile`` at an equilibrium already unstable at
    equal speeds is reported as ``unstable``: no choice of speeds is needed
    to destabilise it.
    """
    if eq["nash"] == "not_nash":
        return "not_nash"
    if color == "nash":
        return "global" if eq["nash"] == "global" else "local"
    v = eq.get(color)
    if v is None:
        return "unlabelled"
    if color != "equal_speeds" and v == "fragile" and eq.get("equal_speeds") == "unstable":
        return "unstable"
    return v


def point_categories(points: Sequence[Mapping], equilibria: Sequence[Mapping], color: str) -> list[str]:
    """One category key per point: its verified equilibria's shared verdict, ``mixed``, ``none`` or ``failed``.

    Only equilibria that passed verification (``nash != "not_nash"``) count.
    With ``color="count"`` the key is ``n<k>`` for ``k`` verified equilibria
    (capped at :data:`COUNT_CAP`), ``none`` for zero.
    """
    by_point: dict[int, list[Mapping]] = {}
    for e in equilibria:
        if e["nash"] != "not_nash":
            by_point.setdefault(e["point"], []).append(e)
    out = []
    for p in points:
        eqs = by_point.get(p["id"], [])
        if p["status"] == "failed":
            out.append("failed")
        elif not eqs:
            out.append("none")
        elif color == "count":
            out.append(f"n{min(len(eqs), COUNT_CAP)}")
        else:
            kinds = {verdict(e, color) for e in eqs}
            out.append(kinds.pop() if len(kinds) == 1 else "mixed")
    return out


def plot_store(store, out, *, x: str, y: str | None = None, color: str = "coordinate_speeds",
               actions: Sequence[str] | None = None, at: Mapping[str, float] | None = None,
               size: tuple[int, int] = (900, 650)) -> str:
    """Draw a results store to a PNG: a verdict map over two axes, or equilibrium branches over one.

    Parameters
    ----------
    store : path
        A results store written by :func:`equipoise.sweeps.sweep`.
    out : path
        The PNG file to write (``.png``).
    x, y : str
        Axis names of the store, as given in the sweep. With ``y`` the picture
        is a map of the points coloured by their category; without it, one
        panel per action shows every stored equilibrium against ``x``.
    color : {"nash", "equal_speeds", "player_speeds", "coordinate_speeds", "count"}
        The verdict that colours points and equilibria (``count``: number of
        verified equilibria per point; maps only make sense of it, branches
        then use the Nash label).
    actions : list of str, optional
        Branches only: the action coordinates to draw (``player`` or
        ``player[k]``; a player's name selects all its actions). Default: all,
        at most nine panels.
    at : dict, optional
        ``{axis: value}`` fixing the axes not plotted, for grid stores (default:
        each at its first value). Sampled stores project all points instead.
    size : (int, int)
        Width and height of the PNG in pixels.

    Returns
    -------
    str
        ``out``.

    Notes
    -----
    A map point's category is the verdict shared by all its verified
    equilibria (``nash != "not_nash"``), ``mixed`` when they differ,
    ``none`` without any and ``failed`` when the point could not be solved.

    Examples
    --------
    >>> plot_store("ferries.sqlite", "ferries.png", x="c[2]", y="c[1]")  # doctest: +SKIP
    'ferries.png'
    """
    width, height = _check_size(size)
    out = _check_out(out)
    if color not in COLOR_CHOICES:
        raise InputError(f"--color {color!r}: expected one of {', '.join(COLOR_CHOICES)}")
    path = os.fspath(store)
    db = Store.read(path)
    try:
        meta, points, eqs = db.meta, db.points(), db.equilibria()
    finally:
        db.close()
    _check_labels(color, meta, path)
    axes = list(meta["axes"])
    xi = _axis_index(axes, x, "--x", path)
    yi = None if y is None else _axis_index(axes, y, "--y", path)
    if yi is not None and yi == xi:
        raise InputError(f"--y {y!r}: the same axis as --x; expected another axis of {path}")
    if not points:
        raise InputError(f"{path}: the store holds no points yet; run the sweep first")
    spec = meta.get("spec") or {}
    grid = spec.get("sample") is None
    keep, note = _select(points, axes, [xi] if yi is None else [xi, yi], at, grid, path)
    points = [p for p, k in zip(points, keep) if k]
    scales = [(a.get("scale") or "linear") for a in spec.get("axes", [])] or ["linear"] * len(axes)
    coords = None if yi is not None else _coordinates(meta, actions, path)

    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    scale = min(max(math.sqrt(width * height / (900 * 650)), 0.75), 2.5)
    with matplotlib.rc_context({"font.size": 10 * scale, "axes.titlesize": 10.5 * scale,
                                "axes.labelsize": 10 * scale, "legend.fontsize": 9 * scale,
                                "figure.titlesize": 11.5 * scale}):
        fig = Figure(figsize=((width + 0.01) / _DPI, (height + 0.01) / _DPI), dpi=_DPI, layout="constrained")
        FigureCanvasAgg(fig)
        # The caution gets its own strip along the bottom, so the legend below the panels never covers it.
        whole = fig
        fig, foot = whole.subfigures(2, 1, height_ratios=[height - 14 * scale, 14 * scale])
        foot.text(0.995, 0.5, PICTURE_CAUTION, ha="right", va="center", fontsize=6.5 * scale, color="#777777")
        if yi is not None:
            shown = _draw_map(fig, points, eqs, color, xi, yi, grid, scales, axes, scale)
            what = f"{_TITLES[color]} over {axes[xi]} and {axes[yi]}"
        else:
            shown = _draw_branches(fig, points, eqs, color, xi, coords, meta["coordinates"], scales[xi], axes[xi],
                                   scale)
            what = f"equilibria against {axes[xi]}: {_TITLES['nash' if color == 'count' else color]}"
            if actions is None and len(meta["coordinates"]) > len(coords):
                note += f"; first {len(coords)} of {len(meta['coordinates'])} actions"
        _legend(fig, shown)
        # Wrap to the picture's width (about 0.55 em per character) so small pictures keep the whole title.
        per_line = max(int(width / (0.55 * 11.5 * scale * _DPI / 72)), 20)
        lines = [f"{os.path.basename(str(meta.get('model', '?')))}: {what}", f"{os.path.basename(path)}: {note}"]
        fig.suptitle("\n".join(textwrap.fill(t, per_line) for t in lines))
        try:
            whole.savefig(out, dpi=_DPI, format="png")
        except OSError as exc:
            raise InputError(f"--out {out}: cannot write the PNG ({exc.strerror or exc})") from None
    return out


# ---------------------------------------------------------------- checks
def _check_size(size) -> tuple[int, int]:
    ok = (isinstance(size, (tuple, list)) and len(size) == 2
          and all(isinstance(v, (int, np.integer)) and not isinstance(v, bool) and 200 <= v <= 8000 for v in size))
    if not ok:
        raise InputError(f"--size {size!r}: expected (width, height) in pixels, two whole numbers from 200 to 8000")
    return int(size[0]), int(size[1])


def _check_out(out) -> str:
    out = os.fspath(out)
    if not out.lower().endswith(".png"):
        raise InputError(f"--out {out!r}: expected a file name ending in .png")
    folder = os.path.dirname(os.path.abspath(out))
    if os.path.isdir(out) or not os.path.isdir(folder) or not os.access(folder, os.W_OK):
        raise InputError(f"--out {out!r}: cannot write there; expected a PNG path in an existing, writable folder")
    return out


def _check_labels(color: str, meta: Mapping, path: str) -> None:
    labels = (meta.get("spec") or {}).get("labels", "full")
    missing = {"none": ("equal_speeds", "player_speeds", "coordinate_speeds"),
               "equal": ("player_speeds", "coordinate_speeds")}.get(labels, ())
    if color in missing:
        have = [c for c in COLOR_CHOICES if c not in missing]
        raise InputError(f"--color {color!r}: {path} was swept with labels={labels!r} and holds no such "
                         f"verdicts; expected one of {', '.join(have)}")


def _axis_index(axes: list[str], name, flag: str, path: str) -> int:
    tight = [a.replace(" ", "") for a in axes]
    key = str(name).replace(" ", "")
    if key not in tight:
        raise InputError(f"{flag} {name!r}: not an axis of {path} (axes: {', '.join(axes)})")
    return tight.index(key)


def _select(points, axes, plotted, at, grid, path) -> tuple[np.ndarray, str]:
    """Which points lie on the plotted slice, and a line saying what was fixed or projected."""
    others = [i for i in range(len(axes)) if i not in plotted]
    at = dict(at or {})
    values = np.array([p["values"] for p in points], dtype=float)
    if at and not grid:
        raise InputError(f"--at: {path} holds a sampled sweep; its other axes are projected, not fixed; "
                         "expected no --at")
    fixed = {}
    for name, value in at.items():
        i = _axis_index(axes, name, "--at", path)
        if i in plotted:
            raise InputError(f"--at {name!r}: this axis is plotted; expected one of the other axes "
                             f"({', '.join(axes[j] for j in others) or 'none'})")
        fixed[i] = (name, value)
    keep = np.ones(len(points), dtype=bool)
    parts = []
    for i in others:
        grid_values = np.unique(values[:, i])
        if not grid:
            continue
        if i in fixed:
            name, value = fixed[i]
            try:
                value = float(value)
            except (TypeError, ValueError):
                raise InputError(f"--at {name}={value!r}: expected a number") from None
            hit = np.isclose(grid_values, value, rtol=1e-9, atol=1e-12)
            if not hit.any():
                shown = ", ".join(f"{v:g}" for v in grid_values[:12]) + (", ..." if len(grid_values) > 12 else "")
                raise InputError(f"--at {name}={value:g}: not a value of axis {axes[i]} in {path} "
                                 f"(values: {shown})")
            value = grid_values[hit][0]
        else:
            value = grid_values[0]
        keep &= values[:, i] == value
        parts.append(f"{axes[i]} = {value:g}")
    if not grid:
        note = f"{len(points)} sampled points" + (
            f", projected over {', '.join(axes[i] for i in others)}" if others else "")
    else:
        note = f"{int(keep.sum())} grid points" + (f", fixed {', '.join(parts)}" if parts else "")
    return keep, note


def _coordinates(meta: Mapping, actions, path: str) -> list[int]:
    names = list(meta["coordinates"])
    if actions is None:
        return list(range(min(len(names), MAX_PANELS)))
    if isinstance(actions, str):
        actions = [actions]
    chosen: list[int] = []
    for a in actions:
        key = str(a).replace(" ", "")
        hits = [k for k, c in enumerate(names) if c == key or c.startswith(key + "[")]
        if not hits:
            raise InputError(f"--action {a!r}: not an action of {path} (actions: {', '.join(names)})")
        chosen += [k for k in hits if k not in chosen]
    if len(chosen) > MAX_PANELS:
        raise InputError(f"--action: {len(chosen)} actions chosen; expected at most {MAX_PANELS} panels")
    return chosen


# ---------------------------------------------------------------- drawing
def _edges(v: np.ndarray, log: bool) -> np.ndarray:
    """Cell edges around sorted unique grid values (midpoints, half a step beyond the ends)."""
    t = np.log(v) if log else v
    if len(t) == 1:  # a one-value axis: a cell of a tenth of the value (or of unit width at zero)
        half = 0.1 if log else (0.1 * abs(t[0]) or 0.5)
        e = np.array([t[0] - half, t[0] + half])
    else:
        mid = (t[1:] + t[:-1]) / 2
        e = np.concatenate([[t[0] - (mid[0] - t[0])], mid, [t[-1] + (t[-1] - mid[-1])]])
    return np.exp(e) if log else e


def _log_axis(ax, which: str, log: bool) -> None:
    """Logarithmic scale with ticks in plain numbers (0.1, 1, 10), the units the sweep was given in."""
    if not log:
        return
    from matplotlib.ticker import FuncFormatter

    (ax.set_xscale if which == "x" else ax.set_yscale)("log")
    (ax.xaxis if which == "x" else ax.yaxis).set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))


def _draw_map(fig, points, eqs, color, xi, yi, grid, scales, axes, scale) -> list[str]:
    from matplotlib.colors import BoundaryNorm, ListedColormap

    cats = point_categories(points, eqs, color)
    shown = [k for k in CATEGORIES if k in set(cats)]
    code = {k: i for i, k in enumerate(shown)}
    ax = fig.add_subplot()
    vx = np.array([p["values"][xi] for p in points])
    vy = np.array([p["values"][yi] for p in points])
    logx, logy = scales[xi] == "log", scales[yi] == "log"
    colours = [CATEGORIES[k][1] for k in shown]
    if grid:
        ux, uy = np.unique(vx), np.unique(vy)
        c = np.full((len(uy), len(ux)), -1)
        c[np.searchsorted(uy, vy), np.searchsorted(ux, vx)] = [code[k] for k in cats]
        cmap = ListedColormap(colours or ["white"])  # masked (missing) cells stay transparent
        norm = BoundaryNorm(np.arange(len(colours) + 1) - 0.5, max(len(colours), 1))
        thin = max(len(ux), len(uy)) <= 40
        ax.pcolormesh(_edges(ux, logx), _edges(uy, logy), np.ma.masked_less(c, 0), cmap=cmap, norm=norm,
                      edgecolors="white" if thin else "face", linewidth=0.6 if thin else 0)
    else:
        s = float(np.clip(9000 / max(len(points), 1), 6, 60)) * scale ** 2
        ax.scatter(vx, vy, c=[CATEGORIES[k][1] for k in cats], s=s, linewidths=0)
    _log_axis(ax, "x", logx)
    _log_axis(ax, "y", logy)
    ax.set_xlabel(axes[xi])
    ax.set_ylabel(axes[yi])
    return shown


def _draw_branches(fig, points, eqs, color, xi, coords, names, scale_x, xname, scale) -> list[str]:
    """One panel per action coordinate; every stored equilibrium of the selected points is a marker."""
    chosen = {p["id"]: p for p in points}
    mine = [e for e in eqs if e["point"] in chosen]
    kinds = [verdict(e, "nash" if color == "count" else color) for e in mine]
    xs = np.array([chosen[e["point"]]["values"][xi] for e in mine])
    acts = np.array([e["actions"] for e in mine], dtype=float).reshape(len(mine), len(names))
    n = len(coords)
    rows, cols = (n, 1) if n <= 3 else (2, 2) if n == 4 else (2, 3) if n <= 6 else (3, 3)
    grid_axes = fig.subplots(rows, cols, sharex=True, squeeze=False)
    # Points without a verified equilibrium: a full-height line in every panel (grey: none found; dashed: failed).
    empty = [(p["values"][xi], c) for p, c in zip(points, point_categories(points, eqs, "nash"))
             if c in ("none", "failed")]
    s = float(np.clip(6000 / max(len(set(xs.tolist())), 1), 14, 60)) * scale ** 2
    order = [k for k in CATEGORIES if k in set(kinds)]
    for j, ax in enumerate(grid_axes.ravel()):
        if j >= n:
            ax.set_visible(False)
            continue
        k = coords[j]
        for kind in order:  # legend order puts stable kinds first: warnings are drawn on top
            sel = np.array([q == kind for q in kinds], dtype=bool)
            if sel.any():
                ax.scatter(xs[sel], acts[sel, k], s=s, c=CATEGORIES[kind][1], linewidths=0.4,
                           edgecolors="white", marker="X" if kind == "not_nash" else "o", zorder=2)
        for v, kind in empty:
            ax.axvline(v, color=CATEGORIES[kind][1], linewidth=(3.0 if kind == "none" else 1.4) * scale,
                       linestyle="-" if kind == "none" else (0, (3, 2)), zorder=1.6)
        ax.set_ylabel(names[k])
        ax.grid(True, color="#ececec", linewidth=0.6, zorder=0)
        _log_axis(ax, "x", scale_x == "log")
        if j >= n - cols:  # the lowest panel of its column (the one below may be hidden): label it
            ax.set_xlabel(xname)
            ax.tick_params(axis="x", labelbottom=True)
    present = {c for _, c in empty}
    return order + [k for k in ("none", "failed") if k in present]


def _legend(fig, shown: list[str]) -> None:
    from matplotlib.patches import Patch

    if not shown:
        return
    handles = [Patch(facecolor=CATEGORIES[k][1], edgecolor="#8a8a8a", linewidth=0.4, label=CATEGORIES[k][0])
               for k in shown]
    # Below the panels, so it never covers data and the title keeps the full width.
    import matplotlib

    # As many columns as the longest label lets fit (about 0.55 em a character, 4.5 em of handle).
    em = float(matplotlib.rcParams["legend.fontsize"]) * _DPI / 72
    column = em * (0.55 * max(len(h.get_label()) for h in handles) + 4.5)
    cols = min(len(handles), 3, max(1, int(0.95 * fig.figure.get_figwidth() * _DPI / column)))
    fig.legend(handles=handles, loc="outside lower center", ncols=cols, frameon=False,
               handlelength=1.4, columnspacing=1.6)

"""plot_store: verdict maps and equilibrium branches drawn from sweep stores.

Stores are built once per module from the scenario files in ``models/``; the
pictures are checked by size, by not being blank, and by the colours of known
regions. Closed forms used for the expected categories are cited where used.
"""

import os
import shutil
import sqlite3

import matplotlib.image as mpimg
import numpy as np
import pytest
from scipy import ndimage

import equipoise
from equipoise.sweeps import Axis, Store, SweepSpec, plot_store, sweep
from equipoise.sweeps._plot import CATEGORIES, point_categories, verdict

MODELS = os.path.join(os.path.dirname(__file__), os.pardir, "models")
FERRIES = os.path.join(MODELS, "cournot_saltmere_ferries.py")
GRAZING = os.path.join(MODELS, "network_effort_triangle.py")


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("plots")


@pytest.fixture(scope="module")
def grid_store(folder):
    """Ferries over c[2] (6 values) x c[1] (5 values); the other costs 18 and 24 as in the model file."""
    spec = SweepSpec(model=FERRIES, axes=(Axis.linear("c[2]", 20.0, 90.0, 6), Axis.linear("c[1]", 10.0, 50.0, 5)),
                     batch=32, labels="full")
    path = str(folder / "ferries.sqlite")
    sweep(spec, path, progress=False)
    return path


@pytest.fixture(scope="module")
def sampled_store(folder):
    """The same game and batch shape (no new compilation), 24 Sobol points of the same box."""
    spec = SweepSpec(model=FERRIES, axes=(Axis("c[2]", low=20.0, high=90.0), Axis("c[1]", low=10.0, high=50.0)),
                     sample=24, batch=32, labels="full")
    path = str(folder / "ferries-sampled.sqlite")
    sweep(spec, path, progress=False)
    return path


@pytest.fixture(scope="module")
def line_store(folder):
    """Grazing effort over delta, on both sides of delta = 1 where the interior equilibrium turns unstable."""
    spec = SweepSpec(model=GRAZING, axes=(Axis("delta", (0.5, 0.8, 1.2, 1.6, 2.0)),), batch=8, labels="full")
    path = str(folder / "grazing.sqlite")
    sweep(spec, path, progress=False)
    return path


def read(path):
    db = Store.read(path)
    try:
        return db.points(), db.equilibria()
    finally:
        db.close()


def pixels(path):
    """The PNG as integer RGB, shape (height, width, 3)."""
    img = mpimg.imread(path)
    return np.round(img[..., :3] * 255).astype(int), img.shape


def share(rgb, key):
    """Share of the picture's pixels painted exactly in the colour of category ``key``."""
    hexa = CATEGORIES[key][1]
    target = np.array([int(hexa[i:i + 2], 16) for i in (1, 3, 5)])
    return np.all(rgb == target, axis=-1)


def assert_not_blank(rgb):
    # Common practice: a drawn chart has many distinct colours (antialiased text, lines) and contrast.
    assert len(np.unique(rgb.reshape(-1, 3), axis=0)) > 50
    assert rgb.std() > 20.0


# ---------------------------------------------------------------- maps
@pytest.mark.parametrize("size", [(900, 650), (901, 577), (333, 229)])
def test_map_has_the_requested_size(grid_store, folder, size):
    out = plot_store(grid_store, str(folder / f"map-{size[0]}.png"), x="c[2]", y="c[1]", size=size)
    rgb, shape = pixels(out)
    assert shape[:2] == (size[1], size[0]) and shape[2] in (3, 4)
    assert_not_blank(rgb)


def test_cells_where_a_firm_exits_are_coloured(grid_store, folder):
    points, eqs = read(grid_store)
    cats = point_categories(points, eqs, "coordinate_speeds")
    by_point = {e["point"]: e for e in eqs}
    # Tirole (1988), The Theory of Industrial Organization, ch. 5: with three firms the
    # interior quantity of firm 3 is (a - 3 c3 + c1 + c2) / (4 b), so gullwing exits when
    # c[2] >= (120 + 18 + c[1]) / 3: 12 grid points for c[1] in 10..40, 2 more at c[1] = 50.
    exited = [p for p in points if p["values"][0] >= (120.0 + 18.0 + p["values"][1]) / 3.0]
    assert len(exited) == 14
    for p in exited:
        assert by_point[p["id"]]["actions"][2] == pytest.approx(0.0, abs=1e-9)
    # The corner equilibria keep a label: the free 2x2 block -b(I + 11') is robustly stable
    # (common practice: a symmetric negative definite Jacobian admits the identity as Lyapunov matrix).
    assert cats == ["robust"] * 30

    rgb, _ = pixels(plot_store(grid_store, str(folder / "exits.png"), x="c[2]", y="c[1]"))
    robust = share(rgb, "robust")
    # Every cell is painted: the widest robust row spans the whole map (about 93% of the
    # picture); if the exit cells (right half) were blank it would stop near half.
    assert robust.sum(axis=1).max() > 0.8 * rgb.shape[1]
    assert robust.mean() > 0.6
    # No cell in the grey of "no equilibrium found" (one cell would be about 2% of the picture;
    # a few antialiased text pixels may share the grey).
    assert share(rgb, "none").mean() < 0.002


def test_count_map_uses_the_discrete_scale(grid_store, folder):
    rgb, _ = pixels(plot_store(grid_store, str(folder / "count.png"), x="c[1]", y="c[2]", color="count"))
    # The unique Cournot equilibrium (Rosen 1965, negative definite Jacobian): one per point.
    assert share(rgb, "n1").mean() > 0.6
    assert share(rgb, "n2").sum() == 0
    assert_not_blank(rgb)


def test_sampled_map_is_a_scatter(sampled_store, folder):
    out = plot_store(sampled_store, str(folder / "sampled.png"), x="c[2]", y="c[1]", color="nash", size=(640, 480))
    rgb, shape = pixels(out)
    assert shape[:2] == (480, 640)
    painted = share(rgb, "global").mean()
    # 24 markers, not cells: some colour, far less than a filled map.
    assert 0.002 < painted < 0.3
    assert_not_blank(rgb)


def test_failed_and_empty_points_get_their_own_colours(grid_store, folder):
    # A store damaged on purpose: two points marked failed, one without any verified equilibrium.
    copy = str(folder / "ferries-edited.sqlite")
    shutil.copy(grid_store, copy)
    conn = sqlite3.connect(copy)
    with conn:
        conn.execute("UPDATE points SET status = 'failed', equilibria = 0 WHERE id IN (0, 1)")
        conn.execute("DELETE FROM equilibria WHERE point IN (0, 1)")
        conn.execute("UPDATE points SET status = 'no_equilibrium' WHERE id = 7")
        conn.execute("UPDATE equilibria SET nash = 'not_nash' WHERE point = 7")
    conn.close()
    points, eqs = read(copy)
    cats = point_categories(points, eqs, "equal_speeds")
    assert cats[:2] == ["failed", "failed"] and cats[7] == "none"
    assert cats.count("stable") == 27
    rgb, _ = pixels(plot_store(copy, str(folder / "edited.png"), x="c[2]", y="c[1]", color="equal_speeds"))
    # One cell is 1/30 of a map covering about 70% of the picture, less white cell borders.
    for key, cells in (("failed", 2), ("none", 1)):
        assert share(rgb, key).mean() == pytest.approx(cells * 0.7 / 30, rel=0.35)


# ---------------------------------------------------------------- branches
def test_branches_show_stable_and_unstable_equilibria(line_store, folder):
    points, eqs = read(line_store)
    x = {p["id"]: p["values"][0] for p in points}
    # Interior equilibrium of u_i = x_i - x_i^2/2 - delta x_i sum_j x_j on the triangle:
    # x_i = 1 / (1 + 2 delta); J = -(I + delta (11' - I)) has eigenvalues -(1 + 2 delta)
    # and -(1 - delta) (twice), so it is stable below delta = 1, unstable above (from memory).
    interior = {x[e["point"]]: e for e in eqs if min(e["actions"]) > 1e-6}
    for delta in (0.5, 0.8, 1.2, 1.6, 2.0):
        e = interior[delta]
        np.testing.assert_allclose(e["actions"], [1.0 / (1.0 + 2.0 * delta)] * 3, rtol=0, atol=1e-8)
        assert verdict(e, "coordinate_speeds") == ("robust" if delta < 1 else "unstable")
    # Farming alone, x = (1, 0, 0), is an equilibrium for delta >= 1 with free block -1: robust.
    alone = [e for e in eqs if x[e["point"]] > 1 and sorted(np.round(e["actions"], 9)) == [0.0, 0.0, 1.0]]
    assert alone and all(verdict(e, "coordinate_speeds") == "robust" for e in alone)
    cats = point_categories(points, eqs, "coordinate_speeds")
    assert cats[:2] == ["robust", "robust"] and set(cats[2:]) == {"mixed"}

    out = plot_store(line_store, str(folder / "branches.png"), x="delta")
    rgb, shape = pixels(out)
    assert shape[:2] == (650, 900)
    assert_not_blank(rgb)
    assert share(rgb, "robust").sum() > 300
    assert share(rgb, "unstable").sum() > 300


def test_branches_of_chosen_actions_with_a_fixed_axis(grid_store, folder):
    out = plot_store(grid_store, str(folder / "gullwing.png"), x="c[2]", actions=["gullwing"], at={"c[1]": 30.0})
    rgb, shape = pixels(out)
    assert shape[:2] == (650, 900)
    # One marker per grid value of c[2] at c[1] = 30 (six), plus the legend's patch.
    blobs, count = ndimage.label(share(rgb, "robust"))
    assert count == 7
    assert_not_blank(rgb)


# ---------------------------------------------------------------- categories
def eq(point, nash="global", equal="stable", coordinate="robust"):
    return {"point": point, "nash": nash, "equal_speeds": equal, "coordinate_speeds": coordinate,
            "player_speeds": coordinate}


def test_point_categories_rules():
    points = [{"id": i, "status": s} for i, s in enumerate(["solved", "solved", "solved", "failed",
                                                            "no_equilibrium", "solved"])]
    eqs = [eq(0), eq(0, nash="not_nash", coordinate="fragile"),        # the failed check is ignored
           eq(1), eq(1, equal="unstable", coordinate="fragile"),       # disagreement
           eq(2, equal="stable", coordinate="fragile"),
           eq(4, nash="not_nash")] + [eq(5) for _ in range(12)]
    assert point_categories(points, eqs, "coordinate_speeds") == ["robust", "mixed", "fragile", "failed", "none",
                                                                  "robust"]
    assert point_categories(points, eqs, "count") == ["n1", "n2", "n1", "failed", "none", "n9"]
    assert point_categories(points, eqs, "equal_speeds")[:3] == ["stable", "mixed", "stable"]
    # Fragile at an equilibrium already unstable at equal speeds reads as unstable.
    assert verdict(eq(0, equal="unstable", coordinate="fragile"), "player_speeds") == "unstable"
    assert verdict(eq(0, nash="local"), "nash") == "local"
    assert verdict(eq(0, coordinate=None), "coordinate_speeds") == "unlabelled"


# ---------------------------------------------------------------- mistakes
def test_unknown_axis(grid_store, folder):
    with pytest.raises(equipoise.InputError) as err:
        plot_store(grid_store, str(folder / "x.png"), x="b", y="c[1]")
    assert str(err.value) == f"--x 'b': not an axis of {grid_store} (axes: c[2], c[1])"
    with pytest.raises(equipoise.InputError, match=r"^--y 'c\[2\]': the same axis as --x"):
        plot_store(grid_store, str(folder / "x.png"), x="c[2]", y="c[2]")


def test_unknown_color(grid_store, folder):
    with pytest.raises(equipoise.InputError) as err:
        plot_store(grid_store, str(folder / "x.png"), x="c[2]", y="c[1]", color="speed")
    assert str(err.value) == ("--color 'speed': expected one of nash, equal_speeds, player_speeds, "
                              "coordinate_speeds, count")


def test_unknown_action(grid_store, folder):
    with pytest.raises(equipoise.InputError) as err:
        plot_store(grid_store, str(folder / "x.png"), x="c[2]", actions=["seagull"])
    assert str(err.value) == (f"--action 'seagull': not an action of {grid_store} "
                              "(actions: bluewake, harrowline, gullwing)")


def test_value_off_the_grid(grid_store, sampled_store, folder):
    with pytest.raises(equipoise.InputError) as err:
        plot_store(grid_store, str(folder / "x.png"), x="c[2]", at={"c[1]": 35.0})
    assert str(err.value) == f"--at c[1]=35: not a value of axis c[1] in {grid_store} (values: 10, 20, 30, 40, 50)"
    with pytest.raises(equipoise.InputError, match=r"^--at 'c\[2\]': this axis is plotted"):
        plot_store(grid_store, str(folder / "x.png"), x="c[2]", at={"c[2]": 20.0})
    with pytest.raises(equipoise.InputError, match=r"^--at: .* holds a sampled sweep"):
        plot_store(sampled_store, str(folder / "x.png"), x="c[2]", at={"c[1]": 30.0})


@pytest.mark.parametrize("size", [(100, 650), (900,), (900.0, 650), "900x650", (True, 650)])
def test_bad_size(grid_store, folder, size):
    with pytest.raises(equipoise.InputError, match=r"^--size .*: expected \(width, height\) in pixels"):
        plot_store(grid_store, str(folder / "x.png"), x="c[2]", y="c[1]", size=size)


def test_unwritable_output(grid_store, folder):
    with pytest.raises(equipoise.InputError, match=r"^--out .*: cannot write there; expected a PNG path"):
        plot_store(grid_store, str(folder / "missing" / "map.png"), x="c[2]", y="c[1]")
    with pytest.raises(equipoise.InputError, match=r"^--out .*: expected a file name ending in .png"):
        plot_store(grid_store, str(folder / "map.svg"), x="c[2]", y="c[1]")
    with pytest.raises(equipoise.InputError, match=r"results store not found"):
        plot_store(str(folder / "nothing.sqlite"), str(folder / "x.png"), x="c[2]")

"""Sweeps through the Python entry point: closed forms at every point, the store's contract."""

import itertools
import os
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from equipoise import InputError
from equipoise.sweeps import Axis, Store, SweepSpec, load_spec, sweep

FERRIES = "models/cournot_saltmere_ferries.py"  # a = 120, b = 1.5, c = (18, 24, 45)
TRIANGLE = "models/network_effort_triangle.py"


def cournot_closed_form(a, b, costs):
    """Linear Cournot with exits (Tirole 1988, The Theory of Industrial Organization, ch. 5):
    q_i = [a - (n+1) c_i + sum_j c_j] / (b (n+1)) over the active firms; a firm whose cost is
    not below the resulting price produces 0 and the rest are re-solved."""
    costs = np.asarray(costs, dtype=float)
    active = np.ones(costs.size, dtype=bool)
    while True:
        n = active.sum()
        price = (a + costs[active].sum()) / (n + 1)
        out = costs >= price
        if not np.any(out & active):
            break
        active &= ~out
    q = np.where(active, (price - costs) / b, 0.0)
    return q, price


@pytest.fixture(scope="module")
def ferry_sweep(tmp_path_factory):
    store = tmp_path_factory.mktemp("ferries") / "ferries.sqlite"
    spec = SweepSpec(FERRIES, axes=(Axis.linear("c[2]", 20.0, 90.0, 15),), batch=8)
    return spec, store, sweep(spec, store, progress=False)


def test_cournot_sweep_matches_the_closed_form_at_every_point(ferry_sweep):
    spec, store, result = ferry_sweep
    assert result.complete and result.computed == 15 and result.counts["solved"] == 15
    with Store.read(store) as db:
        points, eqs = db.points(), db.equilibria(stability=True)
    assert [p["id"] for p in points] == list(range(15))       # exactly one row per point
    assert [e["point"] for e in eqs] == list(range(15))       # exactly one equilibrium per point
    exits = 0
    for p, e in zip(points, eqs):
        q, price = cournot_closed_form(120.0, 1.5, [18.0, 24.0, p["values"][0]])
        np.testing.assert_allclose(e["actions"], q, atol=1e-8, rtol=1e-8)
        np.testing.assert_allclose(e["payoffs"], 1.5 * q * q, rtol=1e-8, atol=1e-6)  # profit_i = b q_i^2
        assert e["nash"] == "global"
        exits += q[2] == 0.0
    # The closed form puts the exit at c_3 = (a + c_1 + c_2) / 3 = 54: points 7..14 lie beyond it.
    assert exits == 8
    for e in eqs:
        # Continuous gradient adjustment in linear Cournot: Jacobian -b (I + 11'), stable for every n
        # (Theocharis 1960, as stated in the references); the corner firm is held at its bound.
        assert (e["equal_speeds"], e["player_speeds"], e["coordinate_speeds"]) == ("stable", "robust", "robust")
        free = 3 if e["actions"][2] > 0 else 2
        # -b(I + 11') on the free coordinates has largest eigenvalue -b.
        assert e["equal_abscissa"] == pytest.approx(-1.5, rel=1e-9)
        assert e["stability"]["coordinate_speeds"]["verdict"] == "robust" and free in (2, 3)
        # Theocharis (1960), Review of Economic Studies 27(2): simultaneous best responses in linear
        # Cournot have spectral radius (n - 1) / 2 for n active firms: 1 (neutral) for 3, 1/2 for 2.
        assert e["best_response_radius"] == pytest.approx((free - 1) / 2, rel=1e-9)
        # Largest stable step of discrete gradient play, 2 / |lambda_max|, with lambda_max = -b (n + 1)
        # the extreme eigenvalue of -b (I + 11') (common practice for x + eta F(x) with symmetric J).
        assert e["learning_rate_limit"] == pytest.approx(2 / (1.5 * (free + 1)), rel=1e-9)


def test_csv_export_names_columns_as_given(ferry_sweep, tmp_path):
    _, store, _ = ferry_sweep
    target = tmp_path / "rows.csv"
    assert Store.read(store).export_csv(target) == 15
    lines = target.read_text().splitlines()
    header = lines[0].split(",")
    assert header[:4] == ["point", "c[2]", "status", "equilibrium"]
    assert header[4:7] == ["bluewake", "harrowline", "gullwing"]
    assert {"nash", "equal_speeds", "player_speeds", "coordinate_speeds"} <= set(header)
    assert len(lines) == 16
    row = dict(zip(header, lines[1].split(",")))
    q, _ = cournot_closed_form(120.0, 1.5, [18.0, 24.0, 20.0])
    assert float(row["gullwing"]) == pytest.approx(q[2], rel=1e-10)


def test_running_again_resumes_and_duplicates_nothing(ferry_sweep):
    spec, store, _ = ferry_sweep
    again = sweep(spec, store, progress=False)
    assert again.computed == 0 and again.stored == 15 and again.counts["equilibria"] == 15


def test_store_of_another_spec_is_refused_then_kept_aside(ferry_sweep, tmp_path):
    spec, store, _ = ferry_sweep
    copy = tmp_path / "copy.sqlite"
    copy.write_bytes(store.read_bytes())
    other = SweepSpec(FERRIES, axes=(Axis.linear("c[2]", 20.0, 90.0, 16),), batch=8)
    with pytest.raises(InputError, match="made from another spec or from different contents of the model file.*--new"):
        sweep(other, copy, progress=False)
    res = sweep(SweepSpec(FERRIES, axes=(Axis("a", (100.0, 110.0)),), batch=8), copy, new=True, progress=False)
    assert res.complete and res.points == 2
    kept = [f for f in os.listdir(tmp_path) if f.startswith("copy.sqlite.replaced-")]
    assert len(kept) == 1  # the old store is kept, not deleted
    assert len(Store.read(tmp_path / kept[0]).points()) == 15


def test_a_changed_model_file_is_another_sweep(ferry_sweep, tmp_path):
    spec, store, _ = ferry_sweep
    model = tmp_path / "ferries.py"
    model.write_text(Path(FERRIES).read_text() + "\n# edited\n")
    copy = tmp_path / "copy.sqlite"
    copy.write_bytes(store.read_bytes())
    with pytest.raises(InputError, match="different contents of the model file"):
        sweep(SweepSpec(str(model), axes=spec.axes, batch=8), copy, progress=False)


@pytest.mark.parametrize("content, message", [
    (b"this is not a database, just some text " * 40, "not a readable results store"),
    (b"", "not an equipoise results store"),
])
def test_corrupt_store_is_a_clear_error(tmp_path, content, message):
    bad = tmp_path / "bad.sqlite"
    bad.write_bytes(content)
    with pytest.raises(InputError, match=message):
        Store.read(bad)
    with pytest.raises(InputError, match=message):
        sweep(SweepSpec(FERRIES, axes=(Axis("a", (100.0,)),)), bad, progress=False)
    assert bad.read_bytes() == content  # nothing was overwritten
    res = sweep(SweepSpec(FERRIES, axes=(Axis("a", (100.0,)),)), bad, new=True, progress=False)
    assert res.complete  # asked for a new store: the unreadable file is kept aside, not deleted
    kept = [f for f in os.listdir(tmp_path) if f.startswith("bad.sqlite.replaced-")]
    assert len(kept) == 1 and (tmp_path / kept[0]).read_bytes() == content


def test_truncated_store_is_a_clear_error(ferry_sweep, tmp_path):
    _, store, _ = ferry_sweep
    bad = tmp_path / "cut.sqlite"
    bad.write_bytes(store.read_bytes()[:3000])
    with pytest.raises(InputError, match=r"cut.sqlite: .*(damaged|not a readable)"):
        Store.read(bad).equilibria()


def test_foreign_sqlite_file_is_refused(tmp_path):
    path = tmp_path / "other.sqlite"
    with sqlite3.connect(path) as conn:
        conn.execute("CREATE TABLE t (x)")
    with pytest.raises(InputError, match="not an equipoise results store"):
        Store.read(path)


def _support_enumeration(delta):
    """All equilibria of u_i = x_i - x_i^2/2 - delta x_i sum_j g_ij x_j, x >= 0, on the triangle:
    (I + delta G_SS) x_S = 1, x_S > 0, 1 - delta (G x)_i <= 0 off S (Bramoulle, Kranton &
    D'Amours 2014, "Strategic interaction and networks", AER 104(3))."""
    G = np.ones((3, 3)) - np.eye(3)
    out = []
    for k in range(1, 4):
        for S in itertools.combinations(range(3), k):
            S = list(S)
            xs = np.linalg.solve(np.eye(k) + delta * G[np.ix_(S, S)], np.ones(k))
            x = np.zeros(3)
            x[S] = xs
            off = [i for i in range(3) if i not in S]
            if np.all(xs > 0) and np.all(1 - delta * (G @ x)[off] <= 1e-12):
                out.append(x)
    return sorted(map(tuple, out))


def test_all_equilibria_at_every_point_of_a_network_sweep(tmp_path):
    spec = SweepSpec(TRIANGLE, axes=(Axis("delta", (0.5, 1.5, 3.0)),), starts=2, all_equilibria=True,
                     labels="equal", batch=4)
    res = sweep(spec, tmp_path / "net.sqlite", progress=False)
    db = Store.read(tmp_path / "net.sqlite")
    eqs = db.equilibria()
    for p in db.points():
        got = sorted(tuple(np.round(e["actions"], 9)) for e in eqs if e["point"] == p["id"] and e["nash"] != "not_nash")
        want = _support_enumeration(p["values"][0])
        assert len(got) == len(want), p
        np.testing.assert_allclose(got, want, atol=1e-8)
    assert res.counts["equilibria"] >= 1 + 7 + 7


def test_equal_labels_agree_with_full_labels(ferry_sweep, tmp_path):
    spec, store, _ = ferry_sweep
    quick = SweepSpec(FERRIES, axes=spec.axes, batch=8, labels="equal")
    sweep(quick, tmp_path / "quick.sqlite", progress=False)
    full = Store.read(store).equilibria()
    fast = Store.read(tmp_path / "quick.sqlite").equilibria()
    assert [e["equal_speeds"] for e in fast] == [e["equal_speeds"] for e in full]
    np.testing.assert_allclose([e["equal_abscissa"] for e in fast], [e["equal_abscissa"] for e in full],
                               rtol=1e-12)
    assert all(e["coordinate_speeds"] is None for e in fast)


def test_sampled_sweep_and_log_axis(tmp_path):
    spec = SweepSpec(FERRIES, axes=(Axis("a", low=100.0, high=200.0), Axis("b", low=0.5, high=4.0, scale="log")),
                     sample=6, batch=8, labels="none")
    values = spec.points()
    assert values.shape == (6, 2)
    assert np.all((values[:, 0] >= 100) & (values[:, 0] <= 200) & (values[:, 1] >= 0.5) & (values[:, 1] <= 4.0))
    res = sweep(spec, tmp_path / "s.sqlite", progress=False)
    eqs = Store.read(tmp_path / "s.sqlite").equilibria()
    for (a, b), e in zip(values, eqs):
        q, _ = cournot_closed_form(a, b, [18.0, 24.0, 45.0])
        np.testing.assert_allclose(e["actions"], q, atol=1e-8, rtol=1e-8)
    assert res.counts["solved"] == 6
    np.testing.assert_allclose(Axis.log("b", 1.0, 100.0, 3).values, [1.0, 10.0, 100.0], rtol=1e-12)


def test_failed_point_keeps_its_reason(tmp_path):
    # b = 0 makes the Cournot search box [0, a/b] infinite: that point fails, the others solve.
    spec = SweepSpec(FERRIES, axes=(Axis("b", (1.5, 0.0, 3.0)),), batch=4, labels="none")
    res = sweep(spec, tmp_path / "f.sqlite", progress=False)
    pts = Store.read(tmp_path / "f.sqlite").points()
    assert [p["status"] for p in pts] == ["solved", "failed", "solved"]
    assert "search region" in pts[1]["reason"]
    assert res.counts == {"solved": 2, "failed": 1, "equilibria": 2}


SPEC_TOML = """
model = "{model}"
store = "out.sqlite"

[params]
a = 120.0

[[axis]]
name = "c[2]"
start = 20.0
stop = 90.0
num = 4

[solve]
starts = 4
labels = "equal"
batch = 8
"""


def test_toml_spec_reads_relative_paths(tmp_path):
    path = tmp_path / "sweep.toml"
    path.write_text(SPEC_TOML.format(model=os.path.abspath(FERRIES)))
    spec, store = load_spec(path)
    assert store == str(tmp_path / "out.sqlite")
    np.testing.assert_allclose(spec.axes[0].values, np.linspace(20.0, 90.0, 4), rtol=0, atol=0)
    assert (spec.starts, spec.labels, spec.batch, dict(spec.params)) == (4, "equal", 8, {"a": 120.0})


@pytest.mark.parametrize("edit, message", [
    (lambda t: t.replace("[solve]", "[solve]\nspeed = 3"), "unknown key 'speed' in \\[solve\\]"),
    (lambda t: t.replace("num = 4", "num = 0"), "axis c\\[2\\]: expected a positive whole number of values"),
    (lambda t: t.replace("num = 4", "num = 2.5"), "axis c\\[2\\]: expected a positive whole number"),
    (lambda t: t.replace('name = "c[2]"', 'name = "c[7]"'), "axis c\\[7\\]: expected an index into a vector of 3"),
    (lambda t: t.replace('name = "c[2]"', 'name = "cost"'), "axis cost: 'cost' is not a parameter"),
    (lambda t: t.replace('name = "c[2]"', 'name = "c"'), "axis c: parameter 'c' has shape"),
    (lambda t: t.replace("a = 120.0", "a = [1.0, 2.0]"), "params: parameter 'a': expected a number"),
    (lambda t: t.replace('labels = "equal"', 'labels = "most"'), "labels: 'most'; expected one of"),
    (lambda t: t.replace("start = 20.0", "start = \"x\""), "axis c\\[2\\]: start: expected a number"),
    (lambda t: t.replace("batch = 8", "batch = -1"), "batch: expected a positive whole number"),
    (lambda t: t + "\n[[[", "not valid TOML"),
    (lambda t: t.replace("stop = 90.0\n", ""), "axis c\\[2\\]: stop: missing"),
])
def test_bad_spec_is_one_clear_line(tmp_path, edit, message):
    path = tmp_path / "sweep.toml"
    path.write_text(edit(SPEC_TOML.format(model=os.path.abspath(FERRIES))))
    with pytest.raises(InputError, match=message) as info:
        spec, _ = load_spec(path)
        sweep(spec, tmp_path / "x.sqlite", progress=False)
    assert str(info.value).startswith(str(path)) and "\n" not in str(info.value)
    assert not (tmp_path / "x.sqlite").exists()


def test_speed_verdicts_over_a_grid_match_the_3x3_criterion(tmp_path):
    # Water-draw game with constant Jacobian J = -[[1, k, 0], [0, 1, k], [k, 0, d3]].
    # Cain (1976), "Real, 3x3, D-stable matrices", J. Res. NBS 80B (criterion from memory, as stated
    # in the references): B = -J is D-stable iff B in P0+ and
    # sqrt(b11 B23) + sqrt(b22 B13) + sqrt(b33 B12) >= sqrt(det B); here that is
    # 3 sqrt(d3) >= sqrt(d3 + k^3), i.e. k^3 <= 8 d3. Equal speeds: the sign of max Re eig(J) (numpy).
    spec = SweepSpec("models/cycle_three_districts.py",
                     axes=(Axis.linear("k", 0.5, 6.0, 6), Axis.linear("d[2]", 1.0, 10.0, 5)), starts=2, batch=32)
    sweep(spec, tmp_path / "q.sqlite", progress=False)
    with Store.read(tmp_path / "q.sqlite") as db:
        points, eqs = db.points(), db.equilibria()
    seen = set()
    for p, e in zip(points, eqs):
        k, d3 = p["values"]
        J = -np.array([[1.0, k, 0.0], [0.0, 1.0, k], [k, 0.0, d3]])
        np.testing.assert_allclose(e["actions"], np.linalg.solve(-J, [6.0, 5.0, 7.0]), rtol=1e-9, atol=1e-9)
        top = np.max(np.linalg.eigvals(J).real)
        assert e["equal_speeds"] == ("stable" if top < 0 else "unstable")
        assert e["equal_abscissa"] == pytest.approx(top, abs=1e-9)
        if abs(k ** 3 - 8 * d3) > 0.01 * 8 * d3:
            want = "robust" if k ** 3 < 8 * d3 else "fragile"
            assert e["coordinate_speeds"] == want and e["player_speeds"] == want, (k, d3)
            seen.add(want)
    assert seen == {"robust", "fragile"}


def test_warm_starts_spread_equilibria_that_only_some_points_found(tmp_path, monkeypatch):
    # From 4 Sobol starts per point some points of the triangle network find 3 of its equilibria
    # and others 4; the warm pass restarts every point from its neighbours' roots and the batch's
    # pool of roots. Every equilibrium found must be one of the support enumeration's
    # (Bramoulle, Kranton & D'Amours 2014), and the warm pass must find more of them.
    import equipoise.sweeps._batch as batch

    spec = SweepSpec(TRIANGLE, axes=(Axis.linear("delta", 1.1, 3.0, 16),), starts=4, labels="none", batch=16)

    def counts(store):
        sweep(spec, store, progress=False)
        with Store.read(store) as db:
            for e in db.equilibria():
                delta = db.points()[e["point"]]["values"][0]
                assert np.min(np.max(np.abs(np.array(_support_enumeration(delta)) - e["actions"]), axis=1)) < 1e-8
            return np.array([p["equilibria"] for p in db.points()])

    with_warm = counts(tmp_path / "warm.sqlite")
    monkeypatch.setattr(batch, "WARM_PER_NEIGHBOUR", 0)
    monkeypatch.setattr(batch, "WARM_POOL", 0)
    cold = counts(tmp_path / "cold.sqlite")
    assert len(set(cold)) > 1                      # the Sobol starts alone disagree between points
    assert np.all(with_warm >= cold) and with_warm.sum() > cold.sum()


def test_export_onto_the_store_itself_is_refused_and_the_store_survives(ferry_sweep, tmp_path):
    _, store, _ = ferry_sweep
    copy = tmp_path / "own.sqlite"
    copy.write_bytes(store.read_bytes())
    with Store.read(copy) as db, pytest.raises(InputError, match="is the results store itself"):
        db.export_csv(copy)
    with Store.read(copy) as db:
        assert len(db.points()) == 15


def test_one_parameter_entry_written_two_ways_is_one_axis_twice():
    spec = SweepSpec(FERRIES, axes=(Axis("c[2]", (1.0, 2.0)), Axis("c[02]", (3.0,))))
    with pytest.raises(InputError, match=r"axis c\[02\]: the same parameter entry as axis c\[2\]"):
        spec.validate()


def test_repeated_new_stores_keep_every_old_one(tmp_path):
    store = tmp_path / "s.sqlite"
    for a in (100.0, 110.0, 120.0):
        sweep(SweepSpec(FERRIES, axes=(Axis("a", (a,)),), labels="none"), store, new=True, progress=False)
    kept = sorted(f for f in os.listdir(tmp_path) if f.startswith("s.sqlite.replaced-"))
    assert len(kept) == 2
    firsts = sorted(Store.read(tmp_path / f).points()[0]["values"][0] for f in kept)
    assert firsts == [100.0, 110.0]
    assert Store.read(store).points()[0]["values"] == [120.0]


def test_store_path_that_is_the_model_file_is_refused(tmp_path):
    model = tmp_path / "m.py"
    model.write_text(Path(FERRIES).read_text())
    with pytest.raises(InputError, match="is the model file"):
        sweep(SweepSpec(str(model), axes=(Axis("a", (100.0,)),)), model, new=True, progress=False)
    assert model.read_text() == Path(FERRIES).read_text()


def test_axis_named_like_a_store_column_is_refused(tmp_path):
    model = tmp_path / "m.py"
    model.write_text(Path(FERRIES).read_text().replace("game = cournot(", "game = cournot(") +
                     "\ngame.defaults['status'] = game.defaults['a']\n")
    with pytest.raises(InputError, match="axis status: the name is a column of the results store"):
        sweep(SweepSpec(str(model), axes=(Axis("status", (1.0,)),)), tmp_path / "x.sqlite", progress=False)
    assert not (tmp_path / "x.sqlite").exists()


@pytest.mark.parametrize("edit, message", [
    (lambda t: t.replace("num = 4", "num = 1000000000000"), "expected a positive whole number of values"),
    (lambda t: t.replace("a = 120.0", 'a = "120"'), "params: a: expected a number"),
    (lambda t: t.replace("a = 120.0", "a = true"), "params: a: expected a number"),
    (lambda t: t.replace("batch = 8", "batch = 100000000000"), "batch: expected a positive whole number"),
    (lambda t: t.replace('name = "c[2]"', 'name = "c[-1]"'), "expected NAME or NAME\\[INDEX\\]"),
])
def test_more_bad_specs_are_one_clear_line(tmp_path, edit, message):
    path = tmp_path / "sweep.toml"
    path.write_text(edit(SPEC_TOML.format(model=os.path.abspath(FERRIES))))
    with pytest.raises(InputError, match=message) as info:
        load_spec(path)
    assert str(info.value).startswith(str(path))


def test_malformed_scheduler_address_is_one_line(tmp_path):
    pytest.importorskip("distributed")
    with pytest.raises(InputError, match="--scheduler bogus://x: cannot reach the Dask scheduler"):
        sweep(SweepSpec(FERRIES, axes=(Axis("a", (100.0,)),)), tmp_path / "x.sqlite", engine="dask",
              scheduler="bogus://x", progress=False)

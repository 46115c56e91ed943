"""Traced functions kept between runs (equipoise._trace_cache).

A model file is loaded twice, as two runs of the command line would: the second
load must find every traced function on disk, give the same numbers bit for bit
as a solve without the cache, and never be served an entry that is stale
(changed data behind an unchanged model file), corrupt or someone else's.
"""

from __future__ import annotations

import json

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from equipoise import _trace_cache, load_game, solve
from equipoise._compile_cache import use_compile_cache

# The slopes are read from a data file next to the model, so they are constants of the
# trace that the model file's text does not show.
MODEL = '''
import json, os

import jax.numpy as jnp

from equipoise import Game

with open(os.path.join(os.path.dirname(__file__), "slopes.json")) as f:
    SLOPES = jnp.asarray(json.load(f))


def payoffs(x, theta):
    q = jnp.concatenate([x["a"], x["b"]])
    price = theta["a"] - SLOPES @ q
    return {"a": (price - theta["c"][0]) * q[0], "b": (price - theta["c"][1]) * q[1]}


game = Game({"a": 1, "b": 1}, payoffs, params={"a": 12.0, "c": [1.0, 2.0]},
            lower={"a": 0.0, "b": 0.0}, upper={"a": 20.0, "b": 20.0})
'''

# Textbook Cournot duopoly with inverse demand a - b (q1 + q2) and unit costs c_i
# (e.g. Tirole 1988, The Theory of Industrial Organization, ch. 5):
# q_i = (a - 2 c_i + c_j) / (3 b).
def cournot_quantities(a, b, c1, c2):
    return np.array([(a - 2 * c1 + c2) / (3 * b), (a - 2 * c2 + c1) / (3 * b)])


# Common practice: Newton converges to round-off on a linear first-order system.
TOL = 1e-9


@pytest.fixture(scope="module", autouse=True)
def _compile_cache():
    # The session's compile cache (conftest) keeps repeated compilations cheap.
    use_compile_cache()


@pytest.fixture
def model(tmp_path):
    (tmp_path / "slopes.json").write_text(json.dumps([1.0, 1.0]))
    path = tmp_path / "duopoly.py"
    path.write_text(MODEL)
    return path


@pytest.fixture
def traces(tmp_path, monkeypatch):
    where = tmp_path / "traces"
    monkeypatch.setattr(_trace_cache, "DIRECTORY", str(where))
    return where


@pytest.fixture
def exports(monkeypatch):
    """Counts the functions traced and exported (a stored entry needs none)."""
    count = {"n": 0}
    real = jax.export.export

    def counting(fn, **kw):
        count["n"] += 1
        return real(fn, **kw)

    monkeypatch.setattr(jax.export, "export", counting)
    return count


def _entries(where):
    return sorted(where.rglob("*.bin"))


def _numbers(sol):
    """Everything numeric a solve reports (not its timing)."""
    out = [sol.status.name, {k: v for k, v in sol.stats.items() if k != "seconds"}]
    for e in sol.equilibria:
        out += [e.x.tolist(), e.residual, e.nash.name, e.jacobian.tolist(), e.gains.tolist(),
                e.own_curvature.tolist(), e.starts, e.stability.to_dict()]
    return out


def _plain_solve(path, monkeypatch):
    with monkeypatch.context() as mp:
        mp.setattr(_trace_cache, "DIRECTORY", None)
        return solve(load_game(path), starts=8)


def test_second_load_uses_stored_traces(model, traces, exports, monkeypatch):
    first = solve(load_game(model), starts=8)
    assert exports["n"] > 0
    stored = _entries(traces)
    assert stored
    exports["n"] = 0
    second = solve(load_game(model), starts=8)  # a new game object, as in a new process
    assert exports["n"] == 0
    assert _entries(traces) == stored
    assert _numbers(second) == _numbers(first) == _numbers(_plain_solve(model, monkeypatch))
    assert np.allclose(second.equilibria[0].x, cournot_quantities(12.0, 1.0, 1.0, 2.0), rtol=TOL)


@pytest.mark.parametrize("damage", ["garbage", "truncated", "swapped"])
def test_damaged_entries_are_traced_again(model, traces, exports, damage):
    first = solve(load_game(model), starts=8)
    stored = _entries(traces)
    contents = [p.read_bytes() for p in stored]
    for k, path in enumerate(stored):
        if damage == "garbage":
            path.write_bytes(b"not an entry\n" * 3)
        elif damage == "truncated":
            path.write_bytes(contents[k][: len(contents[k]) // 2])
        else:  # another entry's content under this entry's name
            path.write_bytes(contents[(k + 1) % len(contents)])
    exports["n"] = 0
    second = solve(load_game(model), starts=8)
    assert exports["n"] == len(stored)
    assert _numbers(second) == _numbers(first)
    exports["n"] = 0
    solve(load_game(model), starts=8)  # the rewritten entries are good again
    assert exports["n"] == 0


def test_changed_data_behind_the_model_is_not_served_stale(model, traces, exports):
    solve(load_game(model), starts=8)
    (model.parent / "slopes.json").write_text(json.dumps([2.0, 2.0]))
    exports["n"] = 0
    sol = solve(load_game(model), starts=8)
    assert exports["n"] > 0
    assert np.allclose(sol.equilibria[0].x, cournot_quantities(12.0, 2.0, 1.0, 2.0), rtol=TOL)


def test_traced_arguments_go_to_the_function(model, traces):
    game = load_game(model)
    theta = game.theta()
    lo, hi = game.region(theta)  # concrete: through the cache
    lo_j, hi_j = jax.jit(game.region)(theta)
    assert np.array_equal(lo, lo_j) and np.array_equal(hi, hi_j)
    caps = jnp.array([5.0, 8.0])
    boxed = jax.vmap(lambda u: game.region({**theta, "a": u}))(caps)  # region does not depend on a here
    assert boxed[0].shape == (2, 2)


def test_game_with_an_unknown_function_is_not_stored(model, traces, exports, monkeypatch):
    game = load_game(model)
    game.extra_hook = lambda x: x  # a function the fingerprint does not know how to call
    sol = solve(game, starts=8)
    assert exports["n"] == 0
    assert not _entries(traces)
    assert _numbers(sol) == _numbers(_plain_solve(model, monkeypatch))


def test_compiled_ahead_gives_the_same_result(traces, exports):
    f = _trace_cache.kept(("test double", 2), jax.jit(lambda x, d: {"y": x * d["k"], "n": None}))
    x, d = jnp.arange(3.0), {"k": jnp.asarray(2.0)}
    f.ahead(x, d)
    out = f(x, d)
    assert exports["n"] == 1
    assert out["n"] is None and np.array_equal(out["y"], [0.0, 2.0, 4.0])
    again = _trace_cache.kept(("test double", 2), jax.jit(lambda x, d: {"y": x * d["k"], "n": None}))
    assert np.array_equal(again(x, d)["y"], out["y"])
    assert exports["n"] == 1


def test_off_without_a_directory(model, exports, monkeypatch):
    monkeypatch.setattr(_trace_cache, "DIRECTORY", None)
    solve(load_game(model), starts=8)
    assert exports["n"] == 0

"""The ``equipoise`` command line on the scenario files in ``models/``.

The command line is run in-process through ``equipoise.cli.main`` (JAX
compiles each new game once per process; the persistent compile cache, kept in
this session's temporary directory, lets repeated solves of the same model
reuse it). One test runs the installed console script to prove the entry
point works.

Each model file is solved once with ``--json`` (memoised for this module) and
the parsed output is shared by the tests that read it.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import re
import shutil
import subprocess
import sys
from itertools import permutations
from pathlib import Path

import pytest

import equipoise
from equipoise.cli import main

MODELS_DIR = Path(__file__).resolve().parents[1] / "models"
MODEL_FILES = sorted(MODELS_DIR.glob("*.py"))
FERRIES = MODELS_DIR / "cournot_saltmere_ferries.py"
NETWORK = MODELS_DIR / "network_effort_triangle.py"

# Common practice: a KKT residual of 1e-8 is far above float64 round-off for
# payoffs of these magnitudes and far below any economically meaningful error.
RESIDUAL_TOL = 1e-8
# Common practice: relative tolerance when comparing solver output with a
# closed form in float64 (Newton converges to ~1e-14 on these linear systems).
CLOSED_FORM_RTOL = 1e-9
# The solver's default de-duplication tolerance (equipoise.solve, dedup_tol):
# coordinates closer than this are ties in the documented equilibrium order.
DEDUP_TOL = 1e-6


def _run(argv: list[str]) -> tuple[int, str, str]:
    """``main(argv)`` with its exit status, standard output and standard error."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            rc = main(argv)
        except SystemExit as exc:  # argparse exits on its own errors
            rc = exc.code
    return rc, out.getvalue(), err.getvalue()


_SOLVED: dict[tuple[str, ...], dict] = {}


def _solve_json(model: Path, *extra: str) -> dict:
    """Parsed ``equipoise solve MODEL --json EXTRA...``, solved once per module."""
    key = (str(model), *extra)
    if key not in _SOLVED:
        rc, out, err = _run(["solve", str(model), "--json", *extra])
        assert rc == 0, err
        assert err == ""
        _SOLVED[key] = json.loads(out)
    return _SOLVED[key]


def _stacked(eq: dict) -> list[float]:
    return [v for acts in eq["actions"].values() for v in acts]


# ---------------------------------------------------------------- contract


def test_models_directory_holds_the_scenarios():
    names = {p.name for p in MODEL_FILES}
    assert FERRIES.name in names
    assert NETWORK.name in names
    assert len(MODEL_FILES) >= 5


@pytest.mark.parametrize("model", MODEL_FILES, ids=lambda p: p.stem)
def test_solve_json_contract(model):
    """Every model solves (exit 0) to JSON with the documented keys and types."""
    doc = _solve_json(model)
    game = equipoise.load_game(model)  # cheap: nothing is compiled

    assert doc["model"] == str(model)
    assert isinstance(doc["params"], dict)
    assert set(doc["params"]) == set(game.defaults)
    for name, default in game.defaults.items():
        assert doc["params"][name] == default.tolist()

    n = sum(game.sizes)
    assert isinstance(doc["equilibria"], list) and doc["equilibria"]
    for eq in doc["equilibria"]:
        assert {"actions", "payoffs", "residual", "nash", "jacobian"} <= set(eq)
        assert list(eq["actions"]) == list(game.players)
        for player, m in zip(game.players, game.sizes):
            acts = eq["actions"][player]
            assert isinstance(acts, list) and len(acts) == m
            assert all(isinstance(v, float) and math.isfinite(v) for v in acts)
        assert set(eq["payoffs"]) == set(game.players)
        assert all(isinstance(v, float) and math.isfinite(v) for v in eq["payoffs"].values())
        assert isinstance(eq["residual"], float)
        assert 0.0 <= eq["residual"] < RESIDUAL_TOL
        assert eq["nash"] == "global"
        jac = eq["jacobian"]
        assert len(jac) == n and all(len(row) == n for row in jac)
        assert all(isinstance(v, float) and math.isfinite(v) for row in jac for v in row)


# ---------------------------------------------------------------- --set


def test_set_overrides_cost_and_third_ferry_exits():
    """--set c=[18,24,200]: the third firm produces 0; the others play the duopoly.

    Source: Tirole (1988), The Theory of Industrial Organization, ch. 5.
    With linear inverse demand p = a - bQ and constant costs, the N-firm
    Cournot outputs are q_i = [a - (N+1) c_i + sum_j c_j] / ((N+1) b).
    Defaults (a=120, b=1.5, c=[18,24,45]) give N=3 with all outputs positive;
    with c_3 = 200 the duopoly price a - b(q_1+q_2) = 54 lies below c_3, so the
    third firm's marginal profit at zero output is negative and it produces 0.
    """
    a, b = 120.0, 1.5

    base = _solve_json(FERRIES)
    assert base["params"]["c"] == [18.0, 24.0, 45.0]
    (eq,) = base["equilibria"]
    c = [18.0, 24.0, 45.0]
    for player, ci in zip(["bluewake", "harrowline", "gullwing"], c):
        expected = (a - 4 * ci + sum(c)) / (4 * b)
        assert eq["actions"][player][0] == pytest.approx(expected, rel=CLOSED_FORM_RTOL)
    assert eq["actions"]["gullwing"][0] > 1.0  # 4.5 by the formula: the override must change it

    doc = _solve_json(FERRIES, "--set", "c=[18,24,200]")
    assert doc["params"]["c"] == [18.0, 24.0, 200.0]
    assert doc["params"]["a"] == a and doc["params"]["b"] == b  # others untouched
    (eq,) = doc["equilibria"]
    assert eq["nash"] == "global"
    assert eq["residual"] < RESIDUAL_TOL
    assert eq["actions"]["gullwing"] == [0.0]
    c1, c2 = 18.0, 24.0
    q1 = (a - 3 * c1 + c1 + c2) / (3 * b)
    q2 = (a - 3 * c2 + c1 + c2) / (3 * b)
    assert eq["actions"]["bluewake"][0] == pytest.approx(q1, rel=CLOSED_FORM_RTOL)
    assert eq["actions"]["harrowline"][0] == pytest.approx(q2, rel=CLOSED_FORM_RTOL)
    # The exit condition of the docstring, from the solver's own numbers.
    price = a - b * (eq["actions"]["bluewake"][0] + eq["actions"]["harrowline"][0])
    assert price < 200.0


# ---------------------------------------------------------------- network model

# Source: Bramoulle, Kranton and D'Amours (2014), Strategic Interaction and
# Networks, American Economic Review (games of strategic substitutes on a
# network). Here u_i = x_i - x_i^2/2 - delta x_i sum_{j != i} x_j on the
# triangle, x_i >= 0, delta = 1.5. For an active set S the first-order
# conditions 1 - x_i - delta sum_{j in S, j != i} x_j = 0 give x = 1 (|S| = 1),
# 1/(1 + delta) = 0.4 (|S| = 2), 1/(1 + 2 delta) = 0.25 (|S| = 3); an inactive
# farm's marginal payoff at 0 is 1 - 1.5 = -0.5 or 1 - 1.5 * 0.8 = -0.2 < 0.
# So every non-empty S is an equilibrium: 2^3 - 1 = 7 points.
NETWORK_POINTS = sorted(
    set(permutations((1.0, 0.0, 0.0)))
    | set(permutations((0.4, 0.4, 0.0)))
    | {(0.25, 0.25, 0.25)}
)


def test_network_json_finds_the_seven_equilibria():
    doc = _solve_json(NETWORK)
    found = [_stacked(eq) for eq in doc["equilibria"]]
    assert len(found) == len(NETWORK_POINTS) == 7
    for point in NETWORK_POINTS:
        matches = [f for f in found if all(abs(u - v) <= CLOSED_FORM_RTOL for u, v in zip(f, point))]
        assert len(matches) == 1, (point, found)


def test_network_human_table_mentions_seven_points(capsys):
    rc = main(["solve", str(NETWORK)])
    out, err = capsys.readouterr()
    assert rc == 0, err
    assert err == ""
    assert re.search(r"^7 distinct first-order point\(s\) from 64 starts", out, re.M), out
    blocks = re.findall(r"^equilibrium (\d+): (.*)$", out, re.M)
    assert [int(k) for k, _ in blocks] == list(range(1, 8))
    assert all(words.startswith("Nash equilibrium:") for _, words in blocks)
    for farm in ("north_field", "mill_field", "east_field"):
        assert len(re.findall(rf"^  {farm} ", out, re.M)) == 7


def test_equilibria_order_is_stable_across_runs():
    """Two runs of the same model print the same equilibria, in the same order."""
    first = _solve_json(NETWORK)
    rc, out, err = _run(["solve", str(NETWORK), "--json"])
    assert rc == 0, err
    second = json.loads(out)
    assert second["equilibria"] == first["equilibria"]
    # The documented order: stacked actions compared coordinate by coordinate.
    points = [_stacked(eq) for eq in first["equilibria"]]
    for prev, nxt in zip(points, points[1:]):
        for u, v in zip(prev, nxt):
            if abs(u - v) > DEDUP_TOL * (1.0 + max(abs(u), abs(v))):
                assert u < v, (prev, nxt)
                break
        else:
            pytest.fail(f"two equilibria within the de-duplication tolerance: {prev}, {nxt}")


# ---------------------------------------------------------------- demo


def _assert_demo_table(out: str) -> None:
    assert out.startswith("model: demo:")
    assert re.search(r"^1 distinct first-order point\(s\) from 64 starts", out, re.M), out
    assert re.search(r"^equilibrium 1: Nash equilibrium:", out, re.M)
    assert re.search(r"^  player +actions +payoff$", out, re.M)
    for bakery, n_prices in (("larkspur", 2), ("copperkettle", 1), ("millbrook", 1)):
        row = re.search(rf"^  {bakery} +(\S.*?) {{2,}}(\S+)$", out, re.M)
        assert row, (bakery, out)
        prices = [float(v) for v in row.group(1).split(",")]
        assert len(prices) == n_prices
        float(row.group(2))  # the payoff column is a number
    assert "Caution:" in out


def test_demo_prints_a_table(capsys):
    rc = main(["demo"])
    out, err = capsys.readouterr()
    assert rc == 0, err
    assert err == ""
    _assert_demo_table(out)


def test_console_script_demo(_compile_cache):
    """The installed ``equipoise`` entry point runs (the one subprocess test)."""
    exe = Path(sys.executable).with_name("equipoise")
    script = str(exe) if exe.exists() else shutil.which("equipoise")
    assert script, "the equipoise console script is not installed"
    env = dict(os.environ, EQUIPOISE_CACHE=str(_compile_cache))
    proc = subprocess.run([script, "demo"], capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    _assert_demo_table(proc.stdout)


# ---------------------------------------------------------------- solver methods

LOGIT = MODELS_DIR / "logit_valemont_bakeries.py"


@pytest.mark.parametrize("method", ["krylov", "fixed_point"])
def test_solve_method_gives_the_newton_equilibrium(method):
    """--method krylov / fixed_point reach the equilibrium dense Newton finds (the logit game's
    equilibrium is unique: Konovalov & Sandor 2010, "On price equilibrium with multi-product
    firms", Economic Theory 44; from memory)."""
    base = _solve_json(LOGIT)
    other = _solve_json(LOGIT, "--method", method, "--starts", "8")
    assert len(other["equilibria"]) == len(base["equilibria"]) == 1
    assert other["equilibria"][0]["nash"] == "global"
    assert _stacked(other["equilibria"][0]) == pytest.approx(_stacked(base["equilibria"][0]), abs=1e-9)


def test_solve_method_refused_for_a_game_without_a_map():
    rc, out, err = _run(["solve", str(FERRIES), "--method", "fixed_point"])
    assert rc == 2 and out == ""
    assert err.strip().endswith("has no fixed-point map (the logit families have one); use newton or krylov")
    assert "Traceback" not in err


def test_cli_methods_are_the_solver_methods():
    from equipoise import cli
    from equipoise._solve import METHODS

    assert cli.METHODS == METHODS

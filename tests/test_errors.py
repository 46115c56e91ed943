"""Bad input: one line on standard error, exit status 2, no traceback.

Every mistake a user can make in a model file, a ``--set`` value or an option
must be reported as one line that names the file, field or value and says what
was expected; the Python API raises :class:`equipoise.InputError` for the same
mistakes. The bad model files are written into pytest's ``tmp_path``; every
check here fails before the solver is compiled, so the tests are cheap.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

import equipoise
from equipoise import Game, InputError
from equipoise.cli import main

FERRIES = Path(__file__).resolve().parents[1] / "models" / "cournot_saltmere_ferries.py"


# ---------------------------------------------------------------- helpers


def write_model(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(textwrap.dedent(text).lstrip("\n"))
    return path


def line_of(path: Path, marker: str) -> int:
    """1-based number of the first line of ``path`` containing ``marker``."""
    for k, line in enumerate(path.read_text().splitlines(), 1):
        if marker in line:
            return k
    raise AssertionError(f"{marker!r} not in {path}")


def run(capsys, argv: list[str]) -> tuple[int, str, str]:
    try:
        rc = main(argv)
    except SystemExit as exc:  # argparse's own errors
        rc = exc.code
    out, err = capsys.readouterr()
    return rc, out, err


def assert_one_line_error(rc: int, out: str, err: str, *needles: str) -> str:
    """Exit 2, nothing on stdout, exactly one stderr line holding every needle."""
    assert rc == 2, (rc, err)
    assert out == ""
    assert "Traceback" not in err
    lines = err.splitlines()
    assert len(lines) == 1, err
    line = lines[0]
    assert "error:" in line
    for needle in needles:
        assert needle in line, (needle, line)
    return line


# ---------------------------------------------------------------- model files
# Each entry: file name, source, and a function (path -> needles) giving what
# the one-line message must contain.

TWO_PLAYERS = """
from equipoise import Game


def payoffs(x, theta):
    a, b = x["alder"][0], x["birch"][0]
{body}


game = Game({{"alder": 1, "birch": 1}}, payoffs)
"""


def _payoff_model(body: str) -> str:
    return TWO_PLAYERS.format(body=textwrap.indent(textwrap.dedent(body).strip("\n"), "    "))


SYNTAX_ERROR = """
from equipoise import Game


def payoffs(x, theta)
    return {}
"""

NAME_ERROR = """
from equipoise import cournot

ferries = 3
game = cournot(costs=[10.0] * ferries, a=undefined_demand_level)
"""

NO_GAME = """
from equipoise import cournot

gam = cournot(costs=[10.0, 12.0])
"""

NOT_A_GAME = """
game = {"alder": 1, "birch": 1}
"""

BAD_BOUNDS = """
from equipoise import Game


def payoffs(x, theta):
    return {"alder": -x["alder"][0] ** 2, "birch": -(x["birch"] ** 2).sum()}


game = Game(
    {"alder": 1, "birch": 2},
    payoffs,
    lower={"alder": 0.0, "birch": [0.0, 5.0]},
    upper={"alder": 1.0, "birch": [1.0, 2.0]},
)
"""

# Errors found while importing the file (load_game).
LOAD_CASES = {
    "syntax_error": (
        SYNTAX_ERROR,
        lambda p: [f"{p}:{line_of(p, 'def payoffs')}:", "syntax error"],
    ),
    "name_error_at_import": (
        NAME_ERROR,
        lambda p: [f"{p}:{line_of(p, 'undefined_demand_level')}:", "NameError", "undefined_demand_level"],
    ),
    "no_game": (
        NO_GAME,
        lambda p: [str(p), "defines no `game`", "expected"],
    ),
    "game_not_a_game": (
        NOT_A_GAME,
        lambda p: [str(p), "`game` is a dict", "expected an equipoise.Game"],
    ),
    "lower_above_upper": (
        BAD_BOUNDS,
        # Coordinate birch[1] has lower 5 > upper 2; the line is the Game(...) call.
        lambda p: [f"{p}:{line_of(p, 'game = Game(')}:", "birch[1]", "5", "2", "expected lower <= upper"],
    ),
}

# Errors found when the payoffs are first evaluated (before compiling).
PAYOFF_CASES = {
    "payoffs_wrong_keys": (
        _payoff_model('return {"alder": -a * a, "birch_typo": -b * b}'),
        lambda p: [str(p), "birch_typo", "missing: birch", "expected exactly the players"],
    ),
    "payoffs_vector_for_a_player": (
        # alder has two actions and its payoff forgets to sum them: shape (2,).
        TWO_PLAYERS.replace('{{"alder": 1', '{{"alder": 2').format(
            body='    return {"alder": -x["alder"] ** 2 + b, "birch": -b * b + a}'),
        lambda p: [str(p), "payoffs['alder']", "(2,)", "expected a scalar"],
    ),
    "payoffs_one_vector_for_a_player": (
        # x["alder"] is a 1-vector: the payoff -x**2 has shape (1,), not ().
        _payoff_model('return {"alder": -x["alder"] ** 2 + a * b, "birch": -b * b}'),
        lambda p: [str(p), "payoffs['alder']", "(1,)", "expected a scalar"],
    ),
    "payoffs_raise": (
        _payoff_model('raise RuntimeError("the tally book of alder is empty")'),
        lambda p: [str(p), "RuntimeError", "the tally book of alder is empty",
                   f"{p}:{line_of(p, 'raise RuntimeError')}"],
    ),
    "payoffs_missing_parameter": (
        _payoff_model('return {"alder": -a * a * theta["gamma"], "birch": -b * b}'),
        lambda p: [str(p), "KeyError", "gamma", f"{p}:{line_of(p, 'gamma')}"],
    ),
    "payoffs_not_a_dict": (
        _payoff_model("return (-a * a, -b * b)"),
        lambda p: [str(p), "tuple", "expected a dict"],
    ),
    "payoffs_nonfinite_at_starts": (
        # Unbounded actions: the default search box [-10, 10] holds negative
        # actions, where log is NaN.
        _payoff_model('import jax.numpy as jnp\nreturn {"alder": jnp.log(a) - a * b, "birch": jnp.log(b) - a * b}'),
        lambda p: [str(p), "payoffs['alder']", "not finite", "starting point", "expected finite payoffs"],
    ),
}


@pytest.mark.parametrize("case", sorted(LOAD_CASES) + sorted(PAYOFF_CASES))
def test_cli_bad_model_file(tmp_path, capsys, case):
    source, needles = {**LOAD_CASES, **PAYOFF_CASES}[case]
    path = write_model(tmp_path, f"{case}.py", source)
    rc, out, err = run(capsys, ["solve", str(path)])
    line = assert_one_line_error(rc, out, err, *needles(path))
    assert line.startswith("equipoise solve: error: ")


def test_cli_missing_model_file(tmp_path, capsys):
    path = tmp_path / "no_such_scenario.py"
    rc, out, err = run(capsys, ["solve", str(path)])
    assert_one_line_error(rc, out, err, str(path), "not found", "expected a Python file")


def test_cli_model_is_a_directory(tmp_path, capsys):
    rc, out, err = run(capsys, ["solve", str(tmp_path)])
    assert_one_line_error(rc, out, err, str(tmp_path), "is a directory")


@pytest.mark.parametrize("case", sorted(LOAD_CASES))
def test_api_load_game_raises_input_error(tmp_path, case):
    source, needles = LOAD_CASES[case]
    path = write_model(tmp_path, f"{case}.py", source)
    with pytest.raises(InputError) as info:
        equipoise.load_game(path)
    for needle in needles(path):
        assert needle in str(info.value)
    assert "\n" not in str(info.value)


def test_api_load_game_missing_file(tmp_path):
    with pytest.raises(InputError, match="not found"):
        equipoise.load_game(tmp_path / "no_such_scenario.py")


@pytest.mark.parametrize("case", sorted(PAYOFF_CASES))
def test_api_solve_raises_input_error(tmp_path, case):
    source, needles = PAYOFF_CASES[case]
    path = write_model(tmp_path, f"{case}.py", source)
    game = equipoise.load_game(path)  # imports fine; the payoffs are the problem
    with pytest.raises(InputError) as info:
        equipoise.solve(game)
    for needle in needles(path):
        assert needle in str(info.value)
    assert "\n" not in str(info.value)


def test_input_error_is_a_value_error():
    assert issubclass(InputError, ValueError)


# ---------------------------------------------------------------- --set and options
# The ferry model's parameters are a, b, c (3 costs) and d (3 quadratic terms).

SET_CASES = {
    "unknown_name": (["--set", "nope=1"], ["parameter 'nope'", "unknown", "a, b, c, d"]),
    "wrong_shape": (["--set", "c=[18,24]"], ["parameter 'c'", "expected a list of 3 numbers", "got a list of 2"]),
    "nested_wrong_shape": (["--set", "c=[[18,24,45]]"], ["parameter 'c'", "expected a list of 3 numbers", "(1, 3)"]),
    "list_for_a_number": (["--set", "a=[120,130]"], ["parameter 'a'", "expected a number"]),
    "not_json": (["--set", "c=abc"], ["--set c", "'abc'", "not a number or a JSON list"]),
    "not_a_number": (["--set", 'a="high"'], ["--set a", "high", "not a number"]),
    "boolean": (["--set", "a=true"], ["--set a", "true", "not a number"]),
    "not_finite": (["--set", "a=NaN"], ["parameter 'a'", "expected finite numbers"]),
    "no_equals_sign": (["--set", "c"], ["--set 'c'", "expected NAME=VALUE"]),
    "empty_name": (["--set", "=5"], ["--set '=5'", "expected NAME=VALUE"]),
}


@pytest.mark.parametrize("case", sorted(SET_CASES))
def test_cli_bad_set(capsys, case):
    extra, needles = SET_CASES[case]
    rc, out, err = run(capsys, ["solve", str(FERRIES), *extra])
    assert_one_line_error(rc, out, err, *needles)


OPTION_CASES = {
    "starts_zero": (["solve", str(FERRIES), "--starts", "0"], ["--starts", "positive whole number", "got 0"]),
    "starts_negative": (["solve", str(FERRIES), "--starts", "-5"], ["--starts", "positive whole number", "got -5"]),
    "starts_not_int": (["solve", str(FERRIES), "--starts", "many"], ["--starts", "'many'"]),
    "demo_starts_zero": (["demo", "--starts", "0"], ["equipoise demo", "--starts", "got 0"]),
    "unknown_option": (["solve", str(FERRIES), "--bogus"], ["unrecognized arguments", "--bogus"]),
    "unknown_command": (["resolve", str(FERRIES)], ["invalid choice", "'resolve'"]),
    "no_command": ([], ["required", "command"]),
    "no_model": (["solve"], ["required", "model"]),
}


@pytest.mark.parametrize("case", sorted(OPTION_CASES))
def test_cli_bad_option(capsys, case):
    argv, needles = OPTION_CASES[case]
    rc, out, err = run(capsys, argv)
    assert_one_line_error(rc, out, err, *needles)


# ---------------------------------------------------------------- API equivalents


@pytest.fixture
def ferry_game():
    # Invented numbers; the family's parameters are a, b, c, d.
    return equipoise.cournot(a=120.0, b=1.5, costs=[18.0, 24.0, 45.0])


def test_api_theta_unknown_name(ferry_game):
    with pytest.raises(InputError, match=r"parameter 'nope': unknown; this model's parameters are a, b, c, d"):
        ferry_game.theta({"nope": 1})


def test_api_theta_wrong_shape(ferry_game):
    with pytest.raises(InputError, match=r"parameter 'c': expected a list of 3 numbers, got a list of 2 numbers"):
        ferry_game.theta({"c": [18.0, 24.0]})


def test_api_theta_not_a_number(ferry_game):
    with pytest.raises(InputError, match=r"parameter 'a'"):
        ferry_game.theta({"a": "high"})


def test_api_theta_accepts_a_good_override(ferry_game):
    # The counterpart of the failures above: a same-shape override goes through.
    theta = ferry_game.theta({"c": [18.0, 24.0, 200.0]})
    assert theta["c"].tolist() == [18.0, 24.0, 200.0]
    assert float(theta["a"]) == 120.0


def test_api_solve_unknown_parameter(ferry_game):
    with pytest.raises(InputError, match="parameter 'nope'"):
        equipoise.solve(ferry_game, {"nope": 1.0})


@pytest.mark.parametrize("starts", [0, -1, True, 2.5])
def test_api_solve_bad_starts(ferry_game, starts):
    with pytest.raises(InputError, match="starts: expected a positive whole number"):
        equipoise.solve(ferry_game, starts=starts)


def test_api_game_lower_above_upper_names_the_coordinate():
    def payoffs(x, theta):
        return {"alder": -x["alder"][0] ** 2, "birch": -(x["birch"] ** 2).sum()}

    with pytest.raises(InputError, match=r"birch\[1\] has lower bound 5 above its upper bound 2"):
        Game({"alder": 1, "birch": 2}, payoffs,
             lower={"alder": 0.0, "birch": [0.0, 5.0]}, upper={"alder": 1.0, "birch": [1.0, 2.0]})


# ---------------------------------------------------------------- caught late
# Bad input that only shows when JAX traces or differentiates the user's code.

GAP_CASES = {
    "payoffs_use_numpy": (
        # np.log works on concrete arrays (the first check passes) but not on
        # JAX tracers: TracerArrayConversionError while compiling.
        _payoff_model('import numpy as np\nreturn {"alder": np.log(1.0 + a * a) - a * b, "birch": -b * b + a * b}'),
        lambda p: [str(p)],
    ),
    "payoffs_branch_on_action": (
        # A Python `if` on an action: TracerBoolConversionError while compiling.
        _payoff_model('if a > 0:\n    return {"alder": -a * a, "birch": -b * b}\n'
                      'return {"alder": -2 * a * a, "birch": -b * b}'),
        lambda p: [str(p)],
    ),
    "payoff_is_a_string": (
        # np.shape("high") == () passes the scalar check; float("high") fails later.
        _payoff_model('return {"alder": "high", "birch": -b * b}'),
        lambda p: [str(p), "payoffs['alder']"],
    ),
    "foc_wrong_keys": (
        textwrap.dedent("""
            from equipoise import Game


            def payoffs(x, theta):
                a, b = x["alder"][0], x["birch"][0]
                return {"alder": -a * a + a * b, "birch": -b * b}


            def foc(x, theta):
                return {"alder": -2 * x["alder"] + x["birch"]}


            game = Game({"alder": 1, "birch": 1}, payoffs, foc=foc)
        """),
        lambda p: [str(p), "foc"],
    ),
    "search_box_raises": (
        textwrap.dedent("""
            from equipoise import Game


            def payoffs(x, theta):
                a, b = x["alder"][0], x["birch"][0]
                return {"alder": -a * a + a * b, "birch": -b * b}


            def box(theta):
                return {"alder": (0.0, theta["top"])}


            game = Game({"alder": 1, "birch": 1}, payoffs, search_box=box, params={"cap": 1.0})
        """),
        lambda p: [str(p), "search_box", "KeyError"],
    ),
}


@pytest.mark.parametrize("case", sorted(GAP_CASES))
def test_cli_bad_model_caught_late(tmp_path, capsys, case):
    source, needles = GAP_CASES[case]
    path = write_model(tmp_path, f"{case}.py", source)
    rc, out, err = run(capsys, ["solve", str(path)])
    assert_one_line_error(rc, out, err, *needles(path))


def test_cli_negative_seed(capsys):
    rc, out, err = run(capsys, ["solve", str(FERRIES), "--seed", "-1"])
    assert_one_line_error(rc, out, err, "--seed")

"""Following equilibria along a parameter path: folds, bounds and speed verdicts, against closed forms."""

import json

import numpy as np
import pytest

import equipoise
from equipoise import Game, InputError, trace


def _coordination():
    # u_i = s x_i + x_i x_j - x_i^4 / 12: symmetric equilibria solve s + x - x^3 / 3 = 0, so
    # s = x^3 / 3 - x, whose turning points (ds/dx = x^2 - 1 = 0) are x = -1, s = 2/3 and
    # x = 1, s = -2/3 (elementary calculus).
    def payoffs(x, th):
        a, b = x["a"][0], x["b"][0]
        return {"a": th["s"] * a + a * b - a ** 4 / 12, "b": th["s"] * b + a * b - b ** 4 / 12}

    return Game({"a": 1, "b": 1}, payoffs, params={"s": -1.0}, search_box={"a": (-3.0, 3.0), "b": (-3.0, 3.0)})


def test_branch_passes_both_folds_where_the_closed_form_puts_them():
    game = _coordination()
    sol = equipoise.solve(game, {"s": -1.0}, stability=False)
    assert len(sol.equilibria) == 1
    br = trace(game, "s", -1.0, 1.0, sol.equilibria[0].x, stability=False)
    assert br.status == "reached_end"
    folds = [e for e in br.events if e.kind == "fold"]
    assert [round(e.param, 7) for e in folds] == [round(2 / 3, 7), round(-2 / 3, 7)]
    np.testing.assert_allclose(folds[0].x, [-1.0, -1.0], atol=1e-4)
    np.testing.assert_allclose(folds[1].x, [1.0, 1.0], atol=1e-4)
    # End point: the only equilibrium at s = 1 is the large root of x^3/3 - x - 1 = 0 (numpy roots).
    root = max(r.real for r in np.roots([1 / 3, 0.0, -1.0, -1.0]) if abs(r.imag) < 1e-12)
    np.testing.assert_allclose(br.points[-1].x, [root, root], atol=1e-9)
    end = equipoise.solve(game, {"s": 1.0}, stability=False)
    np.testing.assert_allclose(br.points[-1].x, end.equilibria[-1].x, atol=1e-8)


def test_cournot_output_reaches_zero_at_the_closed_form_cost():
    # Linear Cournot duopoly (common practice): q_1 = (a - 2 c_1 + c_2) / (3 b), zero at
    # c_1 = (a + c_2) / 2 = 55 for a = 100, c_2 = 10; beyond it firm 2 is a monopolist, q_2 = 45.
    game = equipoise.cournot(a=100.0, b=1.0, costs=[10.0, 10.0])
    sol = equipoise.solve(game, stability=False)
    br = trace(game, "c", 10.0, 80.0, sol.equilibria[0].x, index=0, stability=False)
    assert br.status == "reached_end"
    (ev,) = [e for e in br.events if e.kind == "bound"]
    assert abs(ev.param - 55.0) < 1e-6
    assert ev.detail["coordinate"] == "firm1" and ev.detail["action"] == "reaches"
    np.testing.assert_allclose(br.points[-1].x, [0.0, 45.0], atol=1e-9)
    end = equipoise.solve(game, {"c": [80.0, 10.0]}, stability=False)
    np.testing.assert_allclose(br.points[-1].x, end.equilibria[0].x, atol=1e-8)


def _speed_game():
    # Quadratic game with Jacobian J(s) = [[-1, .5, 1.9 s], [.5, -1, -.9 s], [.3 s, -1.8 s, -1]]:
    # player "p" has two actions, player "r" one.
    def payoffs(x, th):
        (p1, p2), (r,) = x["p"], x["r"]
        s = th["s"]
        up = -p1 ** 2 / 2 - p2 ** 2 / 2 + 0.5 * p1 * p2 + s * (1.9 * p1 - 0.9 * p2) * r + p1
        ur = -r ** 2 / 2 + s * (0.3 * p1 - 1.8 * p2) * r + r
        return {"p": up, "r": ur}

    return Game({"p": 2, "r": 1}, payoffs, params={"s": 0.0}, search_box={"p": (-5.0, 5.0), "r": (-5.0, 5.0)})


def _jacobian(s):
    return np.array([[-1, 0.5, 1.9 * s], [0.5, -1, -0.9 * s], [0.3 * s, -1.8 * s, -1]])


def test_speed_verdict_event_matches_an_eigenvalue_scan():
    game = _speed_game()
    sol = equipoise.solve(game, {"s": 0.0}, starts=4, stability=False)
    br = trace(game, "s", 0.0, 1.0, sol.equilibria[0].x)
    assert br.status == "reached_end"
    assert br.points[0].stability.player_speeds.verdict == "robust"
    assert br.points[-1].stability.player_speeds.verdict == "fragile"
    events = [e for e in br.events if e.kind == "speed_verdict"
              and e.detail["before"]["player_speeds"] != e.detail["after"]["player_speeds"]]
    assert events
    s_event = events[0].param
    # Independent check: eigenvalues of diag(1, 1, k) J(s) over a fine grid of s and k.
    ks = np.exp(np.linspace(-10, 10, 801))
    grid = np.linspace(0.0, 1.0, 1001)
    K = np.stack([np.diag([1.0, 1.0, k]) for k in ks])
    unstable = [np.max(np.linalg.eigvals(K @ _jacobian(s)).real) > 0 for s in grid]
    first = grid[int(np.argmax(unstable))]
    assert abs(s_event - first) <= 2e-3


def test_bad_parameter_choices_are_input_errors():
    game = equipoise.cournot(a=100.0, b=1.0, costs=[10.0, 10.0])
    x = equipoise.solve(game, stability=False).equilibria[0].x
    with pytest.raises(InputError, match="not a parameter"):
        trace(game, "zeta", 0.0, 1.0, x)
    with pytest.raises(InputError, match="give an entry"):
        trace(game, "c", 0.0, 1.0, x)
    with pytest.raises(InputError, match="expected an index"):
        trace(game, "c", 0.0, 1.0, x, index=5)
    with pytest.raises(InputError, match="not an equilibrium"):
        trace(game, "c", 10.0, 20.0, x + 5.0, index=0)


def test_trace_command_json_contract(capsys):
    # Saltmere ferries (invented): linear Cournot, a = 120, b = 1.5, costs (c1, 24, 45). Common
    # practice: q_1 = (a - 4 c_1 + sum c) / (4 b) = 0 at c_1 = (120 + 69) / 3 = 63.
    from equipoise.cli import main

    code = main(["trace", "models/cournot_saltmere_ferries.py", "--param", "c[0]", "--from", "10",
                 "--to", "90", "--json"])
    assert code == 0
    out = json.loads(capsys.readouterr().out)
    (branch,) = out["branches"]
    assert branch["status"] == "reached_end"
    assert {"param", "actions", "stability"} <= set(branch["points"][0])
    assert set(branch["points"][0]["stability"]) >= {"equal_speeds", "player_speeds", "coordinate_speeds"}
    (ev,) = branch["events"]
    assert ev["kind"] == "bound" and abs(ev["param"] - 63.0) < 1e-6
    assert ev["actions"]["bluewake"] == [pytest.approx(0.0, abs=1e-9)]
    assert "Caution" in out["caution"]


@pytest.mark.parametrize("argv, message", [
    (["--param", "c[", "--from", "1", "--to", "2"], "expected NAME or NAME[INDEX]"),
    (["--param", "zeta", "--from", "1", "--to", "2"], "not a parameter"),
    (["--param", "c", "--from", "1", "--to", "2"], "give an entry"),
    (["--param", "c[7]", "--from", "1", "--to", "2"], "expected an index"),
    (["--param", "c[0]", "--from", "10", "--to", "20", "--equilibrium", "4"], "expected a number from 1 to 1"),
])
def test_trace_command_bad_input_is_one_line(capsys, argv, message):
    from equipoise.cli import main

    assert main(["trace", "models/cournot_saltmere_ferries.py", *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1


def test_hopf_event_where_the_complex_pair_crosses():
    # u_1 = s x_1^2 / 2 + x_1 x_2 + x_1, u_2 = s x_2^2 / 2 - x_1 x_2 + x_2: J = [[s, 1], [-1, s]] has
    # eigenvalues s +- i (elementary), so the pair crosses the imaginary axis at s = 0.
    def payoffs(x, th):
        a, b = x["a"][0], x["b"][0]
        return {"a": th["s"] * a * a / 2 + a * b + a, "b": th["s"] * b * b / 2 - a * b + b}

    game = Game({"a": 1, "b": 1}, payoffs, params={"s": -1.0}, search_box={"a": (-3.0, 3.0), "b": (-3.0, 3.0)})
    x0 = equipoise.solve(game, starts=2, stability=False).equilibria[0].x
    br = trace(game, "s", -1.0, 1.0, x0, stability=False)
    assert br.status == "reached_end"
    (ev,) = [e for e in br.events if e.kind == "hopf"]
    assert abs(ev.param) < 1e-8
    # The equilibrium solves s a + b + 1 = 0, s b - a + 1 = 0: at s = 0, a = 1, b = -1.
    np.testing.assert_allclose(ev.x, [1.0, -1.0], atol=1e-7)
    assert not [e for e in br.events if e.kind in ("fold", "real_crossing")]


def test_held_action_leaves_its_bound_when_the_cost_falls_back():
    # The same closed form traced backwards: firm 1, shut down at c_1 = 80, re-enters at c_1 = 55
    # (q_1 = (a - 2 c_1 + c_2) / (3 b) turns positive), and ends at the symmetric q = 30 at c_1 = 10.
    game = equipoise.cournot(a=100.0, b=1.0, costs=[80.0, 10.0])
    x = equipoise.solve(game, stability=False).equilibria[0].x
    np.testing.assert_allclose(x, [0.0, 45.0], atol=1e-9)
    br = trace(game, "c", 80.0, 10.0, x, index=0, stability=False)
    (ev,) = [e for e in br.events if e.kind == "bound"]
    assert ev.detail["action"] == "leaves" and abs(ev.param - 55.0) < 1e-6
    np.testing.assert_allclose(br.points[-1].x, [30.0, 30.0], atol=1e-9)


def test_straight_line_between_two_parameter_settings():
    # Both costs and the demand intercept move at once; the end point is the closed form at the
    # end setting (common practice): a = 120, c = (30, 15): q = (120 - 60 + 15, 120 - 30 + 30) / 3.
    from equipoise import trace_between

    game = equipoise.cournot(a=100.0, b=1.0, costs=[10.0, 10.0])
    x = equipoise.solve(game, stability=False).equilibria[0].x
    br = trace_between(game, x, {"a": 100.0, "c": [10.0, 10.0]}, {"a": 120.0, "c": [30.0, 15.0]},
                       stability=False)
    assert br.status == "reached_end" and br.points[-1].param == 1.0
    np.testing.assert_allclose(br.points[-1].x, [25.0, 40.0], atol=1e-9)


def test_real_crossing_at_the_pitchfork_of_the_trivial_branch():
    # u_i = -x_i^2 / 2 + s x_i x_j - x_i^4 / 4: x = 0 is an equilibrium for every s, with
    # J = [[-1, s], [s, -1]] and eigenvalues -1 +- s (elementary), so a real eigenvalue crosses
    # zero at s = 1 (a pitchfork: symmetric branches +-sqrt(s - 1) appear) without a turn.
    def payoffs(x, th):
        a, b = x["a"][0], x["b"][0]
        s = th["s"]
        return {"a": -a * a / 2 + s * a * b - a ** 4 / 4, "b": -b * b / 2 + s * a * b - b ** 4 / 4}

    game = Game({"a": 1, "b": 1}, payoffs, params={"s": 0.0}, search_box={"a": (-2.0, 2.0), "b": (-2.0, 2.0)})
    br = trace(game, "s", 0.0, 2.0, np.zeros(2), stability=False)
    assert br.status == "reached_end"
    (ev,) = [e for e in br.events if e.kind == "real_crossing"]
    assert abs(ev.param - 1.0) < 1e-7
    assert not [e for e in br.events if e.kind == "fold"]

"""Learning and adjustment dynamics against published results, and their outcome criteria."""

import functools
import json
import re

import numpy as np
import pytest

import equipoise
from equipoise import Game, InputError, Outcome
from equipoise.dynamics import basins, classify_path, simulate


@functools.cache
def cournot(n):
    return equipoise.cournot(a=100.0, b=2.0, costs=[10.0] * n)


@pytest.mark.parametrize("n, outcome", [(2, Outcome.converged), (3, Outcome.cycling), (4, Outcome.diverged)])
def test_cournot_best_responses_follow_theocharis(n, outcome):
    # Theocharis (1960), Review of Economic Studies 27(2): simultaneous best responses with linear
    # demand and constant costs have Jacobian -(1/2)(11' - I), spectral radius 1/2, 1, 3/2 for
    # n = 2, 3, 4: stable, neutral (an oscillation that neither grows nor decays), unstable.
    sim = simulate(cournot(n), rule="best_response", steps=120, perturb=1e-6)
    assert sim.outcome is outcome
    q_star = 90.0 / (2.0 * (n + 1))  # (a - c) / (b (n + 1)), Tirole (1988) ch. 5
    if n == 2:
        assert sim.equilibrium == 0
        np.testing.assert_allclose(sim.path[-1], [q_star] * 2, rtol=1e-12)
    if n == 3:
        # The deviation from equilibrium flips sign each step with unchanged size (eigenvalue -1).
        dev = sim.path - q_star
        mean_dev = dev.mean(axis=1)
        np.testing.assert_allclose(mean_dev[-1], mean_dev[-3], rtol=1e-6)
        assert mean_dev[-1] * mean_dev[-2] < 0
    if n == 4:
        assert sim.stats["growth"] > 1e3


def test_alternating_best_responses_settle_in_the_three_firm_market():
    # Sequential (Gauss-Seidel) best responses in linear Cournot converge where simultaneous ones
    # only oscillate (common practice: the sequential map of a symmetric negative definite system).
    sim = simulate(cournot(3), rule="alternating", steps=80, perturb=1e-3)
    assert sim.outcome is Outcome.converged and sim.equilibrium == 0


@pytest.mark.parametrize("rule", ["flow", "gradient", "momentum", "adam", "optimistic",
                                  {"firm1": "adam", "firm2": "gradient"}])
def test_every_rule_reaches_the_duopoly_equilibrium(rule):
    # Linear Cournot's game Jacobian -b (I + 11') is symmetric negative definite, so gradient play
    # converges for every positive speeds and small enough steps (common practice).
    sim = simulate(cournot(2), rule=rule, steps=3000, perturb=1e-2, speeds=[1.0, 0.3])
    assert sim.outcome is Outcome.converged and sim.equilibrium == 0
    np.testing.assert_allclose(sim.path[-1], [15.0, 15.0], atol=1e-7)
    assert sim.converged_at is not None and sim.converged_at < sim.times[-1]


@pytest.fixture(scope="module")
def quillon():
    return equipoise.load_game("models/cycle_three_districts.py")


def test_fragile_certificate_speeds_make_a_tiny_perturbation_diverge(quillon):
    # J = -[[1, k, 0], [0, 1, k], [k, 0, d3]] with k = 4.5, d3 = 9: stable at equal speeds but not
    # D-stable (k^3 > 8 d3; Cain 1976 (memory), see REFERENCES); the reported destabilising speeds,
    # used in the flow from a 1e-6 perturbation, must drive the state away; equal speeds bring it back.
    params = {"k": 4.5, "d": [1.0, 1.0, 9.0]}
    eq = equipoise.solve(quillon, params, starts=2).equilibria[0]
    assert eq.stability.equal_speeds["verdict"] == "stable"
    assert eq.stability.coordinate_speeds.verdict == "fragile"
    speeds = eq.stability.coordinate_speeds.certificate["speeds"]
    bad = simulate(quillon, params, speeds=speeds, steps=6000, perturb=1e-6)
    assert bad.outcome is Outcome.diverged and bad.stats["growth"] >= 1e3
    good = simulate(quillon, params, steps=6000, perturb=1e-6)
    assert good.outcome is Outcome.converged and good.equilibrium == 0


def test_robust_equilibrium_converges_at_uneven_speeds(quillon):
    # k = 1, d3 = 9: k^3 <= 8 d3, so D-stable (Cain 1976 (memory)): any positive speeds converge.
    params = {"k": 1.0, "d": [1.0, 1.0, 9.0]}
    eq = equipoise.solve(quillon, params, starts=2).equilibria[0]
    assert eq.stability.coordinate_speeds.verdict == "robust"
    for speeds in ([1.0, 1.0, 0.1], [0.2, 1.0, 1.0], [1.0, 0.1, 0.5]):
        sim = simulate(quillon, params, speeds=speeds, steps=6000, perturb=1e-3)
        assert sim.outcome is Outcome.converged, speeds


@pytest.fixture(scope="module")
def minmax():
    # f(x, y) = -x^2 + 2 x y - y^2 / 2, x minimises f, y maximises it.
    def payoffs(a, theta):
        x, y = a["x"][0], a["y"][0]
        f = -x * x + 2 * x * y - 0.5 * y * y
        return {"x": -f, "y": f}

    return Game({"x": 1, "y": 1}, payoffs, search_box={"x": (-1.0, 1.0), "y": (-1.0, 1.0)})


def test_minmax_gradient_play_follows_the_reported_stable_speed_ratios(minmax):
    # Fiez & Ratliff (2021), ICLR (memory, as in REFERENCES): with the maximiser's rate tau times the
    # minimiser's, gradient descent-ascent on this f is stable exactly for tau > 2 (tau* = 2,
    # eigenvalues +-2i at tau = 2): J K has trace 2 - tau and determinant 2 tau.
    eq = equipoise.solve(minmax, starts=4).equilibria[0]
    np.testing.assert_allclose(eq.x, [0.0, 0.0], atol=1e-12)
    st = eq.stability
    assert st.equal_speeds["verdict"] == "unstable"
    (lo, hi), = st.player_speeds.stable_ratios
    assert lo == pytest.approx(2.0, rel=1e-8) and hi is None
    at_equal = simulate(minmax, start=[1e-6, 1e-6], equilibria=[eq.x], steps=4000)
    assert at_equal.outcome is Outcome.diverged
    inside = simulate(minmax, start=[0.3, -0.2], equilibria=[eq.x], speeds=[1.0, 4.0], steps=4000)
    assert inside.outcome is Outcome.converged and inside.equilibrium == 0
    edge = simulate(minmax, start=[1e-3, 0.0], equilibria=[eq.x], speeds=[1.0, 2.0], steps=4000)
    assert edge.outcome is Outcome.cycling  # tau = 2: a centre, orbits neither grow nor shrink


def test_basins_share_out_among_the_stable_equilibria():
    # Triangle network at delta = 1.5: seven equilibria (Bramoulle, Kranton & D'Amours 2014). A
    # Hurwitz equilibrium attracts an open set and an unstable one a set of measure zero (common
    # practice), so the starts split among the stable equilibria only.
    game = equipoise.load_game("models/network_effort_triangle.py")
    sol = equipoise.solve(game, starts=16, all_equilibria=True)
    assert len(sol.nash) == 7
    b = basins(game, rule="flow", starts=64, steps=1500, equilibria=[e.x for e in sol.nash])
    stable = np.array([e.stability.equal_speeds["verdict"] == "stable" for e in sol.nash])
    shares = np.array(b.shares)
    assert shares[~stable].sum() == 0.0
    assert shares[stable].sum() == pytest.approx(1.0) and (shares[stable] > 0).sum() >= 2
    assert b.counts == {"converged": 64}


def test_classify_path_criteria():
    eq = [np.array([1.0, 1.0])]
    ref = eq[0]
    t = np.arange(400)[:, None]
    settle = 1.0 + 0.5 ** t * np.array([0.1, -0.1])
    assert classify_path(settle, eq, ref, 2.0)[:2] == (Outcome.converged, 0)
    ring = 1.0 + 1e-3 * np.hstack([np.cos(0.3 * t), np.sin(0.3 * t)])
    assert classify_path(ring, eq, ref, 2.0)[0] is Outcome.cycling
    grow = 1.0 + 1e-6 * 1.05 ** t * np.array([1.0, 0.0])
    assert classify_path(grow, eq, ref, 2.0)[0] is Outcome.diverged
    blow = np.vstack([settle[:10], [[np.inf, 0.0]]])
    assert classify_path(blow, eq, ref, 2.0)[0] is Outcome.diverged
    slow = 1.0 + 1e-2 * 0.999 ** t * np.array([1.0, 1.0])  # still settling at the horizon
    assert classify_path(slow, eq, ref, 2.0)[0] is Outcome.undecided


@pytest.mark.parametrize("kwargs, message", [
    ({"rule": "hover"}, "rule for firm1: 'hover'; expected one of"),
    ({"rule": {"firm1": "flow", "firm2": "adam"}}, "players may mix only the optimiser rules"),
    ({"speeds": [1.0, 2.0, 3.0]}, "speeds: expected 2 numbers"),
    ({"speeds": [1.0, -2.0]}, "speeds: expected positive finite numbers"),
    ({"steps": 0}, "steps: expected a positive whole number"),
    ({"start": [1.0]}, "start: expected 2 finite numbers"),
    ({"equilibrium": 3}, "equilibrium: 1 equilibria were found; expected an index from 0 to 0"),
    ({"perturb": -1.0}, "perturb: expected a non-negative number"),
    ({"dt": 0.0}, "dt: expected a positive number"),
    ({"lr": 0.1}, "lr: only the optimiser rules (gradient, momentum, adam, optimistic) take a learning rate; "
                  "the rule here is flow (give dt for its time step)"),
    ({"rule": "adam", "dt": 0.1}, "dt: only the flow rule takes a time step; the rule here is adam (give lr instead)"),
    ({"rule": "best_response", "lr": 0.1}, "lr: only the optimiser rules"),
    ({"start": [-1.0, 5.0]}, "start: firm1 = -1 lies outside its bounds [0, inf]; expected a start inside them"),
])
def test_bad_arguments_are_one_line(kwargs, message):
    with pytest.raises(InputError, match=re.escape(message)):
        simulate(cournot(2), **kwargs)


def test_simulate_command_text_json_plot_and_bad_input(tmp_path, capsys):
    from matplotlib.image import imread

    from equipoise.cli import main

    model = "models/cournot_saltmere_ferries.py"
    picture = tmp_path / "run.png"
    assert main(["simulate", model, "--rule", "best_response", "--steps", "60", "--plot", str(picture),
                 "--size", "640x480"]) == 0
    out = capsys.readouterr().out
    assert "outcome: cycling" in out and "qualified expert review" in out  # three firms: Theocharis (1960)
    assert imread(picture).shape[:2] == (480, 640)
    assert main(["simulate", model, "--rule", "alternating", "--steps", "60", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert (data["outcome"], data["equilibrium"]) == ("converged", 1)
    # Tirole (1988) ch. 5: q_i = (a - (n + 1) c_i + sum c) / (b (n + 1)) at a = 120, b = 1.5, c = (18, 24, 45).
    q = (np.array([120.0 - 4 * 18 + 87, 120.0 - 4 * 24 + 87, 120.0 - 4 * 45 + 87]) / (4 * 1.5))
    np.testing.assert_allclose(list(data["final"].values()), q, rtol=1e-6)
    for argv, message in ((["--rule", "hover"], "rule for bluewake: 'hover'"),
                          (["--speeds", "[1, 2]"], "speeds: expected 3 numbers"),
                          (["--speeds", "fast"], "--speeds 'fast': expected a JSON list"),
                          (["--rule", "nobody=adam"], "--rule 'nobody=adam': expected RULE, or PLAYER=RULE"),
                          (["--steps", "0"], "--steps: expected a positive whole number")):
        assert main(["simulate", model, *argv]) == 2
        err = capsys.readouterr().err
        assert message in err and err.count("\n") == 1


def test_json_of_a_blown_up_run_is_strict_json(capsys):
    from equipoise.cli import main

    # The critic game with a = -2 is unstable at equal speeds (trace 2 - 1 > 0): unbounded actions
    # overflow to infinity within the horizon.
    assert main(["simulate", "models/minmax_loom_critic.py", "--set", "a=-2", "--set", "c=1", "--start", "[0.3,-0.2]",
                 "--dt", "5", "--steps", "200", "--json"]) == 0
    text = capsys.readouterr().out
    data = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON token {c}"))
    assert data["outcome"] == "diverged" and data["stats"]["blowup"] is True


def test_bad_plot_path_is_refused_before_the_run(capsys):
    from equipoise.cli import main

    assert main(["simulate", "models/cournot_saltmere_ferries.py", "--plot", "run.jpg"]) == 2
    err = capsys.readouterr().err
    assert "--plot 'run.jpg': expected a file name ending in .png" in err and err.count("\n") == 1

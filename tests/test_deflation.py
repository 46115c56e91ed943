"""Deflation: every equilibrium of games with several, against published closed forms."""

import json

import numpy as np
import pytest

import equipoise
from equipoise import Game, InputError
from equipoise import _report
from equipoise.cli import main


def _two_player_network(delta):
    # Bramoulle, Kranton & D'Amours (2014), "Strategic interaction and networks", AER 104(3):
    # u_i = x_i - x_i^2/2 - delta x_i x_j, x_i >= 0.
    def payoffs(x, theta):
        a, b = x["ann"][0], x["ben"][0]
        return {"ann": a - a * a / 2 - theta["delta"] * a * b, "ben": b - b * b / 2 - theta["delta"] * a * b}

    return Game({"ann": 1, "ben": 1}, payoffs, params={"delta": delta}, lower={"ann": 0.0, "ben": 0.0},
                search_box={"ann": (0.0, 2.0), "ben": (0.0, 2.0)})


@pytest.fixture(scope="module")
def triangle():
    return equipoise.load_game("models/network_effort_triangle.py")


@pytest.mark.parametrize("starts", [1])
def test_two_players_delta_2_exactly_the_published_three(starts):
    # Bramoulle, Kranton & D'Amours (2014): for two players and delta = 2 the equilibria are
    # exactly (1, 0), (0, 1) and (1/3, 1/3).
    game = _two_player_network(2.0)
    sol = equipoise.solve(game, starts=starts, all_equilibria=True, stability=False)
    got = sorted(tuple(np.round(e.x, 8)) for e in sol.equilibria)
    np.testing.assert_allclose(got, [(0.0, 1.0), (1 / 3, 1 / 3), (1.0, 0.0)], atol=1e-8)
    assert all(e.nash is not equipoise.Nash.not_nash for e in sol.equilibria)
    d = sol.stats["deflation"]
    assert d["exhausted"] and d["new_per_round"][-1] == 0
    plain = equipoise.solve(game, starts=starts, stability=False)
    assert len(plain.equilibria) < 3  # from so few starts, the multistart alone misses some


def test_complete_graph_on_three_has_seven(triangle):
    # Bramoulle, Kranton & D'Amours (2014), support enumeration (I + delta G_SS) x_S = 1 on the
    # complete graph with delta = 1.5: three singletons x_i = 1, three pairs 0.4 each (0.4 * 2.5 = 1,
    # outsider 1 - 1.5 * 0.8 < 0) and the full support 0.25 each (0.25 * 4 = 1): seven in all.
    sol = equipoise.solve(triangle, starts=2, all_equilibria=True, stability=False)
    got = sorted(tuple(np.round(e.x, 8)) for e in sol.equilibria)
    want = sorted([(1.0, 0, 0), (0, 1.0, 0), (0, 0, 1.0), (0.4, 0.4, 0), (0.4, 0, 0.4), (0, 0.4, 0.4),
                   (0.25, 0.25, 0.25)])
    np.testing.assert_allclose(got, want, atol=1e-8)


def test_unique_equilibrium_stays_unique(triangle):
    # Bramoulle, Kranton & D'Amours (2014): unique iff delta |lambda_min(G)| < 1; the complete
    # graph on three has lambda_min = -1, so delta = 0.3 gives one equilibrium, x_i = 1 / (1 + 2 delta).
    sol = equipoise.solve(triangle, {"delta": 0.3}, starts=2, all_equilibria=True, stability=False)
    assert len(sol.equilibria) == 1
    np.testing.assert_allclose(sol.equilibria[0].x, np.full(3, 1 / 1.6), atol=1e-9)
    assert sol.stats["deflation"]["exhausted"]


def test_bad_rounds_and_cli(capsys):
    game = _two_player_network(2.0)
    with pytest.raises(InputError, match="deflation_rounds: expected a positive whole number"):
        equipoise.solve(game, starts=2, all_equilibria=True, deflation_rounds=0)
    assert main(["solve", "models/network_effort_triangle.py", "--starts", "2", "--all", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert len(out["equilibria"]) == 7
    assert out["stats"]["deflation"]["exhausted"] is True
    text = _report.solution_table(equipoise.solve(game, starts=1, all_equilibria=True, stability=False),
                                  game, "two players")
    assert "deflation round(s)" in text and "the last round found nothing new" in text

"""Artificial homotopies reach the equilibria of the target game (closed forms)."""

import numpy as np
import pytest

import equipoise
from equipoise import Game, InputError, homotopy


@pytest.mark.parametrize("kind", ["interaction", "newton"])
def test_cournot_reached_from_the_decoupled_game(kind):
    # Linear Cournot (common practice): q_i = (a - (n + 1) c_i + sum c) / ((n + 1) b); for
    # a = 100, b = 2, c = (10, 20, 30): (15, 10, 5).
    game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0])
    br = homotopy(game, kind=kind)
    assert br.status == "reached_end"
    np.testing.assert_allclose(br.points[-1].x, [15.0, 10.0, 5.0], atol=1e-9)
    assert br.points[0].lam == 0.0 and br.points[-1].lam == 1.0


def test_interaction_homotopy_on_the_coordination_game():
    # u_i = s x_i + x_i x_j - x_i^4 / 12 at s = 1: the unique equilibrium is symmetric, the real root of
    # x^3 / 3 - x - 1 = 0 (numpy roots); at t = 0 each player solves s - x^3 / 3 = 0 alone.
    def payoffs(x, th):
        a, b = x["a"][0], x["b"][0]
        return {"a": th["s"] * a + a * b - a ** 4 / 12, "b": th["s"] * b + a * b - b ** 4 / 12}

    game = Game({"a": 1, "b": 1}, payoffs, params={"s": 1.0}, search_box={"a": (-3.0, 3.0), "b": (-3.0, 3.0)})
    br = homotopy(game, kind="interaction")
    assert br.status == "reached_end"
    root = max(r.real for r in np.roots([1 / 3, 0.0, -1.0, -1.0]) if abs(r.imag) < 1e-12)
    np.testing.assert_allclose(br.points[-1].x, [root, root], atol=1e-9)
    v = equipoise.verify(game, br.points[-1].x, game.theta())
    assert float(v.residual) < 1e-9


def test_bad_kind_and_anchor():
    game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0])
    with pytest.raises(InputError, match="kind: expected one of interaction, newton"):
        homotopy(game, kind="magic")
    with pytest.raises(InputError, match="x0: expected 2 stacked actions"):
        homotopy(game, x0=[1.0, 2.0, 3.0])

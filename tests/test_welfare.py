"""Welfare: logit consumer surplus and Willig's bound, against published results."""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

import equipoise
from equipoise import Game, InputError
from equipoise._welfare import welfare, willig_bound


def test_logit_consumer_surplus_satisfies_roys_identity():
    # Small & Rosen (1981), "Applied welfare economics with discrete choice models", Econometrica
    # 49(1): CS = (M / alpha) log(1 + sum exp(delta - alpha p)) + const, and dCS/dp_j = -M s_j.
    game = equipoise.logit_bertrand(delta=[1.0, 2.0, 0.5], alpha=0.8, costs=[1.0, 1.0, 1.0],
                                    owner=["a", "a", "b"], market_size=3.0)
    theta = game.theta()
    p = jnp.array([2.0, 3.0, 1.5])
    grad = jax.grad(lambda x: game.consumer_surplus(game.split(x), theta))(p)
    v = np.array([1.0, 2.0, 0.5]) - 0.8 * np.asarray(p)
    s = np.exp(v) / (1 + np.exp(v).sum())
    np.testing.assert_allclose(np.asarray(grad), -3.0 * s, atol=1e-12)


def test_welfare_parts_at_an_equilibrium():
    game = equipoise.logit_bertrand(delta=[1.0, 2.0], alpha=1.0, costs=[0.5, 0.5])
    eq = equipoise.solve(game, stability=False).equilibria[0]
    w = welfare(game, eq.x, game.theta())
    assert w["producer_surplus"] == pytest.approx(sum(eq.payoffs.values()), abs=1e-12)
    v = np.array([1.0, 2.0]) - eq.x
    assert w["consumer_surplus"] == pytest.approx(np.log1p(np.exp(v).sum()), abs=1e-12)
    assert w["total"] == pytest.approx(w["consumer_surplus"] + w["producer_surplus"], abs=1e-12)
    cournot = equipoise.cournot(a=10.0, b=1.0, costs=[1.0, 1.0])
    assert welfare(cournot, np.array([3.0, 3.0]), cournot.theta())["consumer_surplus"] is None


def test_willig_bound_contains_the_exact_compensating_variation():
    # REFERENCES.md: with a constant income elasticity eta the exact compensating variation is
    # C = M [1 - (1 - (1 - eta) A / M)^(1 / (1 - eta))] (derivation); Willig (1976), "Consumer's
    # surplus without apology", AER 66(4): the relative gap lies between eta_L |A| / 2M and
    # eta_U |A| / 2M. Instance: eta = 1.2, A / M = 0.02 (about 1.2 %).
    M, A, eta = 1000.0, 20.0, 1.2
    C = M * (1 - (1 - (1 - eta) * A / M) ** (1 / (1 - eta)))
    gap = abs(C - A) / abs(A)
    b = willig_bound(A, M, (1.1, 1.3))
    assert b["low"] <= gap <= b["bound"] and b["conditions_hold"] and b["warning"] is None
    single = willig_bound(A, M, eta)
    assert single["bound"] == pytest.approx(0.012, abs=1e-12)
    assert abs(gap - single["bound"]) / single["bound"] < 0.02
    bad = willig_bound(500.0, 1000.0, 1.0)
    assert not bad["conditions_hold"] and "conditions fail" in bad["warning"]


def test_model_file_consumer_surplus_must_be_a_function(tmp_path):
    bad = tmp_path / "bad_cs.py"
    bad.write_text("from equipoise import cournot\ngame = cournot()\nconsumer_surplus = 3\n")
    with pytest.raises(InputError, match="`consumer_surplus` is a int; expected a function"):
        equipoise.load_game(str(bad))
    with pytest.raises(InputError, match="consumer_surplus: expected a function"):
        Game({"a": 1}, lambda x, th: {"a": x["a"][0]}, consumer_surplus=5)

"""Counterfactuals by continuation, and mergers in the logit family."""

import numpy as np
import pytest

import equipoise
from equipoise import InputError, counterfactual
from equipoise.families import logit_products, merged_ownership, ownership_matrix

DELTA, ALPHA, COSTS = [1.0, 2.0, 1.5], 1.0, [1.0, 1.0, 1.0]


def _shares(p):
    v = np.asarray(DELTA) - ALPHA * np.asarray(p)
    return np.exp(v) / (1 + np.exp(v).sum())


def test_product_level_game_matches_the_firm_level_game():
    # Same first-order conditions (derived in logit_products), so the same equilibrium prices.
    owner = ["ash", "ash", "birch"]
    firm_level = equipoise.logit_bertrand(DELTA, ALPHA, COSTS, owner=owner)
    product_level = logit_products(DELTA, ALPHA, COSTS, owner=owner)
    a = equipoise.solve(firm_level, stability=False).equilibria[0].x
    b = equipoise.solve(product_level, stability=False).equilibria[0].x
    np.testing.assert_allclose(a, b, atol=1e-9)


def test_merger_raises_merging_prices_lowers_surplus_and_satisfies_the_markup_equation():
    # Common practice (logit multi-product pricing): a firm's products share the markup
    # p_j - c_j = 1 / (alpha (1 - sum_{k in f} s_k)); a merger of substitutes raises both merging
    # firms' prices and lowers consumer surplus.
    owner = ["ash", "birch", "cedar"]
    game = logit_products(DELTA, ALPHA, COSTS, owner=owner)
    post = merged_ownership(owner, ["ash", "birch"])
    r = counterfactual(game, None, {"ownership": post.tolist()}, income=50.0, elasticity=(0.5, 1.5))
    assert r.path.status == "reached_end"
    p0, p1 = r.baseline["x"], r.counterfactual["x"]
    assert p1[0] > p0[0] and p1[1] > p0[1]
    assert r.counterfactual["consumer_surplus"] < r.baseline["consumer_surplus"]
    s = _shares(p1)
    np.testing.assert_allclose(p1[:2] - 1.0, 1 / (ALPHA * (1 - s[0] - s[1])), atol=1e-9)
    np.testing.assert_allclose(p1[2] - 1.0, 1 / (ALPHA * (1 - s[2])), atol=1e-9)
    assert r.willig is not None and r.willig["conditions_hold"]
    change = r.counterfactual["consumer_surplus"] - r.baseline["consumer_surplus"]
    assert r.willig["bound"] == pytest.approx(1.5 * abs(change) / 100.0, rel=1e-12)


def test_cost_counterfactual_matches_a_fresh_solve_and_bad_input():
    game = equipoise.logit_bertrand(DELTA, ALPHA, COSTS)
    r = counterfactual(game, None, {"c": [1.5, 1.0, 1.0]})
    fresh = equipoise.solve(game, {"c": [1.5, 1.0, 1.0]}, stability=False).equilibria[0].x
    np.testing.assert_allclose(r.counterfactual["x"], fresh, atol=1e-8)
    assert r.willig is None
    with pytest.raises(InputError, match="give both or neither"):
        counterfactual(game, None, {"c": [1.5, 1.0, 1.0]}, income=10.0)
    with pytest.raises(InputError, match="give at least one"):
        counterfactual(game, None, {})
    with pytest.raises(InputError, match="merging: oak own no product"):
        merged_ownership(["ash", "birch"], ["oak"])
    np.testing.assert_allclose(ownership_matrix(["a", "b", "a"]), [[1, 0, 1], [0, 1, 0], [1, 0, 1]])


def test_counterfactual_command_json_contract(capsys):
    # Valemont (invented): merger of the two single-loaf bakeries; producer surplus counts each
    # loaf's profit once (sum over products of M (p - c) s, common practice).
    import json

    from equipoise.cli import main

    argv = ["counterfactual", "models/logit_valemont_products.py",
            "--to", "ownership=[[1,1,0,0],[1,1,0,0],[0,0,1,1],[0,0,1,1]]",
            "--income", "20000", "--income-elasticity", "[0.5, 1.5]", "--json"]
    assert main(argv) == 0
    out = json.loads(capsys.readouterr().out)
    for end in ("baseline", "counterfactual"):
        assert {"actions", "payoffs", "consumer_surplus", "producer_surplus", "stability"} <= set(out[end])
    game = equipoise.load_game("models/logit_valemont_products.py")
    th = game.theta()
    p = np.concatenate([out["counterfactual"]["actions"][n] for n in game.players])
    v = np.asarray(th["delta"]) - float(th["alpha"]) * p
    s = np.exp(v) / (1 + np.exp(v).sum())
    ps = float(np.sum(1000.0 * (p - np.asarray(th["c"])) * s))
    assert out["counterfactual"]["producer_surplus"] == pytest.approx(ps, rel=1e-12)
    assert out["counterfactual"]["consumer_surplus"] < out["baseline"]["consumer_surplus"]
    assert out["path"]["status"] == "reached_end" and 0 < out["willig_bound"] < 0.05
    assert main(["counterfactual", "models/logit_valemont_products.py", "--to", "ownership=[[1]]"]) == 2
    err = capsys.readouterr().err
    assert "ownership" in err and err.count("\n") == 1
    assert main(["counterfactual", "models/logit_valemont_products.py", "--to", "c=[1,1,1,1]",
                 "--income", "10", "--income-elasticity", "high"]) == 2
    assert "expected a number or [low, high]" in capsys.readouterr().err

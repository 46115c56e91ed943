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


def test_counterfactual_says_when_the_equilibrium_disappears():
    # u = s x - x^3 / 3 with x in [-3, 3]: F = s - x^2, equilibria x = +-sqrt(s) (elementary). From
    # s = 1 towards s = -1 the branch folds at s = 0 and turns back: no counterfactual equilibrium
    # on the path. With the bounds, the only KKT point at s = -1 is the corner x = -3 (F < 0 there).
    from equipoise import Game, _report

    def payoffs(x, th):
        return {"solo": th["s"] * x["solo"][0] - x["solo"][0] ** 3 / 3}

    game = Game({"solo": 1}, payoffs, params={"s": 1.0}, lower={"solo": -3.0}, upper={"solo": 3.0})
    # Baseline KKT points in solve order: the corner -3, the minimum -1 and the maximum 1.
    r = counterfactual(game, None, {"s": -1.0}, equilibrium=2, stability=False)
    np.testing.assert_allclose(r.baseline["x"], [1.0], atol=1e-9)
    assert r.counterfactual is None and r.path.status == "returned"
    assert [e.kind for e in r.path.events if e.kind == "fold"] == ["fold"]
    fold = [e for e in r.path.events if e.kind == "fold"][0]
    assert abs(fold.param - 0.5) < 1e-7  # path position of s = 0 on the line from 1 to -1
    np.testing.assert_allclose([a["x"][0] for a in r.alternatives], [-3.0], atol=1e-9)
    assert "does not continue" in _report.counterfactual_table(r, game, "solo")

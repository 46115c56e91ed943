"""Comparative statics and pass-through against published closed forms and finite differences."""

import jax.numpy as jnp
import numpy as np
import pytest

import equipoise
from equipoise import InputError
from equipoise._newton import newton_solve
from equipoise._statics import derivatives, statics


def _price(x, theta):
    return theta["a"] - theta["b"] * jnp.sum(x)


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_cournot_pass_through(n):
    # Weyl & Fabinger (2013), "Pass-through as an economic tool", JPE 121(3): with linear demand,
    # pass-through of a common cost shock is n / (n + 1) (1/2 for a monopolist) and of one firm's
    # own cost 1 / (n + 1). Dixit (1986), "Comparative statics for oligopoly", IER 27(1): at a
    # stable equilibrium own output and total output fall with own cost; linear closed forms
    # dq_i/dc_i = -n / ((n + 1) b), dQ/dc_i = -1 / ((n + 1) b).
    b = 2.0
    game = equipoise.cournot(a=100.0, b=b, costs=[10.0] * n)
    (eq, D, flags), = statics(game, wrt="c", stability=n == 2)
    dP = np.asarray(derivatives(game, eq.x, game.theta(), "c", outcome=_price))
    np.testing.assert_allclose(dP.sum(), n / (n + 1), atol=1e-12)
    np.testing.assert_allclose(dP[0, 0], 1 / (n + 1), atol=1e-12)
    np.testing.assert_allclose(D[0, 0], -n / ((n + 1) * b), atol=1e-12)
    np.testing.assert_allclose(D[:, 0].sum(), -1 / ((n + 1) * b), atol=1e-12)
    if n == 2:
        assert flags["stable"] is True and flags["flag"] is None


def test_symmetric_linear_bertrand_pass_through():
    # Weyl & Fabinger (2013): symmetric linear differentiated Bertrand, common cost shock:
    # pass-through b / (2b - (n - 1) d).
    b, d, n = 2.0, 0.5, 3
    game = equipoise.linear_bertrand(a=10.0, b=b, d=d, costs=[1.0] * n)
    (eq, D, _), = statics(game, wrt="c", stability=False)
    np.testing.assert_allclose(D.sum(axis=1), np.full(n, b / (2 * b - (n - 1) * d)), atol=1e-12)


def test_logit_monopoly_pass_through_is_one_minus_share():
    # Common practice (single-product logit monopoly): p = c + 1 / (alpha (1 - s)), and
    # dp/dc = 1 - s.
    game = equipoise.logit_bertrand(delta=[2.0], alpha=0.5, costs=[3.0])
    (eq, D, _), = statics(game, wrt="c", stability=False)
    v = 2.0 - 0.5 * eq.x[0]
    s = np.exp(v) / (1 + np.exp(v))
    np.testing.assert_allclose(D[0, 0], 1 - s, atol=1e-10)


def test_implicit_derivatives_match_finite_differences_of_resolved_equilibria():
    # Central finite differences (common practice) of equilibria re-solved by Newton from the
    # baseline, for a two-firm, three-product logit game and every cost entry.
    game = equipoise.logit_bertrand(delta=[1.0, 2.0, 1.5], alpha=1.0, costs=[1.0, 1.2, 0.8],
                                    owner=["north", "north", "south"])
    (eq, D, _), = statics(game, wrt="c", stability=False)
    h = 1e-5
    base = game.theta()
    for k in range(3):
        up, down = (np.asarray(base["c"]).copy() for _ in range(2))
        up[k] += h
        down[k] -= h
        xu = newton_solve(game, eq.x, game.theta({"c": up.tolist()})).x
        xd = newton_solve(game, eq.x, game.theta({"c": down.tolist()})).x
        np.testing.assert_allclose(D[:, k], (np.asarray(xu) - np.asarray(xd)) / (2 * h), atol=1e-7)


def test_held_coordinates_do_not_move_and_bad_wrt():
    # A firm priced out (q = 0 at the bound) keeps zero output under a small change of its cost.
    game = equipoise.cournot(a=100.0, b=1.0, costs=[80.0, 10.0])
    (eq, D, _), = statics(game, wrt="c", stability=False)
    np.testing.assert_allclose(D[0], 0.0, atol=0)
    np.testing.assert_allclose(D[1], [0.0, -0.5], atol=1e-12)  # monopoly q = (a - c) / (2 b)
    with pytest.raises(InputError, match="--wrt zeta: not a parameter"):
        statics(game, wrt="zeta")


def test_statics_command_json_contract_and_errors(capsys):
    # Teahouses (invented): symmetric linear Bertrand; the row sums are the common-shock
    # pass-through b / (2b - (n - 1) d) (Weyl & Fabinger 2013).
    import json

    from equipoise.cli import main

    assert main(["statics", "models/bertrand_linear_teahouses.py", "--wrt", "c", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    (eq,) = out["equilibria"]
    D = np.asarray(eq["derivatives"]["c"])
    game = equipoise.load_game("models/bertrand_linear_teahouses.py")
    th = game.theta()
    b, d, n = float(th["b"]), float(th["d"]), game.n
    np.testing.assert_allclose(D.sum(axis=1), b / (2 * b - (n - 1) * d), atol=1e-12)
    assert D.shape == (n, n) and eq["trust"]["stable"] is True
    assert {"equal_speeds", "hicksian"} <= set(eq["stability"])
    assert main(["statics", "models/bertrand_linear_teahouses.py", "--wrt", "zeta"]) == 2
    err = capsys.readouterr().err
    assert "--wrt zeta: not a parameter" in err and err.count("\n") == 1


def test_derivatives_under_jit_and_vmap_over_parameters():
    # Linear Cournot (common practice): dq_i/dc_i = -n / ((n + 1) b) whatever the cost level, so a
    # vmap over cost vectors of the jitted derivative gives the same matrix at every point.
    import jax

    game = equipoise.cournot(a=100.0, b=1.0, costs=[10.0, 20.0])
    base = game.theta()
    costs = jnp.array([[10.0, 20.0], [12.0, 18.0], [15.0, 15.0]])
    xs = jnp.stack([jnp.array([(100 - 2 * c1 + c2) / 3, (100 - 2 * c2 + c1) / 3]) for c1, c2 in costs])
    run = jax.jit(jax.vmap(lambda x, c: derivatives(game, x, {**base, "c": c}, "c")))
    D = np.asarray(run(xs, costs))
    np.testing.assert_allclose(D, np.broadcast_to([[-2 / 3, 1 / 3], [1 / 3, -2 / 3]], (3, 2, 2)), atol=1e-12)

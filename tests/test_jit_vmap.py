"""newton_solve, verify and solve under jit and vmap: same answers, no retracing, float64."""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

import equipoise
from equipoise import Game, Nash, Status

# Incremented each time the payoffs are traced (called with abstract values);
# concrete calls, such as solve's eager check of the payoffs, do not count.
TRACES = [0]

A, B = 20.0, 1.0  # invented demand: P = 20 - Q


def duopoly_payoffs(x, theta):
    if isinstance(theta["c"], jax.core.Tracer) or isinstance(x["east"], jax.core.Tracer):
        TRACES[0] += 1
    q = jnp.concatenate([x["east"], x["west"]])
    price = theta["a"] - theta["b"] * jnp.sum(q)
    profit = (price - theta["c"]) * q
    return {"east": profit[0], "west": profit[1]}


def closed_form(c):
    """Linear Cournot duopoly, q_i = (a - 3 c_i + c_1 + c_2) / (3b) when both are
    active (Tirole 1988, The Theory of Industrial Organization, ch. 5); a firm with
    a negative value stays out and the other is a monopolist, q = (a - c) / (2b)."""
    c = np.asarray(c, dtype=float)
    q = (A - 3 * c + c.sum()) / (3 * B)
    if np.any(q < 0):
        q = np.where(q < 0, 0.0, (A - c) / (2 * B))
    return q


# Invented cost vectors; the last one drives "west" out of the market.
COSTS = np.array([[2.0, 4.0], [5.0, 5.0], [1.0, 7.5], [6.0, 3.0], [0.0, 0.5], [3.0, 15.0]])
COSTS_NEW = COSTS[::-1] + 0.25
X0 = np.array([1.0, 1.0])
BATCH_AXES = {"a": None, "b": None, "c": 0}


@pytest.fixture(scope="module")
def game():
    return Game({"east": 1, "west": 1}, duopoly_payoffs, params={"a": A, "b": B, "c": [1.0, 1.0]},
                lower={"east": 0.0, "west": 0.0},
                search_box=lambda th: {p: (0.0, th["a"] / th["b"]) for p in ("east", "west")},
                name="hand-written duopoly")


@pytest.fixture(scope="module")
def single_newton(game):
    return jax.jit(lambda x0, th: equipoise.newton_solve(game, x0, th))


@pytest.fixture(scope="module")
def batched_newton(game):
    return jax.jit(jax.vmap(lambda th: equipoise.newton_solve(game, X0, th), in_axes=(BATCH_AXES,)))


@pytest.fixture(scope="module")
def batched_verify(game):
    return jax.jit(jax.vmap(lambda x, th: equipoise.verify(game, x, th), in_axes=(0, BATCH_AXES)))


def batch_theta(game, costs):
    theta = game.theta()
    theta["c"] = jnp.asarray(costs)
    return theta


def test_jit_newton_solve_no_retrace(game, single_newton):
    first = single_newton(X0, game.theta({"c": COSTS[0]}))
    traced = TRACES[0]
    assert traced > 0
    second = single_newton(X0, game.theta({"c": COSTS[1]}))
    assert TRACES[0] == traced, "new parameter values must not retrace"
    assert single_newton._cache_size() == 1
    for res, c in ((first, COSTS[0]), (second, COSTS[1])):
        assert Status.from_code(res.status) is Status.success
        np.testing.assert_allclose(res.x, closed_form(c), rtol=1e-10, atol=1e-12)
        assert res.x.dtype == jnp.float64
        assert res.residual.dtype == jnp.float64


def test_vmap_newton_solve_matches_single_solves(game, single_newton, batched_newton):
    batch = batched_newton(batch_theta(game, COSTS))
    assert batch.x.shape == (len(COSTS), 2)
    assert batch.x.dtype == jnp.float64
    for k, c in enumerate(COSTS):
        one = single_newton(X0, game.theta({"c": c}))
        assert int(batch.status[k]) == Status.success.code
        np.testing.assert_allclose(batch.x[k], one.x, rtol=0, atol=1e-12)
        np.testing.assert_allclose(batch.x[k], closed_form(c), rtol=1e-10, atol=1e-12)
    assert float(batch.x[-1, 1]) == pytest.approx(0.0, abs=1e-12)  # the firm that stays out

    traced = TRACES[0]
    again = batched_newton(batch_theta(game, COSTS_NEW))
    assert TRACES[0] == traced, "a new batch of the same shape must not retrace"
    assert batched_newton._cache_size() == 1
    for k, c in enumerate(COSTS_NEW):
        np.testing.assert_allclose(again.x[k], closed_form(c), rtol=1e-10, atol=1e-12)


def test_vmap_verify_matches_solve(game, batched_newton, batched_verify):
    theta = batch_theta(game, COSTS)
    roots = batched_newton(theta)
    checks = batched_verify(roots.x, theta)
    assert checks.residual.dtype == jnp.float64
    assert checks.jacobian.dtype == jnp.float64
    assert checks.gains.dtype == jnp.float64
    for k, c in enumerate(COSTS):
        # solve runs its own jitted single verification per equilibrium.
        sol = equipoise.solve(game, {"c": c})
        # Unique: the Jacobian -b(I + 11') is negative definite (Rosen 1965,
        # "Existence and uniqueness of equilibrium points for concave n-person games").
        (eq,) = sol.equilibria
        assert Nash.from_code(checks.label[k]) is eq.nash is Nash.global_
        np.testing.assert_allclose(eq.x, roots.x[k], rtol=0, atol=1e-9)
        np.testing.assert_allclose(checks.jacobian[k], eq.jacobian, rtol=0, atol=1e-12)
        np.testing.assert_allclose(checks.own_curvature[k], eq.own_curvature, rtol=0, atol=1e-12)
        np.testing.assert_array_equal(checks.interior[k], eq.interior)
        assert float(checks.residual[k]) <= 1e-10
        # Game Jacobian of linear Cournot, derived from the payoffs: -b(I + 11').
        np.testing.assert_allclose(checks.jacobian[k], -B * np.array([[2.0, 1.0], [1.0, 2.0]]), atol=1e-12)

    traced = TRACES[0]
    theta_new = batch_theta(game, COSTS_NEW)
    batched_verify(batched_newton(theta_new).x, theta_new)
    assert TRACES[0] == traced
    assert batched_verify._cache_size() == 1


def test_solve_twice_does_not_retrace(game):
    first = equipoise.solve(game, {"c": [2.0, 3.0]})
    traced = TRACES[0]
    second = equipoise.solve(game, {"c": [4.5, 1.5]})
    assert TRACES[0] == traced, "solve on the same game with new params must not retrace"
    for sol, c in ((first, [2.0, 3.0]), (second, [4.5, 1.5])):
        (eq,) = sol.equilibria  # unique, as above (Rosen 1965)
        np.testing.assert_allclose(eq.x, closed_form(c), rtol=1e-10, atol=1e-12)
        assert eq.x.dtype == np.float64
        assert eq.jacobian.dtype == np.float64
        assert eq.gains.dtype == np.float64
        assert all(isinstance(v, float) for v in eq.payoffs.values())
        assert all(v.dtype == np.float64 for v in sol.params.values())

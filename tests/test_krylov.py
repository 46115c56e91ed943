"""The matrix-free Newton-Krylov path against closed forms and the dense path.

Cournot with linear demand P = a - b Q and constant costs: firm i's equilibrium quantity is
q_i = (a - (n + 1) c_i + sum_j c_j) / ((n + 1) b) when all produce, and a firm whose cost is too high
produces 0 while the others play the Cournot game among themselves (textbook closed form,
e.g. Tirole 1988, "The Theory of Industrial Organization", ch. 5; common practice).
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

import equipoise
from equipoise import InputError, Status


def cournot_quantities(a, b, costs):
    """Closed-form Cournot quantities with exit: drop the costliest firm until all produce."""
    costs = np.asarray(costs, dtype=float)
    active = np.ones(costs.size, dtype=bool)
    while True:
        n = active.sum()
        q = np.where(active, (a - (n + 1) * costs + costs[active].sum()) / ((n + 1) * b), 0.0)
        if np.all(q[active] > 0):
            return q
        active[np.argmax(np.where(active, costs, -np.inf))] = False


@pytest.fixture(scope="module")
def krylov_cournot():
    game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0, 40.0])
    run = jax.jit(jax.vmap(lambda x, th: equipoise.newton_solve(game, x, th, linear="krylov"), in_axes=(0, None)))
    return game, run


@pytest.mark.parametrize("costs", [[10.0, 20.0, 25.0, 30.0], [10.0, 20.0, 30.0, 95.0], [5.0, 30.0, 80.0, 90.0]])
def test_krylov_matches_cournot_closed_form(krylov_cournot, costs):
    game, run = krylov_cournot
    starts = jnp.asarray(np.random.default_rng(0).uniform(0.0, 40.0, size=(5, game.n)))
    res = run(starts, game.theta({"c": costs}))
    assert np.all(np.asarray(res.status) == Status.success.code)
    expected = cournot_quantities(100.0, 2.0, costs)
    assert np.sum(expected == 0) == {30.0: 0, 95.0: 1, 90.0: 2}[costs[-1]]  # interior, one exit, two exits
    np.testing.assert_allclose(np.asarray(res.x), np.broadcast_to(expected, res.x.shape), rtol=0, atol=1e-9)
    assert float(np.max(res.residual)) <= 1e-9


def test_krylov_and_dense_agree_on_a_large_logit_game():
    rng = np.random.default_rng(7)  # invented 60-price game: 12 firms x 5 products
    owner = [f"firm{i}" for i in range(12) for _ in range(5)]
    game = equipoise.logit_bertrand(delta=rng.uniform(0.0, 2.0, 60), alpha=1.2, costs=rng.uniform(0.5, 1.5, 60),
                                    owner=owner)
    theta = game.theta()
    x0 = jnp.asarray(theta["c"]) + 1.0
    dense = jax.jit(lambda x, th: equipoise.newton_solve(game, x, th))(x0, theta)
    krylov = jax.jit(lambda x, th: equipoise.newton_solve(game, x, th, linear="krylov"))(x0, theta)
    assert int(dense.status) == int(krylov.status) == Status.success.code
    np.testing.assert_allclose(krylov.x, dense.x, rtol=0, atol=1e-10)


def test_unknown_linear_path_is_refused():
    game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0])
    with pytest.raises(InputError, match="linear: expected one of dense, krylov, got 'qr'"):
        equipoise.newton_solve(game, jnp.ones(2), linear="qr")

"""Cournot family against closed forms: interior, corner and quadratic costs."""

import numpy as np
import pytest
from _catalogue import cournot3

import equipoise
from equipoise import Nash, Status


@pytest.fixture(scope="module")
def game():
    return cournot3()


def cournot_closed_form(a, b, c):
    """Interior linear Cournot with constant costs (Tirole 1988, The Theory of
    Industrial Organization, ch. 5): q_i = [a - (n+1) c_i + sum c] / (b (n+1)),
    P = (a + sum c) / (n+1)."""
    c = np.asarray(c, dtype=float)
    n = c.size
    q = (a - (n + 1) * c + c.sum()) / (b * (n + 1))
    price = (a + c.sum()) / (n + 1)
    return q, price


def quadratic_closed_form(a, b, c, d):
    """Cournot with costs c_i q + d_i q^2 / 2, derived from the FOCs
    a - b Q - b q_i - c_i - d_i q_i = 0: q_i = (a - c_i - b Q) / (b + d_i);
    summing over i gives Q = S1 / (1 + b S0) with S1 = sum (a - c_i)/(b + d_i)
    and S0 = sum 1/(b + d_i)."""
    c = np.asarray(c, dtype=float)
    d = np.asarray(d, dtype=float)
    s1 = np.sum((a - c) / (b + d))
    s0 = np.sum(1.0 / (b + d))
    total = s1 / (1.0 + b * s0)
    return (a - c - b * total) / (b + d), total


def only_equilibrium(sol):
    # Linear Cournot with convex costs has a unique equilibrium: its Jacobian
    # -b(I + 11') - diag(d) is negative definite, so Rosen (1965), "Existence and
    # uniqueness of equilibrium points for concave n-person games", applies.
    assert sol.status is Status.success
    assert len(sol.equilibria) == 1
    eq = sol.equilibria[0]
    assert eq.nash is Nash.global_
    return eq


def test_tirole_instance(game):
    # a=100, b=2, c=(10,20,30) -> q=(15,10,5), P=40 (Tirole 1988, ch. 5; instance in REFERENCES.md).
    q_ref, p_ref = cournot_closed_form(100.0, 2.0, [10.0, 20.0, 30.0])
    np.testing.assert_allclose(q_ref, [15.0, 10.0, 5.0], rtol=0, atol=1e-12)
    assert p_ref == pytest.approx(40.0, abs=1e-12)

    eq = only_equilibrium(equipoise.solve(game))
    np.testing.assert_allclose(eq.x, [15.0, 10.0, 5.0], rtol=0, atol=1e-9)
    assert 100.0 - 2.0 * eq.x.sum() == pytest.approx(40.0, abs=1e-8)
    # Profit_i = b q_i^2 at the equilibrium (Tirole 1988, ch. 5).
    profits = [eq.payoffs[p] for p in game.players]
    np.testing.assert_allclose(profits, 2.0 * np.array([15.0, 10.0, 5.0]) ** 2, rtol=1e-10)
    assert eq.residual <= 1e-10
    assert eq.interior.all()


@pytest.mark.parametrize(
    "a, b, c",
    [
        # Derived here from the Tirole (1988) closed form: P = 44.25, q = (21.5, 17.5, 11.5).
        (120.0, 1.5, [12.0, 18.0, 27.0]),
        # Invented instance, all firms active (every c_i below P = 24.5).
        (60.0, 0.8, [5.0, 15.0, 18.0]),
    ],
)
def test_asymmetric_costs_closed_form(game, a, b, c):
    q_ref, p_ref = cournot_closed_form(a, b, c)
    assert np.all(q_ref > 0), "instance must be interior for the closed form to apply"
    eq = only_equilibrium(equipoise.solve(game, {"a": a, "b": b, "c": c}))
    np.testing.assert_allclose(eq.x, q_ref, rtol=1e-10, atol=1e-10)
    assert a - b * eq.x.sum() == pytest.approx(p_ref, rel=1e-10)


def test_derived_instance_numbers():
    # The derived instance above by hand (Tirole 1988 closed form): sum c = 57, P = 177/4.
    q_ref, p_ref = cournot_closed_form(120.0, 1.5, [12.0, 18.0, 27.0])
    np.testing.assert_allclose(q_ref, [21.5, 17.5, 11.5], rtol=0, atol=1e-12)
    assert p_ref == pytest.approx(44.25, abs=1e-12)


@pytest.mark.parametrize("c3", [80.0, 50.0])
def test_high_cost_firm_produces_zero(game, c3):
    # With c3 above the duopoly price (100 + 30)/3 = 43.33 firm 3 stays out; the
    # others follow the two-firm closed form (Tirole 1988, ch. 5: drop the firm
    # and re-solve the rest).
    a, b, c = 100.0, 2.0, [10.0, 20.0, c3]
    q_naive, _ = cournot_closed_form(a, b, c)
    assert q_naive[2] < 0, "the three-firm formula must predict a negative output here"
    q_duo, p_duo = cournot_closed_form(a, b, c[:2])
    assert c3 > p_duo

    eq = only_equilibrium(equipoise.solve(game, {"a": a, "b": b, "c": c}))
    assert 0.0 <= eq.x[2] <= 1e-12
    assert not eq.interior[2]
    assert eq.interior[:2].all()
    np.testing.assert_allclose(eq.x[:2], q_duo, rtol=1e-10, atol=1e-10)
    assert a - b * eq.x.sum() == pytest.approx(p_duo, rel=1e-10)
    assert eq.payoffs["firm3"] == pytest.approx(0.0, abs=1e-10)  # derived: zero output, zero profit


@pytest.mark.parametrize(
    "c, d",
    [
        ([10.0, 20.0, 30.0], [1.0, 2.0, 3.0]),  # invented
        ([25.0, 15.0, 5.0], [4.0, 0.5, 0.0]),  # invented; firm 3 has constant cost
    ],
)
def test_quadratic_costs_closed_form(game, c, d):
    a, b = 100.0, 2.0
    q_ref, total = quadratic_closed_form(a, b, c, d)
    assert np.all(q_ref > 0), "instance must be interior for the closed form to apply"
    eq = only_equilibrium(equipoise.solve(game, {"a": a, "b": b, "c": c, "d": d}))
    np.testing.assert_allclose(eq.x, q_ref, rtol=1e-10, atol=1e-10)
    assert eq.x.sum() == pytest.approx(total, rel=1e-10)
    # Game Jacobian of these payoffs, derived by hand: -b(I + 11') - diag(d).
    jac = -b * (np.eye(3) + np.ones((3, 3))) - np.diag(d)
    np.testing.assert_allclose(eq.jacobian, jac, rtol=0, atol=1e-10)

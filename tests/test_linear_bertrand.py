"""Linear differentiated Bertrand family against closed forms."""

import numpy as np
import pytest
from _catalogue import bertrand

import equipoise
from equipoise import Nash, Status


def unique_nash(sol):
    # Linear demand with 2b > (n-1)|d| gives a negative definite game Jacobian
    # -b(2I) + d(11' - I) and so a unique equilibrium (Rosen 1965, "Existence and
    # uniqueness of equilibrium points for concave n-person games").
    assert sol.status is Status.success
    assert len(sol.equilibria) == 1
    eq = sol.equilibria[0]
    assert eq.nash is Nash.global_
    assert eq.residual <= 1e-9
    assert eq.interior.all()
    return eq


def symmetric_price(a, b, d, c, n):
    """p* = (a + b c) / (2b - (n-1) d) (textbook closed form, REFERENCES.md)."""
    return (a + b * c) / (2 * b - (n - 1) * d)


def duopoly_prices(a, b, d, c1, c2):
    """p_i = [2b(a + b c_i) + d(a + b c_j)] / (4b^2 - d^2) (textbook closed form, REFERENCES.md)."""
    den = 4 * b * b - d * d
    return np.array([2 * b * (a + b * c1) + d * (a + b * c2),
                     2 * b * (a + b * c2) + d * (a + b * c1)]) / den


@pytest.mark.parametrize("n", [2, 3, 5])
@pytest.mark.parametrize(
    "a, b, d, c",
    [
        (10.0, 2.0, 0.5, 1.0),  # the catalogue defaults, invented
        (8.0, 1.5, 0.3, 2.0),  # invented
        (12.0, 3.0, -0.4, 0.5),  # invented; complements (d < 0)
    ],
)
def test_symmetric_price(n, a, b, d, c):
    game = bertrand(n)
    params = {"a": [a] * n, "b": b, "d": d, "c": [c] * n}
    eq = unique_nash(equipoise.solve(game, params))
    np.testing.assert_allclose(eq.x, symmetric_price(a, b, d, c, n), rtol=1e-10)


def test_symmetric_default_numbers():
    # The catalogue defaults by hand from the closed form: 12/3.5, 12/3, 12/2.
    for n, p in ((2, 24.0 / 7.0), (3, 4.0), (5, 6.0)):
        assert symmetric_price(10.0, 2.0, 0.5, 1.0, n) == pytest.approx(p, rel=1e-14)


@pytest.mark.parametrize(
    "a, b, d, c1, c2",
    [
        (10.0, 2.0, 0.5, 1.0, 3.0),  # invented
        (6.0, 1.0, 0.8, 0.0, 2.5),  # invented; strong substitutes
        (9.0, 2.5, -1.0, 2.0, 0.5),  # invented; complements
    ],
)
def test_asymmetric_duopoly(a, b, d, c1, c2):
    eq = unique_nash(equipoise.solve(bertrand(2), {"a": [a, a], "b": b, "d": d, "c": [c1, c2]}))
    np.testing.assert_allclose(eq.x, duopoly_prices(a, b, d, c1, c2), rtol=1e-10)


@pytest.mark.parametrize("alpha, gamma", [(10.0, 0.5), (4.0, 0.8), (7.0, 0.2)])  # invented values
def test_singh_vives_bertrand_price(alpha, gamma):
    # Singh & Vives (1984), "Price and quantity competition in a differentiated
    # duopoly", RAND J. Econ. 15(4): inverse demand p_i = alpha - q_i - gamma q_j,
    # zero cost, Bertrand price alpha (1 - gamma) / (2 - gamma). Inverting the
    # demand system gives q_i = a - b p_i + d p_j with a = alpha / (1 + gamma),
    # b = 1 / (1 - gamma^2), d = gamma / (1 - gamma^2) (derived).
    a = alpha / (1 + gamma)
    b = 1 / (1 - gamma**2)
    d = gamma / (1 - gamma**2)
    eq = unique_nash(equipoise.solve(bertrand(2), {"a": [a, a], "b": b, "d": d, "c": [0.0, 0.0]}))
    p_ref = alpha * (1 - gamma) / (2 - gamma)
    np.testing.assert_allclose(eq.x, [p_ref, p_ref], rtol=1e-10)
    # The quantities solve the original inverse demand at those prices (derived).
    q = a - b * eq.x + d * eq.x[::-1]
    np.testing.assert_allclose(alpha - q - gamma * q[::-1], eq.x, rtol=1e-10)
    # Same source: with substitutes Bertrand prices lie below the Cournot price alpha / (2 + gamma).
    assert p_ref < alpha / (2 + gamma)
    assert eq.x[0] < alpha / (2 + gamma) - 1e-6

"""The Fischer-Burmeister form of the KKT conditions, against the definition evaluated in
50-digit decimal arithmetic (Python's decimal module).

phi(a, b) = a + b - sqrt(a^2 + b^2) (Fischer 1992, "A special Newton-type optimization method",
Optimization 24) is zero exactly when a >= 0, b >= 0 and ab = 0. Far from the origin the naive
float formula cancels: with a = 1e17 and b = 3 it returns 0, so a runaway iterate would pass
for a root.
"""

from decimal import Decimal, getcontext

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from equipoise._newton import complementarity

getcontext().prec = 50


def fb_reference(a: float, b: float) -> float:
    a, b = Decimal(a), Decimal(b)
    return float(a + b - (a * a + b * b).sqrt())


@pytest.mark.parametrize("a, b", [(1e17, 3.0), (3.0, 1e17), (1e12, 1e-3), (1.0, 2.0), (-1.0, 2.0),
                                  (2.0, -5.0), (-4.0, -3.0), (0.0, 0.0), (1e-9, 1e-9), (5.0, 0.0)])
def test_fischer_burmeister_matches_exact_arithmetic(a, b):
    # complementarity(x, F, lower=0, upper=inf) is phi(x, -F).
    got = float(complementarity(jnp.array([a]), jnp.array([-b]), np.array([0.0]), np.array([np.inf]))[0])
    expected = fb_reference(a, b)
    assert got == pytest.approx(expected, rel=1e-13, abs=1e-300)


def test_fischer_burmeister_derivative_is_finite_at_the_kink():
    grad = jax.grad(lambda x: complementarity(x, -x, np.array([0.0]), np.array([np.inf]))[0])(jnp.array([0.0]))
    assert np.all(np.isfinite(np.asarray(grad)))

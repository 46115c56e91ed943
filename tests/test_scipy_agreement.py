"""The solver agrees with scipy.optimize.root on the same first-order conditions.

scipy is the outside reference here: it sees only the pseudo-gradient (from
JAX, wrapped to numpy) and its JAX Jacobian, never equipoise's Newton method.
The instances are interior, so the equilibrium is a plain root of F.
"""

import jax
import numpy as np
import pytest
from _catalogue import bertrand, cournot3, logit_multi
from scipy.optimize import root

import equipoise
from equipoise import Nash, Status

CASES = {
    # All numbers invented.
    "cournot": (cournot3, {"a": 90.0, "b": 1.2, "c": [8.0, 14.0, 20.0], "d": [0.5, 0.0, 1.0]}),
    "logit": (logit_multi, {"delta": [0.8, 1.5, 0.2, 1.1, 2.0], "alpha": 1.1,
                            "c": [1.0, 1.5, 0.7, 0.9, 2.2]}),
    "linear_bertrand": (bertrand, {"a": [10.0, 9.0, 11.0], "b": 2.0, "d": 0.6, "c": [1.0, 2.0, 0.5]}),
}


def build(name):
    make, params = CASES[name]
    return (make(3) if make is bertrand else make()), params


@pytest.mark.parametrize("name", sorted(CASES))
def test_agrees_with_scipy_root(name):
    game, params = build(name)
    theta = game.theta(params)
    grad = jax.jit(game.pseudo_gradient)
    jac = jax.jit(game.jacobian)

    def fun(x):
        return np.asarray(grad(x, theta))

    def fjac(x):
        return np.asarray(jac(x, theta))

    lo, hi = (np.asarray(v) for v in game.region(theta))
    # Near the low end of the search region: for logit that is cost + 1/alpha,
    # away from the flat high-price tails where F vanishes without a root.
    x0 = lo + 0.1 * (hi - lo)
    ref = root(fun, x0, jac=fjac, method="lm", options={"xtol": 1e-14, "ftol": 1e-14})
    assert ref.success, ref.message
    assert np.max(np.abs(ref.fun)) <= 1e-9
    assert np.all((ref.x > lo) & (ref.x < hi)), "scipy's root must be a finite interior point"

    sol = equipoise.solve(game, params)
    assert sol.status is Status.success
    # One equilibrium each: Cournot and linear Bertrand have negative definite
    # Jacobians (Rosen 1965, "Existence and uniqueness of equilibrium points for
    # concave n-person games"), multi-product logit by Konovalov & Sandor 2010,
    # "On price equilibrium with multi-product firms" (from memory).
    assert len(sol.equilibria) == 1
    eq = sol.equilibria[0]
    assert eq.nash is Nash.global_
    assert eq.interior.all()
    np.testing.assert_allclose(eq.x, ref.x, rtol=1e-8, atol=1e-8)

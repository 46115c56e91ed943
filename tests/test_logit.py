"""Logit Bertrand family against published markup formulas."""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from _catalogue import logit_monopoly, logit_multi, logit_single
from scipy.special import lambertw

import equipoise
from equipoise import Nash, Status


def shares(p, delta, alpha):
    """Multinomial logit shares with an outside good of utility 0 (plain numpy)."""
    e = np.exp(np.asarray(delta) - alpha * np.asarray(p))
    return e / (1.0 + e.sum())


def unique_nash(sol):
    # Logit Bertrand has a unique equilibrium: for single-product firms by
    # log-concave demand (Caplin & Nalebuff 1991, "Aggregation and imperfect
    # competition: on the existence of equilibrium", Econometrica 59(1); from
    # memory), for multi-product firms with a common alpha (Konovalov & Sandor
    # 2010, "On price equilibrium with multi-product firms", Economic Theory 44;
    # from memory). For the monopoly, derived from the FOC: alpha m (1 - s) = 1
    # has a single root because m (1 - s) increases in the price.
    assert sol.status is Status.success
    assert len(sol.equilibria) == 1
    eq = sol.equilibria[0]
    assert eq.nash is Nash.global_
    assert eq.residual <= 1e-9
    return eq


@pytest.fixture(scope="module")
def single():
    return logit_single()


@pytest.fixture(scope="module")
def multi():
    return logit_multi()


@pytest.fixture(scope="module")
def monopoly():
    return logit_monopoly()


@pytest.mark.parametrize(
    "params",
    [
        {},  # the catalogue defaults, invented
        {"delta": [2.0, -0.5, 0.3], "alpha": 1.3, "c": [0.5, 2.0, 1.0]},  # invented
    ],
)
def test_single_product_markup(single, params):
    theta = single.theta(params)
    delta, alpha, c = (np.asarray(theta[k]) for k in ("delta", "alpha", "c"))
    eq = unique_nash(equipoise.solve(single, params))
    s = shares(eq.x, delta, alpha)
    # Single-product logit Bertrand: p_j - c_j = 1 / (alpha (1 - s_j))
    # (Anderson, de Palma & Thisse 1992, Discrete Choice Theory of Product
    # Differentiation; from memory).
    np.testing.assert_allclose(eq.x - c, 1.0 / (alpha * (1.0 - s)), rtol=1e-9)


@pytest.mark.parametrize(
    "params",
    [
        {},  # the catalogue defaults, invented
        {"delta": [0.2, 2.1, 1.0, -0.4, 1.8], "alpha": 0.6, "c": [2.0, 1.0, 0.5, 0.5, 3.0]},  # invented
    ],
)
def test_multi_product_common_markup(multi, params):
    theta = multi.theta(params)
    delta, alpha, c = (np.asarray(theta[k]) for k in ("delta", "alpha", "c"))
    eq = unique_nash(equipoise.solve(multi, params))
    # Actions stack firm by firm; map them back to product order.
    prices = np.empty(5)
    products = {"tern": [0, 1], "heron": [2, 3], "plover": [4]}
    for firm, idx in products.items():
        prices[idx] = eq.actions[firm]
    s = shares(prices, delta, alpha)
    for firm, idx in products.items():
        firm_share = s[idx].sum()
        # Every product of a firm carries the markup 1 / (alpha (1 - S_f))
        # (Anderson, de Palma & Thisse 1992, Discrete Choice Theory of Product
        # Differentiation; from memory).
        np.testing.assert_allclose(prices[idx] - c[idx], 1.0 / (alpha * (1.0 - firm_share)), rtol=1e-9)


@pytest.mark.parametrize(
    "delta, alpha, c",
    [
        (1.0, 1.0, 1.0),  # invented
        (3.0, 0.5, 2.0),  # invented
        (-2.0, 2.0, 0.3),  # invented; small share
        (6.0, 1.5, 0.5),  # invented; large share
    ],
)
def test_monopoly_lambert_w(monopoly, delta, alpha, c):
    # Single-product logit monopoly: p = c + [1 + W(exp(delta - alpha c - 1))] / alpha
    # (Aravindakshan & Ratchford 2011, Review of Marketing Science 9(1));
    # scipy.special.lambertw is the reference W.
    w = lambertw(np.exp(delta - alpha * c - 1.0)).real
    p_ref = c + (1.0 + w) / alpha
    eq = unique_nash(equipoise.solve(monopoly, {"delta": [delta], "alpha": alpha, "c": [c]}))
    assert eq.x[0] == pytest.approx(p_ref, rel=1e-10)


def true_gradient(p, delta, alpha, c, size, products):
    """Pseudo-gradient of M sum_{j in f} (p_j - c_j) s_j, derived by hand:
    dU_f/dp_j = M s_j [1 - alpha m_j + alpha sum_{k in f} m_k s_k], m = p - c."""
    s = shares(p, delta, alpha)
    m = p - c
    out = np.empty_like(p)
    for idx in products:
        out[idx] = size * s[idx] * (1.0 - alpha * m[idx] + alpha * np.sum(m[idx] * s[idx]))
    return out


@pytest.mark.parametrize(
    "which, products",
    [("single", [[0], [1], [2]]), ("multi", [[0, 1], [2, 3], [4]])],
)
def test_foc_is_positive_multiple_of_pseudo_gradient(request, which, products):
    # The Game contract: each coordinate of `foc` is a positive multiple of the
    # pseudo-gradient, so the rescaled system keeps roots and bound signs.
    game = request.getfixturevalue(which)
    theta = game.theta()
    delta, alpha, c = (np.asarray(theta[k]) for k in ("delta", "alpha", "c"))
    size = float(theta["size"])
    rng = np.random.default_rng(20240611)
    # Prices from below cost to far above it (shares down to ~1e-8).
    points = c + rng.uniform(-3.0, 18.0, size=(200, c.size)) / alpha
    order = np.concatenate(products)
    stacked = points[:, order]  # the solver's firm-by-firm stacking

    fields = jax.jit(jax.vmap(lambda x: (game.solver_field(x, theta), game.pseudo_gradient(x, theta))))
    foc, grad = (np.asarray(v) for v in fields(jnp.asarray(stacked)))

    ref = np.stack([true_gradient(p, delta, alpha, c, size, products)[order] for p in points])
    np.testing.assert_allclose(grad, ref, rtol=1e-9, atol=1e-300)
    assert np.all(np.abs(grad) > 0), "points must avoid exact roots for the ratio to be defined"
    ratio = foc / grad
    assert np.all(np.isfinite(ratio))
    assert np.all(ratio > 0)

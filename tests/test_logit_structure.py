"""The logit family's structure: the markup fixed point and closed-form best responses.

References: the equal-markup condition m_f = 1 / (alpha (1 - s_f)) of multinomial logit with
multi-product firms (Anderson, de Palma & Thisse 1992, "Discrete Choice Theory of Product
Differentiation", ch. 7; from memory); the markup fixed point of Morrow & Skerlos (2011),
"Fixed-point approaches to computing Bertrand-Nash equilibrium prices under mixed-logit
demand", Operations Research 59(2). Best responses are checked against scipy's Lambert W
(scipy.special.lambertw) and scipy.optimize.minimize.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from _catalogue import logit_multi
from scipy.optimize import minimize
from scipy.special import lambertw

import equipoise
from equipoise import InputError, Nash, Status
from equipoise._verify import verify


def shares(p, delta, alpha):
    e = np.exp(np.asarray(delta) - alpha * np.asarray(p))
    return e / (1.0 + e.sum())


@pytest.fixture(scope="module")
def multi():
    return logit_multi()


#: Owners of the catalogue's multi-product game; grouped by firm, so stacked order is product order.
OWNER = ["tern", "tern", "heron", "heron", "plover"]


def test_fixed_point_meets_equal_markup_condition(multi):
    theta = multi.theta()
    res = jax.jit(lambda x, th: equipoise.fixed_point_solve(multi, x, th))(jnp.asarray(theta["c"]) + 1.0, theta)
    assert int(res.status) == Status.success.code
    assert float(res.residual) <= 1e-10
    delta, alpha, c = (np.asarray(theta[k]) for k in ("delta", "alpha", "c"))
    p = np.asarray(res.x)
    s = shares(p, delta, alpha)
    owner = np.array(OWNER)
    for f in set(owner):
        mine = owner == f
        expected = 1.0 / (alpha * (1.0 - s[mine].sum()))
        np.testing.assert_allclose(p[mine] - c[mine], expected, rtol=1e-11, atol=0)


def test_fixed_point_newton_and_krylov_agree(multi):
    theta = multi.theta()
    starts = jnp.asarray(np.random.default_rng(3).uniform(1.0, 6.0, size=(6, multi.n)))
    fp = jax.vmap(lambda x: equipoise.fixed_point_solve(multi, x, theta))(starts)
    dense = jax.vmap(lambda x: equipoise.newton_solve(multi, x, theta))(starts)
    krylov = jax.vmap(lambda x: equipoise.newton_solve(multi, x, theta, linear="krylov"))(starts)
    for r in (fp, dense, krylov):
        assert np.all(np.asarray(r.status) == Status.success.code)
    np.testing.assert_allclose(fp.x, dense.x, rtol=0, atol=1e-10)
    np.testing.assert_allclose(krylov.x, dense.x, rtol=0, atol=1e-10)


def test_products_game_fixed_point_after_merger():
    owner = ["a", "b", "c", "d"]
    game = equipoise.logit_products(delta=[1.0, 1.4, 0.8, 1.2], alpha=0.9, costs=[1.0, 1.1, 0.9, 1.2], owner=owner)
    merged = equipoise.merged_ownership(owner, ["a", "b"])
    theta = game.theta({"ownership": merged.tolist()})
    x0 = jnp.full(4, 2.5)
    fp = equipoise.fixed_point_solve(game, x0, theta)
    nt = equipoise.newton_solve(game, x0, theta)
    assert int(fp.status) == Status.success.code and int(nt.status) == Status.success.code
    np.testing.assert_allclose(fp.x, nt.x, rtol=0, atol=1e-10)
    # The merged pair carries one markup, 1 / (alpha (1 - s_a - s_b)) (equal-markup condition).
    s = shares(np.asarray(fp.x), [1.0, 1.4, 0.8, 1.2], 0.9)
    m = np.asarray(fp.x) - np.array([1.0, 1.1, 0.9, 1.2])
    np.testing.assert_allclose(m[:2], 1.0 / (0.9 * (1.0 - s[0] - s[1])), rtol=1e-10)


def test_fixed_point_refused_without_a_map():
    game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0])
    with pytest.raises(InputError, match="no fixed-point map"):
        equipoise.fixed_point_solve(game, jnp.ones(2))
    with pytest.raises(InputError, match="method: .* has no fixed-point map"):
        equipoise.solve(game, method="fixed_point")
    with pytest.raises(InputError, match="method: expected one of auto, newton, krylov, fixed_point"):
        equipoise.solve(game, method="bisection")


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_best_response_is_the_global_maximiser(multi, seed):
    theta = multi.theta()
    delta, alpha, c = (np.asarray(theta[k]) for k in ("delta", "alpha", "c"))
    rng = np.random.default_rng(seed)
    x = jnp.asarray(c + rng.uniform(0.2, 4.0, size=5))  # product order equals stacked order here
    reply = np.asarray(multi.best_response(x, theta))
    owner = np.array(OWNER)
    for f in dict.fromkeys(owner):
        mine = owner == f
        p_others = np.asarray(x)

        def loss(q):
            p = p_others.copy()
            p[mine] = q
            return -np.sum(((p - c) * shares(p, delta, alpha))[mine])

        best = min((minimize(loss, c[mine] + t, method="Nelder-Mead",
                             options={"xatol": 1e-10, "fatol": 1e-14, "maxiter": 20000}) for t in (0.5, 2.0, 5.0)),
                   key=lambda r: r.fun)
        assert -loss(reply[mine]) >= -best.fun - 1e-12
        np.testing.assert_allclose(reply[mine], best.x, atol=1e-4)
        # The closed form: alpha m = 1 + W(A / (B e)).
        A = np.sum(np.exp(delta[mine] - alpha * c[mine]))
        B = 1.0 + np.sum(np.exp(delta[~mine] - alpha * p_others[~mine]))
        m = (1.0 + lambertw(A / (B * np.e)).real) / alpha
        np.testing.assert_allclose(reply[mine] - c[mine], m, rtol=1e-12)


def test_exact_gains_match_the_search(multi):
    theta = multi.theta()
    eq = equipoise.newton_solve(multi, jnp.full(5, 3.0), theta).x
    off = eq + jnp.array([0.4, -0.3, 0.2, 0.0, -0.5])
    exact = verify(multi, off, theta)
    searched = verify(_without_best_response(multi), off, theta, starts=16)
    np.testing.assert_allclose(exact.gains, searched.gains, rtol=1e-7, atol=1e-9)
    at_eq = verify(multi, eq, theta)
    assert Nash.from_code(int(at_eq.label)) is Nash.global_
    assert np.all(np.asarray(at_eq.gains) <= 1e-12)


def _without_best_response(game):
    clone = equipoise.logit_bertrand(delta=game.defaults["delta"], alpha=float(game.defaults["alpha"]),
                                     costs=game.defaults["c"], owner=OWNER)
    clone.best_response = None
    return clone


def test_solve_methods_agree():
    game = equipoise.load_game("models/logit_valemont_bakeries.py")
    sols = {m: equipoise.solve(game, method=m, starts=8, stability=False) for m in ("newton", "krylov", "fixed_point")}
    xs = {m: np.asarray(s.equilibria[0].x) for m, s in sols.items()}
    for m, s in sols.items():
        assert len(s.equilibria) == 1 and s.equilibria[0].nash is Nash.global_, m
        assert s.stats["method"] == m
    np.testing.assert_allclose(xs["krylov"], xs["newton"], atol=1e-10)
    np.testing.assert_allclose(xs["fixed_point"], xs["newton"], atol=1e-10)


def test_auto_method_choice():
    from equipoise._solve import KRYLOV_FROM, resolve_method

    assert resolve_method(logit_multi(), "auto") == "fixed_point"
    assert resolve_method(equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0]), "auto") == "newton"
    big = equipoise.cournot(a=100.0, b=2.0, costs=[10.0] * KRYLOV_FROM)
    assert resolve_method(big, "auto") == "krylov"
    assert resolve_method(big, "newton") == "newton"


def test_unsettled_fixed_point_starts_fall_back_to_newton():
    # u_i = -(x_i - 1)^2 / 2: the only equilibrium is x = (1, 1). The map T(x) = 2 - x has the
    # same fixed point but oscillates from every other start, so every start needs Newton.
    game = equipoise.Game({"a": 1, "b": 1},
                          lambda x, th: {"a": -0.5 * (x["a"][0] - 1.0) ** 2, "b": -0.5 * (x["b"][0] - 1.0) ** 2},
                          fixed_point=lambda x, th: 2.0 - x)
    sol = equipoise.solve(game, method="fixed_point", starts=4, stability=False)
    assert sol.stats["method"] == "fixed_point"
    assert sol.stats["newton_fallback_starts"] == 4
    (eq,) = sol.equilibria
    np.testing.assert_allclose(eq.x, [1.0, 1.0], atol=1e-12)

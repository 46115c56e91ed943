"""Nash labels of first-order points, and several equilibria found by multistart."""

import itertools

import jax.numpy as jnp
import numpy as np
import pytest
from scipy.optimize import minimize_scalar

import equipoise
from equipoise import Game, Nash, Status
from equipoise._verify import verify

# --------------------------------------------------------------------------
# (i) A game whose first-order points are global, local and not Nash.
#
# Players a, b in [-1, 1]; u_a = a^2/2 - a b is convex in a, u_b = -(b - 1/2)^2.
# Derived from the FOCs: b = 1/2, and player a's KKT points are a = -1 (F_a =
# -3/2 <= 0 at the lower bound), a = 1 (F_a = 1/2 >= 0 at the upper bound) and
# a = 1/2 (F_a = 0, a payoff minimum). u_a(-1) = 1 > u_a(1) = 0.
# --------------------------------------------------------------------------


def u_a(a, b):
    return 0.5 * a * a - a * b


def u_b(a, b):
    return -((b - 0.5) ** 2)


def convex_payoffs(x, theta):
    a, b = x["a"][0], x["b"][0]
    return {"a": u_a(a, b), "b": u_b(a, b)}


KKT_POINTS = {
    (-1.0, 0.5): Nash.global_,
    (0.5, 0.5): Nash.not_nash,
    (1.0, 0.5): Nash.local,
}


@pytest.fixture(scope="module")
def convex_solution():
    game = Game({"a": 1, "b": 1}, convex_payoffs, lower={"a": -1.0, "b": -1.0},
                upper={"a": 1.0, "b": 1.0}, name="convex-in-own-action")
    return equipoise.solve(game, starts=64)


def test_all_three_kkt_points_found(convex_solution):
    assert convex_solution.status is Status.success
    found = np.array([e.x for e in convex_solution.equilibria])
    # Sorted by stacked actions (Solution contract).
    np.testing.assert_allclose(found, np.array(sorted(KKT_POINTS)), rtol=0, atol=1e-9)
    for e in convex_solution.equilibria:
        assert e.residual <= 1e-10


def test_labels(convex_solution):
    labels = {tuple(np.round(e.x, 6)): e.nash for e in convex_solution.equilibria}
    assert labels == KKT_POINTS
    assert [e.x[0] for e in convex_solution.nash] == pytest.approx([-1.0, 1.0], abs=1e-9)


def test_deviation_gains(convex_solution):
    by_point = {tuple(np.round(e.x, 6)): e for e in convex_solution.equilibria}
    # Derived from the payoffs: from a = 1 the deviation to a = -1 gains 1 - 0 = 1,
    # from a = 1/2 it gains 1 - (-1/8) = 9/8; player b never gains.
    assert by_point[(1.0, 0.5)].gains[0] == pytest.approx(1.0, abs=1e-6)
    assert by_point[(0.5, 0.5)].gains[0] == pytest.approx(1.125, abs=1e-6)
    assert by_point[(-1.0, 0.5)].gains[0] <= 1e-8
    for e in by_point.values():
        assert e.gains[1] <= 1e-8
    # Own curvature on interior coordinates: u_a'' = +1 at a = 1/2, u_b'' = -2;
    # a player at a bound has no interior coordinate (-inf).
    np.testing.assert_allclose(by_point[(0.5, 0.5)].own_curvature, [1.0, -2.0], rtol=1e-10)
    assert by_point[(1.0, 0.5)].own_curvature[0] == -np.inf


def best_response_value(u, lo, hi):
    """Best payoff over [lo, hi] by bounded Brent on sub-intervals plus the ends.

    The outside reference for the labels: scipy.optimize.minimize_scalar finds a
    local optimum per sub-interval, and the payoffs here have at most one
    interior critical point, so sub-intervals and endpoints cover the maximum.
    """
    edges = np.linspace(lo, hi, 5)
    best = max(u(lo), u(hi))
    for left, right in zip(edges[:-1], edges[1:]):
        r = minimize_scalar(lambda t: -u(t), bounds=(left, right), method="bounded",
                            options={"xatol": 1e-10})
        assert r.success
        best = max(best, -r.fun)
    return best


def scipy_label(a, b):
    """Label a KKT point from best responses computed with scipy alone."""
    u_here = (u_a(a, b), u_b(a, b))
    responses = (lambda t: u_a(t, b), lambda t: u_b(a, t))
    own = (a, b)
    glob = []
    loc = []
    for u, here, z in zip(responses, u_here, own):
        glob.append(best_response_value(u, -1.0, 1.0) <= here + 1e-9)
        near = best_response_value(u, max(-1.0, z - 1e-2), min(1.0, z + 1e-2))
        loc.append(near <= here + 1e-9)
    if all(glob):
        return Nash.global_
    if all(loc):
        return Nash.local
    return Nash.not_nash


@pytest.mark.parametrize("point", sorted(KKT_POINTS))
def test_labels_agree_with_scipy_best_responses(convex_solution, point):
    ref = scipy_label(*point)
    assert ref is KKT_POINTS[point]  # the outside reference confirms the derivation
    (e,) = [e for e in convex_solution.equilibria if np.allclose(e.x, point, atol=1e-9)]
    assert e.nash is ref


# --------------------------------------------------------------------------
# (ii) Several equilibria: the network game of Bramoulle, Kranton & D'Amours
# (2014), "Strategic interaction and networks", AER 104(3):
# u_i = x_i - x_i^2/2 - delta x_i sum_j g_ij x_j, x_i >= 0.
# --------------------------------------------------------------------------


def network_game(n):
    players = [f"node{i + 1}" for i in range(n)]

    def payoffs(x, theta):
        v = jnp.concatenate([x[p] for p in players])
        u = v - 0.5 * v * v - theta["delta"] * v * (theta["G"] @ v)
        return {p: u[i] for i, p in enumerate(players)}

    complete = (np.ones((n, n)) - np.eye(n)).tolist()
    return Game({p: 1 for p in players}, payoffs, params={"delta": 1.0, "G": complete},
                lower={p: 0.0 for p in players}, search_box={p: (0.0, 1.5) for p in players},
                name=f"network{n}")


def enumerate_equilibria(G, delta):
    """All equilibria by supports (Bramoulle, Kranton & D'Amours 2014):
    (I + delta G_SS) x_S = 1 with x_S > 0 and 1 - delta (G x)_i <= 0 off S."""
    n = G.shape[0]
    out = []
    for k in range(1, n + 1):
        for support in itertools.combinations(range(n), k):
            S = list(support)
            x = np.zeros(n)
            x[S] = np.linalg.solve(np.eye(k) + delta * G[np.ix_(S, S)], np.ones(k))
            off = [i for i in range(n) if i not in S]
            if np.all(x[S] > 0) and np.all(1 - delta * (G @ x)[off] <= 0):
                out.append(x)
    return sorted(map(tuple, out))


@pytest.fixture(scope="module")
def network2():
    return network_game(2)


@pytest.fixture(scope="module")
def network3():
    return network_game(3)


def assert_same_set(solution, expected):
    assert solution.status is Status.success
    found = [e.x for e in solution.equilibria]
    assert len(found) == len(expected)
    # Match each expected point to exactly one found point (a bijection at 1e-9).
    hits = np.array([[np.max(np.abs(f - np.asarray(x))) <= 1e-9 for x in expected] for f in found])
    assert np.all(hits.sum(axis=0) == 1), f"expected {expected}, found {found}"
    assert np.all(hits.sum(axis=1) == 1), f"expected {expected}, found {found}"
    # Each payoff is strictly concave in the player's own action, so every KKT
    # point is an equilibrium (derived from the payoffs).
    assert all(e.nash is Nash.global_ for e in solution.equilibria)


def test_two_players_three_equilibria(network2):
    sol = equipoise.solve(network2, {"delta": 2.0})
    # Exactly (1,0), (0,1), (1/3,1/3) (Bramoulle, Kranton & D'Amours 2014).
    expected = [(0.0, 1.0), (1.0 / 3.0, 1.0 / 3.0), (1.0, 0.0)]
    np.testing.assert_allclose(enumerate_equilibria(np.array([[0.0, 1.0], [1.0, 0.0]]), 2.0), expected,
                               rtol=0, atol=1e-12)
    assert_same_set(sol, expected)


def test_complete_triangle_seven_equilibria(network3):
    G = np.ones((3, 3)) - np.eye(3)
    expected = enumerate_equilibria(G, 1.5)
    # Three specialists (1), three pairs (0.4 each), everyone at 1/4 (supports
    # counted by hand from the Bramoulle, Kranton & D'Amours 2014 conditions).
    assert len(expected) == 7
    sol = equipoise.solve(network3, {"delta": 1.5})
    assert_same_set(sol, expected)


@pytest.mark.parametrize("n, fixture", [(2, "network2"), (3, "network3")])
def test_unique_below_threshold(request, n, fixture):
    # delta |lambda_min(G)| < 1 gives a unique equilibrium (Bramoulle, Kranton &
    # D'Amours 2014); lambda_min = -1 on a complete graph, so delta = 0.5 is unique,
    # with x_i = 1 / (1 + (n-1) delta) (derived from the FOCs).
    game = request.getfixturevalue(fixture)
    sol = equipoise.solve(game, {"delta": 0.5})
    expected = [tuple(np.full(n, 1.0 / (1.0 + (n - 1) * 0.5)))]
    np.testing.assert_allclose(enumerate_equilibria(np.ones((n, n)) - np.eye(n), 0.5), expected,
                               rtol=0, atol=1e-12)
    assert_same_set(sol, expected)


# Corners without strict complementarity (the marginal payoff vanishes at the bound): the
# first-order conditions hold there, and only second-order information along the bound decides
# (second-order conditions for bound-constrained maxima, common practice).


def test_degenerate_corner_that_is_no_local_maximum_is_not_nash():
    # u = x^3 on [0, 1]: u'(0) = 0, u''(0) = 0, and every x > 0 pays more.
    game = equipoise.Game({"a": 1}, lambda x, th: {"a": x["a"][0] ** 3}, lower={"a": 0.0}, upper={"a": 1.0})
    v = verify(game, jnp.array([0.0]))
    assert Nash.from_code(int(v.label)) is Nash.not_nash
    assert float(v.gains[0]) == pytest.approx(1.0, abs=1e-9)


def test_degenerate_corner_that_is_a_strict_local_maximum_is_local():
    # u = x^2 (x - 2) on [0, 3]: u'(0) = 0, u''(0) = -4 < 0, but u(3) = 9 > u(0) = 0.
    game = equipoise.Game({"a": 1}, lambda x, th: {"a": x["a"][0] ** 2 * (x["a"][0] - 2.0)},
                          lower={"a": 0.0}, upper={"a": 3.0})
    v = verify(game, jnp.array([0.0]))
    assert Nash.from_code(int(v.label)) is Nash.local
    assert float(v.gains[0]) == pytest.approx(9.0, abs=1e-9)

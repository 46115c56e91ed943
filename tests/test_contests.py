"""Contest, allocation, zero-sum, network and public-good families against published closed forms.

One game object per family (compiling dominates the run time); instances are passed as
parameters to ``solve``.
"""

import jax.numpy as jnp
import numpy as np
import pytest
import scipy.optimize

import equipoise
from equipoise import InputError, Nash, Status
from equipoise.families import (allocation_efficiency, minmax_quadratic, network_game, proportional_allocation,
                                public_good, tullock)
from equipoise.families.allocation import best_allocation


@pytest.fixture(scope="module")
def contest():
    return tullock([1.0, 1.0, 1.0])


@pytest.fixture(scope="module")
def market():
    return proportional_allocation([1.0, 1.0, 1.0], s=1.0, capacity=1.0)


@pytest.fixture(scope="module")
def saddle():
    return minmax_quadratic(1.0, 1.0, 1.0)


@pytest.fixture(scope="module")
def pair():
    return network_game([[0.0, 1.0], [1.0, 0.0]], delta=2.0)


@pytest.fixture(scope="module")
def donors():
    return public_good([1.0, 1.0, 1.0], wealth=[2.0, 10.0, 10.0])


def solve_one(game, params, starts=16):
    sol = equipoise.solve(game, params, starts=starts, stability=False)
    assert sol.status is Status.success
    assert len(sol.equilibria) == 1, [e.x for e in sol.equilibria]
    return sol.equilibria[0]


def find(sol, x, atol=1e-8):
    hits = [e for e in sol.equilibria if np.max(np.abs(e.x - x)) <= atol]
    assert len(hits) == 1, f"{x} not found once among {[e.x for e in sol.equilibria]}"
    return hits[0]


# ---------------------------------------------------------------- Tullock contests
def stein_efforts(v):
    """Asymmetric Tullock contest with r = 1 (Stein 2002, Public Choice 113 (memory)): with the
    m highest values active, X = (m - 1) / sum_active 1/V_i, x_i = X (1 - X / V_i), and player i
    is active iff V_i > X."""
    v = np.asarray(v, dtype=float)
    order = np.argsort(-v)
    for m in range(v.size, 1, -1):
        top = order[:m]
        total = (m - 1) / np.sum(1.0 / v[top])
        if v[top[-1]] > total:
            x = np.zeros_like(v)
            x[top] = total * (1.0 - total / v[top])
            return x
    raise AssertionError("two players are always active")


def best_entry(value, others, r):
    """The outsider's best payoff max_x V x^r / (x^r + sum others^r) - x, by scipy (bounded Brent)."""
    rest = np.sum(np.asarray(others) ** r)
    res = scipy.optimize.minimize_scalar(lambda x: -(value * x ** r / (x ** r + rest) - x), bounds=(0.0, value),
                                         method="bounded", options={"xatol": 1e-12})
    return max(-res.fun, 0.0)


def no_spurious_points(sol, v):
    # The family's documented safeguards (equipoise.families._shares): profiles where (almost) nobody
    # spends fail the first-order conditions, and the solver's steepened system does not run off to huge
    # efforts where the marginal payoff flattens at -1. Every reported point is a true KKT point with
    # someone spending a sizeable amount, and no effort exceeds the prize (u_i >= 0 needs x_i <= V_i).
    for e in sol.equilibria:
        assert e.residual < 1e-9
        assert 0.1 < e.x.max() <= v


def test_symmetric_effort(contest):
    # Tullock (1980), "Efficient rent seeking": n players, r = 1: x = (n - 1) V / n^2 = 4/3 for V = 6, n = 3;
    # payoff V/n - x = V / n^2 = 2/3 (derived).
    eq = solve_one(contest, {"v": [6.0, 6.0, 6.0], "r": 1.0}, starts=32)
    np.testing.assert_allclose(eq.x, np.full(3, 4.0 / 3.0), rtol=1e-10)
    np.testing.assert_allclose(list(eq.payoffs.values()), np.full(3, 2.0 / 3.0), rtol=1e-10)
    assert eq.nash is Nash.global_


@pytest.mark.parametrize("v1, v2, v3", [(3.0, 1.0, 0.7), (5.0, 4.0, 1.0)])
def test_two_player_asymmetric(contest, v1, v2, v3):
    # Two players (Tullock 1980; REFERENCES.md): x_1 = V_1^2 V_2 / (V_1 + V_2)^2, x_2 = V_2^2 V_1 / (V_1 + V_2)^2.
    # The third player's V_3 <= X = V_1 V_2 / (V_1 + V_2) keeps it out (Stein 2002 (memory)), so the
    # other two play the two-player contest.
    assert v3 <= v1 * v2 / (v1 + v2)
    eq = solve_one(contest, {"v": [v1, v2, v3], "r": 1.0})
    want = [v1 ** 2 * v2 / (v1 + v2) ** 2, v2 ** 2 * v1 / (v1 + v2) ** 2, 0.0]
    np.testing.assert_allclose(eq.x, want, rtol=1e-10, atol=1e-12)
    assert eq.nash is Nash.global_


@pytest.mark.parametrize("v", [[10.0, 8.0, 5.0], [10.0, 8.0, 2.0], [9.0, 4.0, 3.0]])
def test_asymmetric_values(contest, v):
    # Stein (2002) (memory): see stein_efforts. (9, 4, 3) has the third player barely active
    # (X = 2.88 < 3); (10, 8, 2) has it out (X = 40/9 > 2).
    eq = solve_one(contest, {"v": v, "r": 1.0})
    want = stein_efforts(v)
    np.testing.assert_allclose(eq.x, want, rtol=1e-10, atol=1e-12)
    assert (eq.x[2] == 0.0) == (want[2] == 0.0)
    assert eq.nash is Nash.global_


def test_entry_slope_and_idle_profile(contest):
    # Derived from u_i = V_i x_i^r / sum_j x_j^r - x_i: at x_i = 0 with others spending X_-i, the marginal
    # payoff is V_i / X_-i - 1 for r = 1 and -1 for r > 1. Where nobody spends the module's documented
    # convention holds: shares 1/n and marginal payoff +1, so that profile fails the first-order conditions.
    x = jnp.asarray([0.0, 1.5, 2.5])
    for r, want in ((1.0, 6.0 / 4.0 - 1.0), (1.2, -1.0)):
        th = contest.theta({"v": [6.0, 5.0, 4.0], "r": r})
        assert float(contest.pseudo_gradient(x, th)[0]) == pytest.approx(want, abs=1e-12)
    th = contest.theta({"v": [6.0, 5.0, 4.0], "r": 1.2})
    zero = jnp.zeros(3)
    np.testing.assert_allclose(contest.payoff_vector(zero, th), [2.0, 5.0 / 3.0, 4.0 / 3.0], rtol=1e-14)
    np.testing.assert_allclose(contest.pseudo_gradient(zero, th), np.ones(3), rtol=1e-12)


def test_exponent_below_the_bound_keeps_the_symmetric_equilibrium(contest):
    # Perez-Castrillo & Verdier (1992), Public Choice 73 (memory): symmetric x = r (n-1) V / n^2 is an
    # equilibrium iff r <= n / (n-1) = 1.5. r = 1.2, V = 6: x = 1.6, labelled global.
    v, r = 6.0, 1.2
    sol = equipoise.solve(contest, {"v": [v] * 3, "r": r}, starts=32, stability=False)
    assert find(sol, np.full(3, r * 2 * v / 9)).nash is Nash.global_
    # First-order points with one player out: the others play the two-player symmetric contest,
    # x = r V / 4 = 1.8 (same formula, n = 2); the outsider sits at a strict local optimum (r > 1: zero
    # marginal gain from entering) yet gains by entering, by exactly the best entry payoff (scipy).
    for k in range(3):
        point = np.full(3, r * v / 4)
        point[k] = 0.0
        eq = find(sol, point)
        assert eq.nash is Nash.local
        assert eq.gains[k] == pytest.approx(best_entry(v, [r * v / 4] * 2, r), rel=1e-6)
        assert eq.gains[k] > 0.1
    no_spurious_points(sol, v)


def test_exponent_above_the_bound_breaks_the_symmetric_equilibrium(contest):
    # Perez-Castrillo & Verdier (1992) (memory): r = 1.6 > 1.5, the symmetric first-order point
    # x = r (n-1) V / n^2 = 32/15 pays V/3 - x = -2/15 < 0, so dropping to zero gains 2/15. It is still a
    # strict local optimum for each player (the own second derivative there has the sign of
    # (r - 1) n - 2 r = -1.4 < 0, derived), so verification labels it `local`, never `global`.
    v, r = 6.0, 1.6
    sol = equipoise.solve(contest, {"v": [v] * 3, "r": r}, starts=32, stability=False)
    eq = find(sol, np.full(3, r * 2 * v / 9))
    assert eq.nash is Nash.local
    np.testing.assert_allclose(eq.gains, np.full(3, 2.0 / 15.0), rtol=1e-9)
    # Pure equilibria remain with one player out: the other two at r V / 4 = 2.4 (n = 2 satisfies
    # r <= 2), and the outsider's best entry payoff (scipy) is not positive.
    assert best_entry(v, [r * v / 4] * 2, r) == 0.0
    for k in range(3):
        point = np.full(3, r * v / 4)
        point[k] = 0.0
        assert find(sol, point).nash is Nash.global_
    assert not [e for e in sol.equilibria if e.nash is Nash.global_ and np.min(e.x) > 1e-6]
    no_spurious_points(sol, v)


def test_tullock_input_errors():
    with pytest.raises(InputError, match="values: expected a list of at least two"):
        tullock([5.0])
    with pytest.raises(InputError, match="values: expected positive prize values"):
        tullock([5.0, -1.0])
    with pytest.raises(InputError, match="r: expected a positive exponent"):
        tullock([5.0, 4.0], r=0.0)


# ---------------------------------------------------------------- proportional allocation
def marginal_utility(d, a, s):
    """U'(d) for U(d) = a s log(1 + d/s)."""
    return a * s / (s + d)


def test_price_anticipating_conditions(market):
    # Johari & Tsitsiklis (2004), "Efficiency loss in a network resource allocation game", Math. Oper.
    # Res. 29(3): from u_r = U_r(C w_r / W) - w_r, a bidder with w_r > 0 has U_r'(d_r)(1 - w_r / W) C / W = 1,
    # one at w_r = 0 has U_r'(0) C / W <= 1. Instance solved by hand: a = (4, 2, 0.5), s = (1, 2, 1), C = 3
    # gives W = 2, w = (10/9, 8/9, 0) (bidder 3: 0.5 * 1.5 = 0.75 <= 1).
    a, s, C = np.array([4.0, 2.0, 0.5]), np.array([1.0, 2.0, 1.0]), 3.0
    eq = solve_one(market, {"a": a.tolist(), "s": s.tolist(), "capacity": C})
    np.testing.assert_allclose(eq.x, [10.0 / 9.0, 8.0 / 9.0, 0.0], rtol=1e-10, atol=1e-12)
    W = eq.x.sum()
    d = C * eq.x / W
    lhs = marginal_utility(d, a, s) * (1.0 - eq.x / W) * C / W
    np.testing.assert_allclose(lhs[:2], [1.0, 1.0], rtol=1e-10)
    assert marginal_utility(0.0, a[2], s[2]) * C / W <= 1.0
    assert eq.nash is Nash.global_
    # The same two conditions solved by scipy from another start.
    def conditions(w):
        total = w.sum()
        return marginal_utility(C * w / total, a[:2], s[:2]) * (1.0 - w / total) * C / total - 1.0
    root = scipy.optimize.root(conditions, [0.5, 0.5], tol=1e-14)
    assert root.success
    np.testing.assert_allclose(eq.x[:2], root.x, rtol=1e-10)


def test_best_allocation_matches_scipy():
    # The water-filling optimum against scipy.optimize.minimize (SLSQP) on the simplex sum d = C.
    rng = np.random.default_rng(11)
    for _ in range(5):
        a, s, C = rng.uniform(0.2, 5.0, 3), np.exp(rng.uniform(-2.0, 7.0, 3)), rng.uniform(0.5, 10.0)
        total = lambda d: -np.sum(a * s * np.log1p(np.maximum(d, 0.0) / s))  # noqa: E731
        res = scipy.optimize.minimize(total, np.full(3, C / 3), method="SLSQP", bounds=[(0.0, C)] * 3,
                                      constraints=[{"type": "eq", "fun": lambda d: d.sum() - C}],
                                      options={"ftol": 1e-14, "maxiter": 500})
        assert res.success
        assert -total(best_allocation(a, s, C)) == pytest.approx(-res.fun, rel=1e-8)
        assert -total(best_allocation(a, s, C)) >= -res.fun - 1e-12


def test_efficiency_at_least_three_quarters(market):
    # Johari & Tsitsiklis (2004): at the (unique) Nash equilibrium aggregate utility is at least 3/4 of the
    # optimum, for concave increasing utilities. 20 random instances, from near-linear (s up to 1000) to
    # strongly saturating utilities.
    rng = np.random.default_rng(7)
    ratios = []
    for _ in range(20):
        params = {"a": rng.uniform(0.2, 5.0, 3).tolist(), "s": np.exp(rng.uniform(-2.3, 6.9, 3)).tolist(),
                  "capacity": float(rng.uniform(0.5, 10.0))}
        eq = solve_one(market, params, starts=8)
        assert eq.nash is Nash.global_
        eff = allocation_efficiency(market, eq.x, params)
        assert eff.optimum >= eff.achieved - 1e-12  # the optimum is a maximum
        ratios.append(eff.ratio)
    assert min(ratios) >= 0.75
    assert max(ratios) <= 1.0 + 1e-12


def test_allocation_efficiency_errors(market, contest):
    with pytest.raises(InputError, match="game: expected a game made by proportional_allocation"):
        allocation_efficiency(contest, [1.0, 1.0, 1.0])
    with pytest.raises(InputError, match="bids: expected 3 non-negative bids"):
        allocation_efficiency(market, [0.0, 0.0, 0.0])
    with pytest.raises(InputError, match="s: expected a number or 2 saturation scales"):
        proportional_allocation([1.0, 2.0], s=[1.0, 2.0, 3.0])


# ---------------------------------------------------------------- zero-sum quadratic
def hand_eigenvalues(a, b, c):
    """Eigenvalues of J = [[-a, -b], [b, -c]] by the quadratic formula: tr = -(a + c), det = a c + b^2."""
    tr, det = -(a + c), a * c + b * b
    root = np.sqrt(complex(tr * tr - 4 * det))
    return np.array([(tr + root) / 2, (tr - root) / 2])


@pytest.mark.parametrize("a, b, c, verdict", [(1.0, 1.0, 1.0, "stable"), (2.0, 0.4, 3.0, "stable"),
                                              (0.0, 1.0, 0.0, "borderline"), (-2.0, 2.0, 1.0, "unstable")])
def test_unique_origin_and_equal_speeds(saddle, a, b, c, verdict):
    # J = [[-a, -b], [b, -c]] is constant with det = a c + b^2 != 0: the origin is the only first-order point.
    sol = equipoise.solve(saddle, {"a": a, "b": b, "c": c}, starts=8)
    assert len(sol.equilibria) == 1
    eq = sol.equilibria[0]
    np.testing.assert_allclose(eq.x, [0.0, 0.0], atol=1e-12)
    np.testing.assert_allclose(eq.jacobian, [[-a, -b], [b, -c]], atol=1e-12)
    top = float(np.max(hand_eigenvalues(a, b, c).real))
    assert eq.stability.equal_speeds["verdict"] == verdict
    assert eq.stability.equal_speeds["abscissa"] == pytest.approx(top, abs=1e-12)
    # Convex-concave (a, c >= 0): the origin is a saddle point, a Nash equilibrium (von Neumann's
    # minimax theorem); a < 0 makes the minimiser's own problem concave: own Hessian of -f is -a > 0.
    assert eq.nash is (Nash.global_ if a >= 0 and c >= 0 else Nash.not_nash)


def test_timescale_separation_threshold(saddle):
    # Fiez & Ratliff (2021), "Local convergence analysis of gradient descent ascent with finite timescale
    # separation", ICLR (memory; instance in REFERENCES.md): f = -x^2 + 2xy - y^2/2, x minimises, y
    # maximises: tau* = 2. By hand with K = diag(1, tau): KJ = [[2, -2], [2 tau, -tau]], trace 2 - tau,
    # determinant 2 tau > 0, so stable iff tau > 2; at tau = 2 the eigenvalues are +-2i.
    eq = equipoise.solve(saddle, {"a": -2.0, "b": 2.0, "c": 1.0}, starts=8).equilibria[0]
    ratios = eq.stability.player_speeds.stable_ratios
    assert len(ratios) == 1 and ratios[0][1] is None
    assert ratios[0][0] == pytest.approx(2.0, rel=1e-9)
    J = eq.jacobian
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(np.diag([1.0, 2.0]) @ J).imag), [-2.0, 2.0], atol=1e-12)
    assert np.max(np.linalg.eigvals(np.diag([1.0, 2.1]) @ J).real) < 0
    assert np.max(np.linalg.eigvals(np.diag([1.0, 1.9]) @ J).real) > 0
    assert eq.own_curvature[0] == pytest.approx(2.0, abs=1e-12)  # -f is convex in x: not a Nash point
    assert eq.nash is Nash.not_nash


def test_matrix_actions_jacobian():
    # f = x'Ax/2 + x'By - y'Cy/2: J = [[-A_s, -B], [B', -C_s]] (derived; A_s, C_s symmetric parts).
    rng = np.random.default_rng(3)
    A, B, C = rng.normal(size=(2, 2)), rng.normal(size=(2, 3)), rng.normal(size=(3, 3))
    game = minmax_quadratic(A, B, C, names=["gen", "critic"])
    assert game.sizes == (2, 3)
    J = np.asarray(game.jacobian(jnp.asarray(rng.normal(size=5)), game.theta()))
    want = np.block([[-(A + A.T) / 2, -B], [B.T, -(C + C.T) / 2]])
    np.testing.assert_allclose(J, want, atol=1e-12)
    with pytest.raises(InputError, match="b: expected a 2 x 3 matrix"):
        minmax_quadratic(A, B.T, C)


# ---------------------------------------------------------------- network games
def test_two_players_delta_2(pair):
    # Bramoulle, Kranton & D'Amours (2014), "Strategic interaction and networks", AER 104(3): two players,
    # delta = 2: exactly (1, 0), (0, 1) and (1/3, 1/3). Equal-speed stability by hand: at a corner the one
    # free coordinate has J = -1; inside, J = [[-1, -2], [-2, -1]] has eigenvalues 1 and -3.
    sol = equipoise.solve(pair, {"delta": 2.0}, starts=4, all_equilibria=True)
    got = np.array([e.x for e in sol.equilibria])
    np.testing.assert_allclose(got, [[0.0, 1.0], [1 / 3, 1 / 3], [1.0, 0.0]], atol=1e-10)
    assert [e.nash for e in sol.equilibria] == [Nash.global_] * 3
    assert sol.stats["deflation"]["exhausted"]
    verdicts = [e.stability.equal_speeds["verdict"] for e in sol.equilibria]
    assert verdicts == ["stable", "unstable", "stable"]
    assert sol.equilibria[1].stability.equal_speeds["abscissa"] == pytest.approx(1.0, abs=1e-12)


def test_unique_below_the_eigenvalue_bound(pair):
    # Bramoulle, Kranton & D'Amours (2014): delta |lambda_min(G)| < 1 gives a unique equilibrium; here
    # lambda_min = -1, delta = 0.5, and (I + delta G) x = 1 gives x = 2/3 each.
    sol = equipoise.solve(pair, {"delta": 0.5}, starts=4, all_equilibria=True, stability=False)
    assert len(sol.equilibria) == 1
    np.testing.assert_allclose(sol.equilibria[0].x, [2 / 3, 2 / 3], rtol=1e-10)


def test_network_input_errors():
    with pytest.raises(InputError, match="G: expected a zero diagonal"):
        network_game([[1.0, 1.0], [1.0, 0.0]])
    with pytest.raises(InputError, match="G: expected a square matrix"):
        network_game([[0.0, 1.0, 0.0], [1.0, 0.0, 1.0]])


# ---------------------------------------------------------------- public goods
def voluntary_gifts(a, wealth):
    """Equilibrium gifts for u_i = w_i - x_i + a_i log(1 + X), derived from the first-order conditions
    a_i / (1 + X) <= 1 with equality where 0 < x_i < w_i: in decreasing order of a_i each donor tops the
    total up towards a_i - 1 as far as its wealth allows, and the rest give nothing (Bergstrom, Blume &
    Varian 1986, "On the private provision of public goods", J. Public Econ. 29 (memory): contributors
    are the highest-valuation donors)."""
    a, wealth = np.asarray(a, dtype=float), np.asarray(wealth, dtype=float)
    x, total = np.zeros_like(a), 0.0
    for i in np.argsort(-a):
        want = a[i] - 1.0 - total
        if want <= 0:
            break
        x[i] = min(want, wealth[i])
        total += x[i]
    return x


@pytest.mark.parametrize("a, want", [
    ([3.0, 5.0, 4.0], [0.0, 4.0, 0.0]),   # only the top donor gives, X* = max a - 1 = 4
    ([6.0, 5.0, 2.0], [2.0, 2.0, 0.0]),   # donor 1's wealth binds at 2; donor 2 tops up to 5 - 1 = 4
    ([9.0, 8.0, 7.0], [2.0, 5.0, 0.0]),   # donor 1 capped at 2, donor 2 tops up to 7 > a_3 - 1 = 6
    ([0.8, 0.5, 0.9], [0.0, 0.0, 0.0]),   # every a_i <= 1: nobody gives
])
def test_highest_valuations_give(donors, a, want):
    # Bergstrom, Blume & Varian (1986) (memory), instances worked by hand with voluntary_gifts' rule.
    np.testing.assert_allclose(voluntary_gifts(a, [2.0, 10.0, 10.0]), want, atol=0)
    eq = solve_one(donors, {"a": a})
    np.testing.assert_allclose(eq.x, want, atol=1e-10)
    assert eq.nash is Nash.global_


def test_random_valuations(donors):
    # Bergstrom, Blume & Varian (1986) (memory) via voluntary_gifts, distinct valuations.
    rng = np.random.default_rng(5)
    for _ in range(6):
        a = rng.uniform(0.5, 14.0, 3)
        eq = solve_one(donors, {"a": a.tolist()})
        np.testing.assert_allclose(eq.x, voluntary_gifts(a, [2.0, 10.0, 10.0]), atol=1e-9)


def test_public_good_without_wealth_limits():
    # Bergstrom, Blume & Varian (1986) (memory): without wealth limits the top donor alone gives a_max - 1,
    # here (0, 4, 0). Checked without a solve (another game would compile): the marginal payoffs
    # a_i / (1 + X) - 1 there are (-2/5, 0, -1/5), so the KKT conditions hold with gifts unbounded above.
    game = public_good([3.0, 5.0, 4.0])
    assert np.all(np.isinf(game.upper))
    F = np.asarray(game.pseudo_gradient(jnp.asarray([0.0, 4.0, 0.0]), game.theta()))
    np.testing.assert_allclose(F, [3.0 / 5.0 - 1.0, 0.0, 4.0 / 5.0 - 1.0], atol=1e-15)
    with pytest.raises(InputError, match="wealth: expected 3 positive amounts"):
        public_good([3.0, 5.0, 4.0], wealth=[1.0, 2.0])


# ---------------------------------------------------------------- scenario files
@pytest.mark.parametrize("path, name, players", [
    ("models/tullock_fenwick_grants.py", "tullock", 4),
    ("models/allocation_marrow_valley.py", "proportional_allocation", 3),
    ("models/minmax_loom_critic.py", "minmax_quadratic", 2),
    ("models/network_coastal_lookouts.py", "network_game", 5),
    ("models/public_good_hollis_green.py", "public_good", 4),
])
def test_scenarios_load(path, name, players):
    game = equipoise.load_game(path)
    assert game.name == name and len(game.players) == players

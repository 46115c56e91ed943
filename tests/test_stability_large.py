"""Stability labels of large Jacobians: the O(n^3) Lyapunov candidate and the size limit.

The Lyapunov equation X J + J^T X = -I is checked against scipy.linalg.solve_continuous_lyapunov
(Bartels-Stewart). Above the search size only cheap evidence runs: a verified closed-form
candidate still proves robustness, equal-speed instability still proves fragility, and the
rest is reported as undecided, never guessed.
"""

import numpy as np
import pytest
from scipy.linalg import block_diag, solve_continuous_lyapunov

from equipoise.stability import classify
from equipoise.stability._classify import MAX_SEARCH_SIZE
from equipoise.stability._search import lyapunov_solution


@pytest.mark.parametrize("n", [3, 40])
def test_lyapunov_solution_matches_scipy(n):
    A = np.random.default_rng(n).normal(size=(n, n))
    J = A - (np.max(np.linalg.eigvals(A).real) + 0.5) * np.eye(n)
    X = np.asarray(lyapunov_solution(J))
    ref = solve_continuous_lyapunov(J.T, -np.eye(n))
    np.testing.assert_allclose(X, ref, rtol=0, atol=1e-11 * np.max(np.abs(ref)))


def test_large_diagonally_dominant_jacobian_is_robust():
    # A negative diagonal dominating its row sums: diagonal Lyapunov matrices exist (common practice).
    n = 80
    rng = np.random.default_rng(1)
    J = rng.uniform(-1.0, 1.0, size=(n, n)) / n
    np.fill_diagonal(J, -2.0)
    rep = classify(J, [8] * 10)
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "robust"
    assert rep.player_speeds.verdict == "robust"


def test_large_unstable_jacobian_is_fragile_at_equal_speeds():
    n = 60
    J = -np.eye(n)
    J[0, 0] = 0.5
    rep = classify(J)
    assert rep.equal_speeds["verdict"] == "unstable"
    assert rep.coordinate_speeds.verdict == "fragile"


def test_large_undecidable_jacobian_says_undecided():
    # Twenty copies of a 3 x 3 Hurwitz matrix that is not D-stable (see test_stability.py): the
    # truth is fragile, but above the search size nothing cheap proves either side.
    J3 = np.array([[-1.0, 0.0, -5.0], [-5.0, -1.0, 0.0], [0.0, -5.0, -9.0]])
    J = block_diag(*([J3] * 20))
    assert J.shape[0] > MAX_SEARCH_SIZE
    rep = classify(J)
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "undecided"
    assert f"up to {MAX_SEARCH_SIZE} free actions (here 60)" in rep.coordinate_speeds.method

"""Stability labels against the matrix-stability literature's criteria and worked instances.

Instances marked "worked instance" are the ones constructed from the criteria in the
project's reference notes (Johnson 1974, "Second, third and fourth order D-stability",
J. Res. NBS 78B; Cain 1976, "Real, 3x3, D-stable matrices", J. Res. NBS 80B — both
criteria from memory there) and checked here independently with numpy eigenvalues.
"""

import numpy as np
import pytest

import equipoise  # noqa: F401  (float64 on)
from equipoise.stability import classify
from equipoise.stability._classify import speeds_abscissa
from equipoise.stability._ratios import stable_ratio_intervals


def _abscissa(J, d):
    return np.max(np.linalg.eigvals(np.asarray(d)[:, None] * np.asarray(J)).real)


def test_hurwitz_but_not_dstable_2x2():
    # Worked instance: A = [[1,-2],[3,-4]] has eigenvalues -1, -2; D = diag(d, 1) is unstable for d > 4.
    J = np.array([[1.0, -2.0], [3.0, -4.0]])
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(J).real), [-2.0, -1.0], atol=1e-12)
    rep = classify(J)
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "fragile"
    d = np.asarray(rep.coordinate_speeds.certificate["speeds"])
    assert _abscissa(J, d) > 1e-6 * np.linalg.norm(d[:, None] * J)
    assert rep.hicksian is False  # a11 = 1 > 0: -J has a negative 1x1 minor


@pytest.mark.parametrize(
    "J, robust",
    [
        # 2x2 criterion (Johnson 1974, from memory): a11 <= 0, a22 <= 0, a11 + a22 < 0, det > 0.
        ([[-1.0, 2.0], [-3.0, -1.0]], True),   # all four hold
        ([[0.0, 1.0], [-1.0, -1.0]], True),    # a11 = 0 allowed
        ([[0.5, 1.0], [-3.0, -2.0]], False),   # a11 > 0 (Hurwitz: tr -1.5, det 2)
        ([[-1.0, 2.0], [1.0, -1.0]], False),   # det < 0
    ],
)
def test_2x2_criterion_both_sides(J, robust):
    rep = classify(J)
    assert rep.coordinate_speeds.verdict == ("robust" if robust else "fragile")
    if not robust:
        d = np.asarray(rep.coordinate_speeds.certificate["speeds"])
        assert _abscissa(J, d) > 0


def test_3x3_hicksian_hurwitz_not_dstable_interval():
    # Worked instance: -A is a P-matrix, A is Hurwitz, 3 + 3 + 3 < sqrt(134) (Cain criterion fails);
    # D = diag(g, g, 1) is unstable exactly for g in ((89 - sqrt 6625)/4, (89 + sqrt 6625)/4).
    J = np.array([[-1.0, 0.0, -5.0], [-5.0, -1.0, 0.0], [0.0, -5.0, -9.0]])
    rep = classify(J)
    assert rep.hicksian is True
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "fragile"
    lo, hi = (89 - np.sqrt(6625)) / 4, (89 + np.sqrt(6625)) / 4
    np.testing.assert_allclose([lo, hi], [1.901474, 42.598526], atol=1e-6)
    # Independent scan of g: instability exactly inside the interval.
    for g in (lo * 0.99, hi * 1.01):
        assert _abscissa(J, [g, g, 1.0]) < 0
    for g in (lo * 1.01, 9.0, hi * 0.99):
        assert _abscissa(J, [g, g, 1.0]) > 0
    d = np.asarray(rep.coordinate_speeds.certificate["speeds"])
    assert speeds_abscissa(J, d) > 1e-6


def test_3x3_dstable_without_diagonal_lyapunov():
    # Worked instance: Cain sum 8.045 > 1 (D-stable), yet X below is positive definite with
    # diag(A X) = (3, 0, 0) >= 0, which rules out any diagonal Lyapunov matrix.
    J = np.array([[-1.0, -2.0, 2.0], [3.0, -2.0, 1.0], [1.0, 3.0, -3.0]])
    X = np.array([[23.0, 14.0, 27.0], [14.0, 37.0, 32.0], [27.0, 32.0, 41.0]])
    assert np.linalg.eigvalsh(X)[0] > 0
    np.testing.assert_allclose(np.diag(J @ X), [3.0, 0.0, 0.0], atol=1e-12)
    rep = classify(J)
    assert rep.coordinate_speeds.verdict == "robust"
    assert rep.coordinate_speeds.method.startswith("exact")
    rng = np.random.default_rng(0)  # brute-force scan of positive diagonals
    for d in np.exp(rng.uniform(-6, 6, size=(2000, 3))):
        assert _abscissa(J, d) < 0


def test_symmetric_negative_definite_is_robust_everywhere():
    # Common practice: for symmetric J, Hurwitz, D-stability and diagonal stability coincide.
    rng = np.random.default_rng(1)
    M = rng.normal(size=(4, 4))
    J = -(M @ M.T + 0.5 * np.eye(4))
    rep = classify(J, blocks=[2, 2])
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "robust"
    assert rep.player_speeds.verdict == "robust"


def test_bilinear_minmax_is_borderline():
    # Common practice: simultaneous gradient play on f = xy has purely imaginary eigenvalues.
    rep = classify([[0.0, 1.0], [-1.0, 0.0]])
    assert rep.equal_speeds["verdict"] == "borderline"
    assert rep.player_speeds.verdict == "undecided"


def test_two_player_critical_ratio_matches_scan():
    # Fiez & Ratliff (2021), "Local convergence analysis of gradient descent ascent with finite
    # timescale separation", ICLR (memory): f = -x^2 + 2xy - y^2/2 has tau* = 2.
    # Players' gradients: x maximises -f, y maximises f.
    J = np.array([[2.0, -2.0], [2.0, -1.0]])
    ratios = stable_ratio_intervals(J, 1)
    assert len(ratios) == 1 and ratios[0][1] is None
    np.testing.assert_allclose(ratios[0][0], 2.0, rtol=1e-9)
    taus = np.linspace(0.05, 6.0, 400)
    stable = [_abscissa(J, [1.0, t]) < -1e-12 for t in taus]
    np.testing.assert_array_equal(stable, taus > 2.0)
    rep = classify(J)
    assert rep.player_speeds.stable_ratios == ratios


def test_cournot_best_response_radius():
    # Theocharis (1960), Review of Economic Studies 27(2): linear Cournot best responses have
    # spectral radius 1/2, 1, 3/2 for n = 2, 3, 4; gradient adjustment J = -b(I + 11') is stable.
    b = 2.0
    for n, rho, verdict in ((2, 0.5, "stable"), (3, 1.0, "neutral"), (4, 1.5, "unstable")):
        J = -b * (np.eye(n) + np.ones((n, n)))
        rep = classify(J)
        np.testing.assert_allclose(rep.best_response["spectral_radius"], rho, rtol=1e-9)
        assert rep.best_response["verdict"] == verdict
        assert rep.equal_speeds["verdict"] == "stable"


def test_learning_rate_limit_formula():
    # Common practice: x <- x + eta J x is stable iff |1 + eta lambda| < 1 for every eigenvalue.
    J = np.array([[-1.0, 3.0], [-3.0, -1.0]])  # eigenvalues -1 +- 3i
    rep = classify(J)
    np.testing.assert_allclose(rep.learning_rate_limit, 2.0 / 10.0, rtol=1e-12)
    lam = np.linalg.eigvals(J)
    assert np.max(np.abs(1 + 0.199 * lam)) < 1 < np.max(np.abs(1 + 0.201 * lam))

"""Deterministic stability checks, each named by the fact it rests on.

Sources are the project's reference notes (REFERENCES.md, "Matrix stability") and the design
notes (DESIGN.md, "Adjustment dynamics and stability"); a statement marked "(memory)" there is
marked "from memory" here. Every matrix is invented for this file, and every expected verdict
is also checked here with numpy before the library is asked.
"""

from __future__ import annotations

import contextlib
import io
import json
import warnings
from pathlib import Path

import numpy as np
import pytest

import equipoise
from equipoise.cli import main
from equipoise.stability import classify, classify_free

MODELS_DIR = Path(__file__).resolve().parents[1] / "models"
NETWORK = MODELS_DIR / "network_effort_triangle.py"

# The library's documented certificate threshold (equipoise.stability._classify.FRAGILE_TOL).
FRAGILE_TOL = 1e-6
# Common practice: float64 agreement of a computed eigenvalue with its closed form.
EIG_RTOL = 1e-9
# Common practice: eigenvalues of a non-normal triangular D J with speeds spread over 1e8 lose
# digits (about condition number times machine epsilon); 1e-6 relative is still tight.
SCAN_RTOL = 1e-6
# Common practice: Newton on a linear first-order system lands within ~1e-14; 1e-9 is safe.
SOLVE_RTOL = 1e-9


def _abscissa(M) -> float:
    return float(np.max(np.linalg.eigvals(np.asarray(M, dtype=float)).real))


def _destabilises(J, speeds, blocks=None) -> bool:
    k = np.asarray(speeds, dtype=float)
    if blocks is not None:
        k = np.repeat(k, blocks)
    assert np.all(k > 0) and np.all(np.isfinite(k))
    M = k[:, None] * np.asarray(J, dtype=float)
    return _abscissa(M) > FRAGILE_TOL * np.linalg.norm(M)


def _dscan(n, count=2000, seed=7):
    """Log-uniform positive speeds in [1e-4, 1e4]^n (a brute-force scan, common practice)."""
    return 10.0 ** np.random.default_rng(seed).uniform(-4.0, 4.0, size=(count, n))


# ---------------------------------------------------------------- triangular
TRI3 = np.array([[-1.0, 0.0, 0.0], [4.0, -2.0, 0.0], [-3.0, 5.0, -0.5]])
TRI4 = np.array([[-1.0, 0.0, 0.0, 0.0], [3.0, -2.0, 0.0, 0.0], [-2.0, 4.0, -1.0, 0.0],
                 [1.0, -3.0, 2.0, -0.5]])
# Strongly non-normal: off-diagonal entries up to 18 times the smallest diagonal entry.
TRI4_STEEP = np.array([[-1.0, 0.0, 0.0, 0.0], [8.0, -2.0, 0.0, 0.0], [-6.0, 9.0, -1.0, 0.0],
                       [5.0, -7.0, 9.0, -0.5]])


def _check_triangular_is_dstable(J):
    # Derived: D J is triangular, so its eigenvalues are d_i J_ii < 0 for every positive D.
    for d in _dscan(J.shape[0], count=200):
        np.testing.assert_allclose(np.sort(np.linalg.eigvals(d[:, None] * J).real),
                                   np.sort(d * np.diag(J)), rtol=SCAN_RTOL)


@pytest.mark.parametrize("J, blocks", [(TRI3, None), (TRI3, [2, 1]), (TRI4, None), (TRI4, [2, 2]),
                                       (TRI4.T, [1, 2, 1])],
                         ids=["3x3", "3x3-blocks-2-1", "4x4", "4x4-blocks-2-2", "4x4-upper-blocks-1-2-1"])
def test_triangular_negative_diagonal_is_robust(J, blocks):
    # REFERENCES (Matrix stability, from memory): triangular A with negative diagonal -- Hurwitz,
    # D-stable and diagonally stable coincide.
    _check_triangular_is_dstable(J)
    rep = classify(J, blocks)
    assert rep.equal_speeds["verdict"] == "stable"
    np.testing.assert_allclose(rep.equal_speeds["abscissa"], np.max(np.diag(J)), rtol=EIG_RTOL)
    assert rep.coordinate_speeds.verdict == "robust"
    assert rep.player_speeds.verdict == "robust"
    # -J triangular with positive diagonal: every principal minor is a product of diagonal
    # entries, so -J is a P-matrix (derived).
    assert rep.hicksian is True


def test_steep_triangular_is_robust():
    _check_triangular_is_dstable(TRI4_STEEP)
    # Derived and checked here: geometric weights P = diag(1, 1e-2, 1e-4, 1e-6) already give
    # P J + J^T P negative definite, so a diagonal Lyapunov certificate exists.
    P = np.diag(1e-2 ** np.arange(4))
    assert np.linalg.eigvalsh(P @ TRI4_STEEP + TRI4_STEEP.T @ P)[-1] < 0
    rep = classify(TRI4_STEEP)
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "robust"


# ---------------------------------------------------------------- Metzler
METZLER3 = np.array([[-3.0, 1.0, 0.5], [1.0, -2.0, 0.5], [0.2, 0.3, -1.0]])
METZLER4 = np.array([[-3.0, 1.0, 0.5, 0.2], [1.0, -2.0, 0.5, 0.1], [0.2, 0.3, -1.0, 0.4],
                     [0.5, 0.0, 0.3, -2.0]])


@pytest.mark.parametrize("J, blocks", [(METZLER3, None), (METZLER3, [1, 2]), (METZLER4, [2, 2]),
                                       (METZLER4, [2, 1, 1])],
                         ids=["3x3", "3x3-blocks-1-2", "4x4-blocks-2-2", "4x4-blocks-2-1-1"])
def test_stable_metzler_is_robust(J, blocks):
    # Berman & Plemmons, Nonnegative Matrices in the Mathematical Sciences, ch. 6 (from memory):
    # a Metzler matrix (nonnegative off-diagonal) is Hurwitz iff D-stable iff diagonally stable.
    off = ~np.eye(J.shape[0], dtype=bool)
    assert np.all(J[off] >= 0)
    assert _abscissa(J) < 0
    rep = classify(J, blocks)
    assert rep.equal_speeds["verdict"] == "stable"
    assert rep.coordinate_speeds.verdict == "robust"
    assert rep.player_speeds.verdict == "robust"
    for d in _dscan(J.shape[0], count=500):  # brute-force confirmation of the verdict
        assert _abscissa(d[:, None] * J) < 0


# ---------------------------------------------------------------- negative principal minor
# Constructed for this file: Hurwitz (checked below), every diagonal entry negative, and the
# only negative principal minor of -J is the one on S = {2, 3}.
NEG_MINOR = np.array([[-4.0, 4.0, 2.0, -3.0], [-4.0, -3.0, 3.0, -1.0], [-3.0, -1.0, -3.0, -4.0],
                      [4.0, 2.0, -3.0, -2.0]])
S = [2, 3]


def test_negative_principal_minor_gives_fast_on_S_certificate():
    # Derived by hand: -J on {2, 3} is [[3, 4], [3, 2]], determinant 3*2 - 4*3 = -6.
    np.testing.assert_allclose(np.linalg.det(-NEG_MINOR[np.ix_(S, S)]), -6.0, rtol=EIG_RTOL)
    assert _abscissa(NEG_MINOR) < 0
    assert np.all(np.diag(NEG_MINOR) < 0)
    rep = classify(NEG_MINOR)
    assert rep.equal_speeds["verdict"] == "stable"
    v = rep.coordinate_speeds
    # DESIGN (Cross 1978, from memory): D-stable => -J in P0+; a negative minor on S yields
    # destabilising speeds, fast on S and slow elsewhere.
    assert v.verdict == "fragile"
    assert "principal minor" in v.method
    k = np.asarray(v.certificate["speeds"])
    assert _destabilises(NEG_MINOR, k)
    fast = np.zeros(4, dtype=bool)
    fast[S] = True
    assert np.all(k[fast] == k.max()) and np.all(k[~fast] < k.max())
    assert rep.hicksian is False  # a negative principal minor of -J (the definition)


def test_negative_principal_minor_on_a_player_block_makes_per_player_speeds_fragile():
    # Derived: S = {2, 3} is exactly the second player's block under blocks [2, 2], so making
    # that player fast is a per-player speed vector and the same argument applies.
    rep = classify(NEG_MINOR, [2, 2])
    assert rep.player_speeds.verdict == "fragile"
    assert _destabilises(NEG_MINOR, rep.player_speeds.certificate["speeds"], [2, 2])
    ratios = rep.player_speeds.stable_ratios
    assert isinstance(ratios, list) and ratios != [[None, None]]
    # Stable at tau = k2/k1 = 1 (J Hurwitz), so 1 lies in a reported interval.
    assert any((lo is None or lo < 1.0) and (hi is None or hi > 1.0) for lo, hi in ratios)


# ---------------------------------------------------------------- unstable at equal speeds
# Triangular with a positive diagonal entry: eigenvalues 1, -1, -2 (derived).
UNSTABLE3 = np.array([[1.0, 0.0, 0.0], [2.0, -1.0, 0.0], [0.0, 3.0, -2.0]])


def test_unstable_at_equal_speeds_is_fragile_with_unit_speeds():
    rep = classify(UNSTABLE3, [2, 1])
    assert rep.equal_speeds["verdict"] == "unstable"
    np.testing.assert_allclose(rep.equal_speeds["abscissa"], 1.0, rtol=EIG_RTOL)
    for v, count in ((rep.player_speeds, 2), (rep.coordinate_speeds, 3)):
        assert v.verdict == "fragile"
        assert v.certificate["speeds"] == [1.0] * count
        assert v.certificate["abscissa"] > FRAGILE_TOL
    # Derived: K J stays triangular with eigenvalue k1 * 1 > 0 for every speed ratio.
    assert rep.player_speeds.stable_ratios == []
    assert rep.learning_rate_limit is None  # no step size makes an unstable J converge


# ---------------------------------------------------------------- Cournot gradient adjustment
@pytest.mark.parametrize("n", [2, 3, 4, 5, 6])
def test_linear_cournot_gradient_adjustment_is_robust(n):
    # Theocharis (1960), Review of Economic Studies 27(2), and common practice: with linear
    # demand p = a - bQ, the game Jacobian is J = -b(I + 11'), symmetric negative definite
    # (eigenvalues -b, n-1 times, and -(n+1)b: derived), so all notions of stability coincide
    # (REFERENCES, symmetric A) -- gradient adjustment is stable at any speeds.
    b = 2.0
    J = -b * (np.eye(n) + np.ones((n, n)))
    np.testing.assert_allclose(np.sort(np.linalg.eigvalsh(J)), [-(n + 1) * b] + [-b] * (n - 1), rtol=EIG_RTOL)
    rep = classify(J)
    assert rep.equal_speeds["verdict"] == "stable"
    np.testing.assert_allclose(rep.equal_speeds["abscissa"], -b, rtol=EIG_RTOL)
    assert rep.coordinate_speeds.verdict == "robust"
    assert rep.player_speeds.verdict == "robust"
    assert rep.hicksian is True  # -J positive definite => every principal minor positive
    # Common practice: the step-size limit is min -2 Re(l) / |l|^2 = 2 / ((n + 1) b).
    np.testing.assert_allclose(rep.learning_rate_limit, 2.0 / ((n + 1) * b), rtol=EIG_RTOL)
    # Theocharis (1960): best-response spectral radius (n - 1) / 2.
    np.testing.assert_allclose(rep.best_response["spectral_radius"], (n - 1) / 2, rtol=EIG_RTOL)


# ---------------------------------------------------------------- classify_free
def test_classify_free_drops_bounded_coordinates_and_empty_players():
    # Derived (DESIGN: stability on the free coordinates): a coordinate held at a bound is
    # removed with its row and column; a player with no free coordinate is no longer a player.
    J = METZLER4
    cases = [
        ([1, 2, 1], [True, False, False, True], [0, 3], [1, 1]),    # middle player fully bound
        ([2, 1, 1], [False, False, True, True], [2, 3], [1, 1]),    # first player fully bound
        ([2, 1, 1], [True, False, True, True], [0, 2, 3], [1, 1, 1]),
        ([2, 1, 1], [True, True, False, True], [0, 1, 3], [2, 1]),
        ([2, 1, 1], [True, True, True, True], [0, 1, 2, 3], [2, 1, 1]),
    ]
    for blocks, free, keep, sub_blocks in cases:
        got = classify_free(J, blocks, free).to_dict()
        want = classify(J[np.ix_(keep, keep)], sub_blocks).to_dict()
        assert got == want, (blocks, free)


def test_classify_free_with_nothing_free_is_fixed_at_bounds():
    rep = classify_free(METZLER4, [2, 1, 1], [False] * 4)
    assert rep.equal_speeds == {"verdict": "stable", "abscissa": None}
    assert rep.player_speeds.verdict == "robust" and rep.coordinate_speeds.verdict == "robust"
    assert "bound" in rep.coordinate_speeds.method


# ---------------------------------------------------------------- solve attaches stability
def test_solve_cournot_attaches_stability():
    # Tirole (1988), The Theory of Industrial Organization, ch. 5: q_i = [a - (N+1) c_i +
    # sum_j c_j] / ((N+1) b) = (160 - 4 c_i) / 8 = 15, 10, 5 here.
    game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0])
    sol = equipoise.solve(game)
    assert len(sol.equilibria) == 1
    eq = sol.equilibria[0]
    np.testing.assert_allclose([eq.actions[p][0] for p in game.players], [15.0, 10.0, 5.0], rtol=SOLVE_RTOL)
    rep = eq.stability
    assert rep is not None
    assert rep.equal_speeds["verdict"] == "stable"
    # Derived: J = -b(I + 11') with b = 2, abscissa -b.
    np.testing.assert_allclose(rep.equal_speeds["abscissa"], -2.0, rtol=EIG_RTOL)
    assert rep.hicksian is True
    assert rep.player_speeds.verdict == "robust" and rep.coordinate_speeds.verdict == "robust"
    # Theocharis (1960): three linear Cournot firms are neutral under simultaneous best responses.
    assert rep.best_response["verdict"] == "neutral"
    np.testing.assert_allclose(rep.best_response["spectral_radius"], 1.0, rtol=EIG_RTOL)
    np.testing.assert_allclose(np.asarray(eq.jacobian), -2.0 * (np.eye(3) + np.ones((3, 3))), rtol=SOLVE_RTOL)


# ---------------------------------------------------------------- solve --json stability object
STABILITY_KEYS = {"equal_speeds", "player_speeds", "coordinate_speeds", "hicksian",
                  "learning_rate_limit", "best_response"}
SPEED_CLASS_KEYS = {"verdict", "method", "certificate"}


def test_solve_json_stability_object(monkeypatch):
    monkeypatch.setenv("EQUIPOISE_CACHE", "off")  # no compile cache outside the test run
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(["solve", str(NETWORK), "--json"])
    assert rc == 0, err.getvalue()
    doc = json.loads(out.getvalue())
    assert doc["equilibria"]
    delta = doc["params"]["delta"]
    for eq in doc["equilibria"]:
        st = dict(eq["stability"])
        names = list(doc["players"])
        acts0 = np.array([a for v in eq["actions"].values() for a in v])
        # The certificates' coordinates: the free ones, named by player.
        assert st.pop("coordinates") == [p for p, a in zip(names, acts0) if a > 1e-9]
        assert set(st) == STABILITY_KEYS
        assert set(st["equal_speeds"]) == {"verdict", "abscissa"}
        for cls in ("player_speeds", "coordinate_speeds"):
            assert SPEED_CLASS_KEYS <= set(st[cls])
            assert st[cls]["verdict"] in ("robust", "fragile", "undecided")
        assert set(st["hicksian"]) == {"verdict"}
        assert st["learning_rate_limit"] is None or st["learning_rate_limit"] > 0
        assert set(st["best_response"]) == {"verdict", "spectral_radius"}

        # Derived from the model (u_i = x_i - x_i^2/2 - delta x_i sum_j g_ij x_j on a
        # triangle): J = -(I + delta G) on the free coordinates. Common practice: an effort
        # below 1e-9 is at its lower bound of 0.
        acts = np.array([a for v in eq["actions"].values() for a in v])
        free = acts > 1e-9
        f = int(free.sum())
        G = np.ones((f, f)) - np.eye(f)
        want = float(np.max(np.linalg.eigvalsh(-(np.eye(f) + delta * G))))
        np.testing.assert_allclose(st["equal_speeds"]["abscissa"], want, rtol=EIG_RTOL)
        # Symmetric J: all notions coincide (REFERENCES, Matrix stability).
        expected = "robust" if want < 0 else "fragile"
        assert st["player_speeds"]["verdict"] == expected
        assert st["coordinate_speeds"]["verdict"] == expected
        if expected == "fragile":
            k = np.asarray(st["coordinate_speeds"]["certificate"]["speeds"])
            J = np.asarray(eq["jacobian"])[np.ix_(free, free)]
            assert _destabilises(J, k)
        # The JSON object is classify_free on the reported Jacobian (JSON round trip).
        rep = classify_free(eq["jacobian"], [1, 1, 1], free)
        assert json.loads(json.dumps(rep.to_dict())) == st
    assert {"robust", "fragile"} <= {eq["stability"]["coordinate_speeds"]["verdict"]
                                     for eq in doc["equilibria"]}


# ---------------------------------------------------------------- scale
WORKED = [np.array([[1.0, -2.0], [3.0, -4.0]]),
          np.array([[-1.0, 0.0, -5.0], [-5.0, -1.0, 0.0], [0.0, -5.0, -9.0]]),
          np.array([[-1.0, -2.0, 2.0], [3.0, -2.0, 1.0], [1.0, 3.0, -3.0]])]


@pytest.mark.parametrize("c", [1e-6, 1e6])
def test_verdicts_do_not_depend_on_units(c):
    # Derived: K (cJ) = c (KJ) for c > 0 has the same eigenvalue signs, so every verdict is the
    # same in any units. Instances: REFERENCES worked instances.
    for J in WORKED:
        a, b = classify(J), classify(c * J)
        for key in ("player_speeds", "coordinate_speeds"):
            assert getattr(a, key).verdict == getattr(b, key).verdict
        assert a.equal_speeds["verdict"] == b.equal_speeds["verdict"]
        np.testing.assert_allclose(b.equal_speeds["abscissa"], c * a.equal_speeds["abscissa"], rtol=EIG_RTOL)
        assert a.hicksian == b.hicksian


# ---------------------------------------------------------------- known failures
@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # the warning is the next test's subject
def test_zero_jacobian_is_not_robust():
    # Derived: K 0 = 0 has every eigenvalue 0, so it is Hurwitz for no speeds.
    rep = classify(np.zeros((2, 2)))
    assert rep.equal_speeds["verdict"] == "borderline"
    assert rep.coordinate_speeds.verdict != "robust"
    assert rep.player_speeds.verdict != "robust"


def test_zero_jacobian_gives_no_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        classify(np.zeros((2, 2)))


def test_singular_jacobian_gives_a_report():
    # Derived: eigenvalues 0, 0, -1; K J keeps the two zero eigenvalues for every K, so it is
    # borderline at equal speeds and Hurwitz for no speeds.
    rep = classify(np.diag([0.0, 0.0, -1.0]))
    assert rep.equal_speeds["verdict"] == "borderline"
    assert rep.coordinate_speeds.verdict != "robust"


def test_3x3_boundary_dstable_is_robust():
    # Derived: D J is block lower-triangular; its blocks are d3 * (-2) < 0 and D12 [[0, 1], [-3, -1]],
    # stable for every positive D12 by the 2x2 criterion (Johnson 1974, from memory: a11 = 0 <= 0,
    # a22 = -1 < 0, trace < 0, det = 3 > 0). REFERENCES (Cain 1976, from memory): equality in the
    # Cauchy-Schwarz sum is allowed when the infimum is not attained, as here (b11 = 0).
    J = np.array([[0.0, 1.0, 0.0], [-3.0, -1.0, 0.0], [1.0, -2.0, -2.0]])
    for d in _dscan(3):
        assert _abscissa(d[:, None] * J) < 0
    rep = classify(J)
    assert rep.coordinate_speeds.verdict == "robust"


def test_tiny_entry_gives_no_overflow_warning():
    J = np.array([[-1.0, 0.0], [1.0, 1e-190]])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rep = classify(J)
    # Derived: an eigenvalue 1e-190 is zero relative to |J| (the documented zero tolerance).
    assert rep.equal_speeds["verdict"] == "borderline"


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
def test_huge_scale_is_still_stable():
    # Derived: -1e200 I has eigenvalue -1e200; D(-cI) = -cD is Hurwitz for every positive D.
    rep = classify(-1e200 * np.eye(2))
    assert rep.equal_speeds["verdict"] == "stable"
    np.testing.assert_allclose(rep.equal_speeds["abscissa"], -1e200, rtol=EIG_RTOL)
    assert rep.coordinate_speeds.verdict == "robust"

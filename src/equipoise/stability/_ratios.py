r"""Exact stable speed ratios for two players (any action sizes).

With speeds :math:`K = \mathrm{blockdiag}(I_{m_1}, \tau I_{m_2})`,
:math:`KJ = J_1 + \tau J_2` (:math:`J_i` the rows of player :math:`i`). An
eigenvalue can cross the imaginary axis only where :math:`KJ` has two
eigenvalues summing to zero, i.e. where the Kronecker sum
:math:`KJ \otimes I + I \otimes KJ = A + \tau B` is singular: a generalised
eigenvalue problem. Stability is constant between consecutive real positive
roots, so testing one ratio inside each interval gives the exact stable set.
"""

from __future__ import annotations

import numpy as np

from ._spectral import ZERO_TOL

#: Ratios beyond this either way are taken as 0 or infinity: one block's rows are then
#: below float64 rounding of the other's, so a root there carries no information.
RATIO_RANGE = 1e12


def _kron_sum(M: np.ndarray) -> np.ndarray:
    eye = np.eye(M.shape[0])
    return np.kron(M, eye) + np.kron(eye, M)


def critical_ratios(J: np.ndarray, m1: int) -> np.ndarray:
    """Real positive ratios :math:`\\tau = k_2/k_1` where :math:`A + \\tau B` is singular."""
    J = np.asarray(J, dtype=float)
    J1 = J.copy()
    J1[m1:] = 0.0
    J2 = J - J1
    A, B = _kron_sum(J1), _kron_sum(J2)
    import scipy.linalg  # here, not at module level: scipy is slow to import and only two players need it

    with np.errstate(all="ignore"):
        w = scipy.linalg.eigvals(A, -B)
    w = w[np.isfinite(w)]
    real = w[np.abs(w.imag) <= 1e-7 * np.maximum(1.0, np.abs(w))].real
    keep = (real > 1.0 / RATIO_RANGE) & (real < RATIO_RANGE)
    return np.unique(real[keep])


def _stable_at(J: np.ndarray, m1: int, tau: float) -> bool:
    k = np.ones(J.shape[0])
    k[m1:] = tau
    k = k / k.max()  # the same ratio, without overflow at extreme tau
    M = k[:, None] * J
    norm = np.linalg.norm(M)
    if not np.isfinite(norm) or norm == 0:
        return False
    return bool(np.max(np.linalg.eigvals(M / norm).real) < -ZERO_TOL)


def probe_ratio(lo: float, hi: float) -> float:
    """A ratio inside ``(lo, hi)``: 1 when it lies inside (least sensitive to rounding), else log-central."""
    if lo < 1.0 < hi:
        return 1.0
    if lo == 0.0:
        return hi / 10.0
    if hi == np.inf:
        return lo * 10.0
    return float(np.sqrt(lo * hi))


def stable_ratio_intervals(J: np.ndarray, m1: int) -> list[list[float | None]]:
    """Intervals of :math:`k_2/k_1` for which :math:`KJ` is Hurwitz; ``None`` marks 0 or infinity."""
    roots = critical_ratios(J, m1)
    edges = [0.0, *roots.tolist(), np.inf]
    out: list[list[float | None]] = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        probe = probe_ratio(lo, hi)
        if _stable_at(J, m1, probe):
            if out and out[-1][1] == lo:
                out[-1][1] = hi
            else:
                out.append([lo, hi])
    return [[None if a == 0.0 else float(a), None if b == np.inf else float(b)] for a, b in out]

r"""Stability labels of one equilibrium's game Jacobian, each backed by a certificate.

Speed classes (``K`` positive diagonal, ``J`` the game Jacobian):

* equal speeds, ``K = I``: ``stable`` / ``borderline`` / ``unstable``;
* per-player speeds, ``K = blockdiag(k_i I_{m_i})`` and per-coordinate speeds
  (D-stability): ``robust`` (``KJ`` Hurwitz for every such ``K``, proved by an
  exact criterion or a re-verified Lyapunov matrix), ``fragile`` (re-verified
  speeds with ``max Re eig(KJ) > FRAGILE_TOL * |KJ|_F``) or ``undecided``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import _minors, _search, _spectral
from ._evidence import Evidence, Pending, compute
from ._evidence import compile_ahead as compile_evidence_ahead
from ._ratios import probe_ratio, stable_ratio_intervals

#: A destabilising certificate must push the scaled abscissa above this.
FRAGILE_TOL = 1e-6
#: A Lyapunov certificate must push the scaled top eigenvalue below minus this.
LYAPUNOV_TOL = 1e-9
#: Relative tolerance for the sign of a scaled principal minor.
MINOR_TOL = 1e-10
#: Rounding allowance when re-verifying diag(JX) >= 0 for an obstruction X.
OBSTRUCTION_TOL = 1e-10

#: Up to this many blocks, fast/slow corner speeds are tried before the barrier method.
CHEAP_CORNER_BLOCKS = 4
#: Above this many free actions only the cheap evidence runs (eigenvalues, closed-form Lyapunov
#: candidates): the barrier method's systems grow like n^4 for per-coordinate weights and the
#: speed-ratio analysis solves an n^2 x n^2 eigenproblem. Larger games get ``undecided`` where
#: the cheap evidence decides nothing.
MAX_SEARCH_SIZE = 32

ROBUST, FRAGILE, UNDECIDED = "robust", "fragile", "undecided"


@dataclass(frozen=True)
class SpeedVerdict:
    """Verdict for one class of speeds, with its certificate and search effort."""

    verdict: str
    method: str
    certificate: dict[str, Any] | None
    effort: dict[str, Any] = field(default_factory=dict)
    stable_ratios: list | None = None
    no_lyapunov: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        out = {"verdict": self.verdict, "method": self.method, "certificate": self.certificate}
        if self.effort:
            out["effort"] = self.effort
        if self.stable_ratios is not None:
            out["stable_ratios"] = self.stable_ratios
        if self.no_lyapunov is not None:
            out["no_lyapunov_certificate"] = self.no_lyapunov
        return out


@dataclass(frozen=True)
class StabilityReport:
    """All stability labels of one Jacobian (see module docstring)."""

    equal_speeds: dict[str, Any]
    player_speeds: SpeedVerdict
    coordinate_speeds: SpeedVerdict
    hicksian: bool | None
    learning_rate_limit: float | None
    best_response: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        return {
            "equal_speeds": dict(self.equal_speeds),
            "player_speeds": self.player_speeds.to_dict(),
            "coordinate_speeds": self.coordinate_speeds.to_dict(),
            "hicksian": {"verdict": self.hicksian},
            "learning_rate_limit": self.learning_rate_limit,
            "best_response": dict(self.best_response),
        }


# ---------------------------------------------------------------- re-verification
def speeds_abscissa(J: np.ndarray, speeds: np.ndarray) -> float:
    """Scaled abscissa ``max Re eig(KJ) / |KJ|_F`` in float64 numpy (-inf for ``KJ = 0``)."""
    M = np.asarray(speeds, dtype=float)[:, None] * J
    norm = np.linalg.norm(M)
    if not np.isfinite(norm) or norm == 0:
        return -np.inf
    return float(np.max(np.linalg.eigvals(M / norm).real))


def _fragile(J, speeds, coord_speeds, method, effort=None) -> SpeedVerdict | None:
    speeds = np.asarray(speeds, dtype=float)
    if not (np.all(np.isfinite(speeds)) and np.all(speeds > 0)):
        return None
    speeds = speeds / speeds.max()
    value = speeds_abscissa(J, coord_speeds(speeds))
    if value <= FRAGILE_TOL:
        return None
    return SpeedVerdict(FRAGILE, method, {"speeds": speeds.tolist(), "abscissa": value}, effort or {})


def lyapunov_top(J: np.ndarray, P: np.ndarray, blocks) -> float | None:
    """Scaled top eigenvalue of ``PJ + J^T P`` if ``P`` is a valid weight matrix, else None."""
    P = 0.5 * (P + P.T)
    if not np.all(np.isfinite(P)) or np.linalg.norm(J) == 0:
        return None
    if np.any(P[~_spectral.block_mask(blocks)] != 0) or np.linalg.eigvalsh(P)[0] <= 0:
        return None
    Q = P @ J + J.T @ P
    return float(np.linalg.eigvalsh(0.5 * (Q + Q.T))[-1] / (np.linalg.norm(P) * np.linalg.norm(J)))


def obstruction(J: np.ndarray, ev: Evidence, blocks) -> dict[str, Any] | None:
    """A re-verified proof that no Lyapunov matrix on the block pattern of ``blocks`` exists, or None.

    ``X`` positive semidefinite whose block-diagonal part of ``JX + XJ^T`` is
    positive semidefinite gives ``tr((PJ + J^T P) X) = tr(P (JX + XJ^T)) >= 0``
    for every admissible ``P``, which rules out ``PJ + J^T P`` negative definite.
    """
    blocks = tuple(blocks)
    X = np.asarray(ev.get("lyapunov", blocks)[2], dtype=float)
    if not np.all(np.isfinite(X)):
        return None
    X = 0.5 * (X + X.T)
    S = J @ X + X @ J.T
    scale = np.linalg.norm(J) * np.trace(X)
    if np.linalg.eigvalsh(X)[0] < -OBSTRUCTION_TOL * np.trace(X):
        return None
    edges = np.cumsum((0,) + blocks)
    lows = [np.linalg.eigvalsh(S[a:b, a:b])[0] for a, b in zip(edges[:-1], edges[1:])]
    if min(lows) < -OBSTRUCTION_TOL * scale:
        return None
    if all(b == 1 for b in blocks):
        return {"X": X.tolist(), "diag_JX": np.diag(J @ X).tolist(),
                "reason": "X is positive semidefinite and diag(J X) >= 0, so tr((PJ + J^T P) X) >= 0 for "
                          "every positive diagonal P"}
    return {"X": X.tolist(), "block_min_eigenvalues": [float(v) for v in lows],
            "reason": "X is positive semidefinite and every diagonal block of J X + X J^T is positive "
                      "semidefinite, so tr((PJ + J^T P) X) >= 0 for every block-diagonal P >= 0"}


def _lyapunov(J, blocks, kind: str, effort, ev: Evidence) -> SpeedVerdict | None:
    """A re-verified Lyapunov certificate from evidence ``kind``, or None (best value into ``effort``)."""
    diagonal = all(b == 1 for b in blocks)
    found = ev.get(kind, blocks)
    candidates = [found[0]] if kind == "lyapunov" else list(found)
    for P in candidates:
        P = 0.5 * (np.asarray(P) + np.asarray(P).T)
        P[~_spectral.block_mask(blocks)] = 0.0
        top = lyapunov_top(J, P, blocks)
        if top is not None and top < -LYAPUNOV_TOL:
            cert = {"diagonal": np.diag(P).tolist()} if diagonal else {"matrix": P.tolist()}
            cert["max_eigenvalue"] = top
            name = "diagonal Lyapunov matrix" if diagonal else "block-diagonal Lyapunov matrix"
            return SpeedVerdict(ROBUST, name, cert, effort)
        if top is not None and (effort.get("lyapunov_best") is None or top < effort["lyapunov_best"]):
            effort["lyapunov_best"] = top
    return None


def _certify(J, blocks, coord_speeds, effort, ev: Evidence) -> SpeedVerdict:
    """Cheapest first: closed-form Lyapunov candidates, fast/slow corner speeds and the
    barrier method for a Lyapunov matrix (corners first for few blocks), then the gradient
    search for speeds; else undecided, with the barrier method's proof that no Lyapunov
    matrix exists when it re-verifies."""
    blocks = tuple(blocks)

    def corners():
        if 2 <= len(blocks) <= _search.MAX_CORNER_BLOCKS:
            speeds, _ = ev.get("corners", blocks)
            effort["corner_patterns"] = 3 * ((1 << len(blocks)) - 2)
            return _fragile(J, np.asarray(speeds), coord_speeds, "fast/slow corner speeds", effort)
        return None

    if J.shape[0] > MAX_SEARCH_SIZE:
        v = _lyapunov(J, blocks, "lyapunov_candidates", effort, ev)
        return v or SpeedVerdict(UNDECIDED, f"no closed-form Lyapunov candidate verified; the barrier method "
                                            f"and the speed searches run up to {MAX_SEARCH_SIZE} free actions "
                                            f"(here {J.shape[0]})", None, effort)
    # Corner patterns grow as 2^blocks: cheaper than the barrier method only for few blocks.
    steps = [lambda: _lyapunov(J, blocks, "lyapunov_candidates", effort, ev),
             lambda: _lyapunov(J, blocks, "lyapunov", effort, ev)]
    steps.insert(1 if len(blocks) <= CHEAP_CORNER_BLOCKS else 2, corners)
    for step in steps:
        v = step()
        if v:
            return v
    speeds, best = ev.get("fragile", blocks)
    effort.update({"search": "Adam over log-speeds, 16 starts x 150 steps", "best_scaled_abscissa": float(best)})
    v = _fragile(J, np.asarray(speeds), coord_speeds, "search over log-speeds", effort)
    return v or SpeedVerdict(UNDECIDED, "no certificate found", None, effort,
                             no_lyapunov=obstruction(J, ev, blocks))


# ---------------------------------------------------------------- speed classes
def _coordinate_verdict(J: np.ndarray, equal_abscissa: float, ev: Evidence) -> SpeedVerdict:
    n = J.shape[0]
    ident = lambda k: k  # noqa: E731
    if equal_abscissa > FRAGILE_TOL:
        v = _fragile(J, np.ones(n), ident, "unstable at equal speeds")
        if v:
            return v
    effort: dict[str, Any] = {}
    if n <= _minors.MAX_ENUMERATION:
        sets = _minors.subsets(n)
        minors = np.asarray(ev.get("minors"))
        k = int(np.argmin(minors))
        effort["principal_minors"] = int(len(sets))
        if minors[k] < -MINOR_TOL:
            for eps in (1e-1, 1e-2, 1e-3, 1e-4, 1e-6):
                v = _fragile(J, np.where(sets[k], 1.0, eps), ident, "negative principal minor of -J", effort)
                if v:
                    return v
    if n >= 2 and np.all(np.diag(J) < 0) and (not np.any(np.triu(J, 1)) or not np.any(np.tril(J, -1))):
        # DJ is triangular too, with eigenvalues d_k J_kk < 0 for every positive D.
        return SpeedVerdict(ROBUST, "exact: triangular with negative diagonal",
                            {"criterion": "triangular with negative diagonal"})
    if n == 1:
        if J[0, 0] < 0:
            return SpeedVerdict(ROBUST, "scalar: negative own slope", {"criterion": "J < 0"})
    elif n in (2, 3):
        holds, margin, speeds = ev.get("exact")
        name = "2x2 entrywise criterion" if n == 2 else "3x3 Routh-Hurwitz / Cauchy-Schwarz criterion"
        if bool(holds):
            return SpeedVerdict(ROBUST, "exact " + name, {"criterion": name, "margin": float(margin)},
                                no_lyapunov=obstruction(J, ev, (1,) * n) if n == 3 else None)
        if float(margin) < -MINOR_TOL:
            v = _fragile(J, np.asarray(speeds), ident, "exact " + name, effort)
            if v:
                return v
    return _certify(J, (1,) * n, ident, effort, ev)


def _player_verdict(J: np.ndarray, blocks, equal_abscissa: float, coordinate: SpeedVerdict,
                    ev: Evidence) -> SpeedVerdict:
    blocks = tuple(int(b) for b in blocks)
    expand = lambda k: np.repeat(k, blocks)  # noqa: E731
    if all(b == 1 for b in blocks) and len(blocks) != 2:
        return coordinate
    if equal_abscissa > FRAGILE_TOL:
        v = _fragile(J, np.ones(len(blocks)), expand, "unstable at equal speeds")
        if v:
            ratios = stable_ratio_intervals(J, blocks[0]) if _ratio_analysis(blocks) else None
            return SpeedVerdict(v.verdict, v.method, v.certificate, stable_ratios=ratios)
    if len(blocks) == 1:
        if equal_abscissa < -FRAGILE_TOL:
            return SpeedVerdict(ROBUST, "one player: equal speeds", {"criterion": "J Hurwitz"})
        return SpeedVerdict(UNDECIDED, "one player: borderline at equal speeds", None)
    if _ratio_analysis(blocks):
        ratios = stable_ratio_intervals(J, blocks[0])
        if ratios == [[None, None]]:
            return SpeedVerdict(ROBUST, "exact speed-ratio analysis (Kronecker-sum roots)",
                                {"criterion": "no critical speed ratio"}, stable_ratios=ratios)
        for probe in _unstable_probes(ratios):
            v = _fragile(J, np.array([1.0, probe]), expand, "exact speed-ratio analysis (Kronecker-sum roots)")
            if v:
                return SpeedVerdict(v.verdict, v.method, v.certificate, stable_ratios=ratios)
        return SpeedVerdict(UNDECIDED, "speed-ratio analysis found only marginal ratios", None,
                            stable_ratios=ratios)
    if coordinate.verdict == ROBUST:
        return SpeedVerdict(ROBUST, "implied by per-coordinate robustness (" + coordinate.method + ")",
                            coordinate.certificate)
    return _certify(J, blocks, expand, {}, ev)


def _ratio_analysis(blocks) -> bool:
    """Two players and few enough actions for the Kronecker-sum eigenproblem (size n^2)."""
    return len(blocks) == 2 and sum(blocks) <= MAX_SEARCH_SIZE


def _unstable_probes(ratios) -> list[float]:
    edges = [0.0]
    for lo, hi in ratios:
        edges += [0.0 if lo is None else lo, np.inf if hi is None else hi]
    edges.append(np.inf)
    return [probe_ratio(lo, hi) for lo, hi in zip(edges[0::2], edges[1::2]) if hi > lo]


def classify(J, blocks=None) -> StabilityReport:
    """Label the stability of an equilibrium from its game Jacobian.

    Parameters
    ----------
    J : array (n, n)
        Game Jacobian on the free coordinates.
    blocks : sequence of int, optional
        Players' action counts ``m_1, ..., m_N`` (sum ``n``); default one
        coordinate per player.

    Returns
    -------
    StabilityReport

    See Also
    --------
    classify_batch : the same for a stack of Jacobians, with the searches batched.

    Examples
    --------
    >>> rep = classify([[1.0, -2.0], [3.0, -4.0]])
    >>> rep.equal_speeds["verdict"], rep.coordinate_speeds.verdict
    ('stable', 'fragile')
    """
    J = np.asarray(J, dtype=float)
    return classify_batch(J[None], blocks)[0]


def unit_scaled(Js: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each matrix of the stack divided by its largest entry (1 for a zero matrix), and those units."""
    units = np.max(np.abs(Js), axis=(1, 2))
    units = np.where(units > 0, units, 1.0)
    return Js / units[:, None, None], units


def classify_batch(Js, blocks=None) -> list[StabilityReport]:
    """:func:`classify` for a stack ``Js`` of shape ``(B, n, n)`` sharing ``blocks``.

    The cheap evidence is computed for all matrices at once; each search runs
    batched, and only for the matrices whose decision needs it.
    """
    Js = np.asarray(Js, dtype=float)
    if Js.ndim != 3 or Js.shape[1] != Js.shape[2]:
        raise ValueError(f"expected a stack of square matrices, got shape {Js.shape}")
    n = Js.shape[1]
    blocks = (1,) * n if blocks is None else tuple(int(b) for b in blocks)
    if n == 0:
        return [_all_at_bounds() for _ in range(Js.shape[0])]
    if not np.all(np.isfinite(Js)):
        raise ValueError("expected finite Jacobian entries")
    # Verdicts are unit-free: work at unit largest entry, report abscissae and step sizes in the
    # original units. This keeps eigenvalue routines away from overflow and underflow.
    Js, units = unit_scaled(Js)
    stores: list[dict] = [{} for _ in range(Js.shape[0])]
    for kind, b in _upfront(n, blocks):
        for store, value in zip(stores, compute(kind, b, Js)):
            store[(kind, b)] = value
    results: list[StabilityReport | None] = [None] * Js.shape[0]
    waiting = list(range(Js.shape[0]))
    while waiting:
        asked: dict[tuple, list[int]] = {}
        still = []
        for i in waiting:
            requests: set = set()
            try:
                results[i] = _decide(Js[i], blocks, Evidence(Js[i], stores[i], requests), units[i])
            except Pending:
                still.append(i)
                for key in requests:
                    asked.setdefault(key, []).append(i)
        for (kind, b), idx in asked.items():
            for i, value in zip(idx, compute(kind, b, Js[idx])):
                stores[i][(kind, b)] = value
        waiting = still
    return results


def _upfront(n: int, blocks: tuple[int, ...]) -> list[tuple[str, tuple[int, ...]]]:
    """The evidence every decision starts from."""
    upfront = [("equal", ()), ("learning_rate", ()), ("best_response", blocks), ("lyapunov_candidates", (1,) * n)]
    if n <= _minors.MAX_ENUMERATION:
        upfront.append(("minors", ()))
    if n in (2, 3):
        upfront.append(("exact", ()))
    return upfront


def compile_ahead(n: int, blocks) -> None:
    """Start compiling the upfront evidence for one ``n`` x ``n`` matrix beside the caller."""
    for kind, b in _upfront(n, tuple(int(k) for k in blocks)):
        compile_evidence_ahead(kind, b, n)


def _decide(J: np.ndarray, blocks, ev: Evidence, unit: float) -> StabilityReport:
    n = J.shape[0]
    code, a = ev.get("equal")
    scaled = float(a) / max(float(np.linalg.norm(J)), 1e-300)
    equal = {"verdict": _spectral.VERDICTS[int(code)], "abscissa": float(a) * unit}
    coordinate = _coordinate_verdict(J, scaled, ev)
    player = _player_verdict(J, blocks, scaled, coordinate, ev)
    if player.verdict == FRAGILE and coordinate.verdict != FRAGILE:
        speeds = np.repeat(player.certificate["speeds"], blocks)
        coordinate = _fragile(J, speeds, lambda k: k, "implied by per-player fragility") or coordinate
    hicksian = None
    if n <= _minors.MAX_ENUMERATION:
        hicksian = bool(np.all(np.asarray(ev.get("minors")) > MINOR_TOL))
    lr = float(ev.get("learning_rate")) / unit
    rho = float(ev.get("best_response", blocks))
    if np.isfinite(rho):  # not finite: a singular own Hessian, best responses undefined
        br = "stable" if rho < 1 - 1e-9 else ("unstable" if rho > 1 + 1e-9 else "neutral")
    else:
        br, rho = None, None
    return StabilityReport(equal, player, coordinate, hicksian, lr if np.isfinite(lr) else None,
                           {"verdict": br, "spectral_radius": rho})


def _all_at_bounds() -> StabilityReport:
    """Every action sits at a bound that its gradient pushes against: locally fixed."""
    why = "no free coordinates: every action is held at a bound"
    v = SpeedVerdict(ROBUST, why, {"criterion": why})
    return StabilityReport({"verdict": "stable", "abscissa": None}, v, v, None, None,
                           {"verdict": None, "spectral_radius": None})


def classify_free(J, blocks, free) -> StabilityReport:
    """:func:`classify` on the free coordinates ``free`` (bool mask) of a full Jacobian."""
    J = np.asarray(J, dtype=float)
    free = np.asarray(free, dtype=bool)
    owner = np.repeat(np.arange(len(blocks)), blocks)
    sub = [int(np.sum(free[owner == i])) for i in range(len(blocks))]
    return classify(J[np.ix_(free, free)], [m for m in sub if m > 0])

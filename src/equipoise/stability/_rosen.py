r"""Rosen's condition for games with a constant Jacobian (quadratic payoffs).

Weights :math:`r > 0` with :math:`RJ + J^T R` negative definite,
:math:`R = \mathrm{blockdiag}(r_i I_{m_i})`, make the game diagonally strictly
concave: the equilibrium is unique, and with
:math:`V = \sum_i (r_i / k_i) \|x_i - x_i^*\|^2` gradient play
:math:`\dot x_i = k_i F_i(x)` reaches it from anywhere, for every choice of
per-player speeds :math:`k` (:math:`\dot V = 2 (x - x^*)^T R (F(x) - F(x^*)) < 0`).

Reference: Rosen (1965), "Existence and uniqueness of equilibrium points for
concave n-person games", Econometrica 33.
"""

from __future__ import annotations

import functools
from typing import Any

import jax
import numpy as np

from .. import _trace_cache
from . import _lmi

#: Jacobians that differ by less than this (relative) count as constant.
CONSTANT_TOL = 1e-9
#: The certificate must push the scaled top eigenvalue below minus this.
ROSEN_TOL = 1e-9


def is_constant(jacobians: np.ndarray) -> bool:
    """Whether all Jacobians in the stack ``(k, n, n)`` agree to :data:`CONSTANT_TOL`."""
    J = np.asarray(jacobians)
    scale = max(float(np.max(np.abs(J))), 1e-300)
    return bool(np.max(np.abs(J - J[0])) <= CONSTANT_TOL * scale)


@functools.lru_cache(maxsize=None)
def _player_lmi(blocks: tuple[int, ...]):
    """The barrier method for per-player weights, jitted once per block pattern (its trace kept)."""
    return _trace_cache.kept(("rosen_lmi", blocks), jax.jit(lambda J: _lmi.lyapunov_lmi(J, blocks, "player")))


def rosen_certificate(J, blocks) -> dict[str, Any] | None:
    """Re-verified weights ``r`` (max 1) for Rosen's condition on constant ``J``, or None."""
    J = np.asarray(J, dtype=float)
    blocks = tuple(int(b) for b in blocks)
    R, _, _ = _player_lmi(tuple(blocks))(jax.numpy.asarray(J))
    edges = np.cumsum((0,) + blocks)[:-1]
    r = np.asarray(R).diagonal()[edges]
    if not (np.all(np.isfinite(r)) and np.all(r > 0)):
        return None
    R = np.diag(np.repeat(r, blocks))
    Q = R @ J + J.T @ R
    top = float(np.linalg.eigvalsh(0.5 * (Q + Q.T))[-1] / (np.linalg.norm(R) * np.linalg.norm(J)))
    if top >= -ROSEN_TOL:
        return None
    return {"weights": r.tolist(), "max_eigenvalue": top}

"""Two-player zero-sum quadratic games, the local model of adversarial training."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names

#: Search box half-width for every action (the stationary point of a nonsingular game is 0).
BOX = 1.0


def _matrix(value, field: str) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{field}: expected a number or a matrix of numbers, got {value!r}") from None
    if arr.ndim not in (0, 2) or not np.all(np.isfinite(arr)):
        raise InputError(f"{field}: expected a finite number or a finite matrix, got {value!r}")
    return arr


def minmax_quadratic(a=1.0, b=1.0, c=1.0, names: Sequence[str] | None = None) -> Game:
    r"""Zero-sum quadratic game: the minimiser picks :math:`x`, the maximiser :math:`y`.

    .. math:: f(x, y) = \tfrac12 x^\top A x + x^\top B y - \tfrac12 y^\top C y,
              \qquad u_{\min} = -f, \quad u_{\max} = f.

    With :math:`A, C` positive definite, :math:`f` is convex in :math:`x` and
    concave in :math:`y` and the origin is a saddle point (a Nash
    equilibrium). Other signs describe points gradient descent-ascent may
    reach or circle that are not Nash, e.g. ``a=-2, b=2, c=1`` gives
    :math:`f = -x^2 + 2xy - y^2/2`, a local min-max point (Fiez & Ratliff
    2021) at which the minimiser's own problem is concave.

    Parameters
    ----------
    a, b, c : float or 2-D array
        :math:`A` (:math:`m_1 \times m_1`), :math:`B` (:math:`m_1 \times m_2`),
        :math:`C` (:math:`m_2 \times m_2`), parameters ``a``, ``b``, ``c``;
        numbers for scalar actions. Only the symmetric parts of :math:`A` and
        :math:`C` matter.
    names : sequence of str, optional
        ``(minimiser, maximiser)``, default ``("minimiser", "maximiser")``;
        the minimiser is stacked first, so speed ratios in stability reports
        are the maximiser's speed over the minimiser's.

    Returns
    -------
    Game
        Actions are unbounded; the search box is :math:`[-1, 1]` in every coordinate.

    Notes
    -----
    The game Jacobian is constant,
    :math:`J = \begin{pmatrix} -A_s & -B \\ B^\top & -C_s \end{pmatrix}`
    (:math:`A_s, C_s` the symmetric parts); when it is nonsingular the origin
    is the only first-order point.

    Examples
    --------
    >>> import equipoise
    >>> sol = equipoise.solve(minmax_quadratic(a=-2.0, b=2.0, c=1.0))
    >>> eq = sol.equilibria[0]
    >>> eq.nash.value, round(eq.stability.player_speeds.stable_ratios[0][0], 9)
    ('not_nash', 2.0)
    """
    A, B, C = _matrix(a, "a"), _matrix(b, "b"), _matrix(c, "c")
    m1 = 1 if A.ndim == 0 else A.shape[0]
    m2 = 1 if C.ndim == 0 else C.shape[0]
    if A.ndim == 2 and A.shape != (m1, m1):
        raise InputError(f"a: expected a square matrix, got shape {A.shape}")
    if C.ndim == 2 and C.shape != (m2, m2):
        raise InputError(f"c: expected a square matrix, got shape {C.shape}")
    if (B.ndim == 0 and (m1, m2) != (1, 1)) or (B.ndim == 2 and B.shape != (m1, m2)):
        raise InputError(f"b: expected a {m1} x {m2} matrix (minimiser's by maximiser's actions), "
                         f"got shape {B.shape}")
    lo, hi = player_names(names if names is not None else ("minimiser", "maximiser"), 2)

    def payoffs(x, theta):
        u, v = x[lo], x[hi]
        Am = theta["a"].reshape(m1, m1)
        Bm = theta["b"].reshape(m1, m2)
        Cm = theta["c"].reshape(m2, m2)
        f = 0.5 * u @ Am @ u + u @ Bm @ v - 0.5 * v @ Cm @ v
        return {lo: -f, hi: f}

    return Game(
        players={lo: m1, hi: m2},
        payoffs=payoffs,
        params={"a": A.tolist(), "b": B.tolist(), "c": C.tolist()},
        search_box={lo: (-BOX, BOX), hi: (-BOX, BOX)},
        name="minmax_quadratic",
    )

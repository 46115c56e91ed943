r"""Spectral labels of a game Jacobian: equal speeds, step size, best responses.

All functions are pure JAX on an ``(n, n)`` matrix (``jit`` and ``vmap`` apply).
"""

from __future__ import annotations

import jax.numpy as jnp
import numpy as np

#: Relative tolerance under which a real part counts as zero: an eigenvalue
#: of a non-normal matrix is only known to about this times its norm.
ZERO_TOL = 1e-8

STABLE, BORDERLINE, UNSTABLE = 0, 1, 2
VERDICTS = ("stable", "borderline", "unstable")


def scale(A):
    """Frobenius norm, floored away from zero."""
    return jnp.maximum(jnp.linalg.norm(A), 1e-300)


def spectral_abscissa(A):
    r"""Largest real part of an eigenvalue, :math:`\max_k \mathrm{Re}\,\lambda_k(A)`."""
    return jnp.max(jnp.real(jnp.linalg.eigvals(A)))


def equal_speeds(J, tol=ZERO_TOL):
    r"""Verdict of gradient play :math:`\dot x = F(x)` near the equilibrium.

    Returns ``(code, abscissa)``: ``stable`` when the spectral abscissa is
    below ``-tol * |J|_F``, ``unstable`` above ``tol * |J|_F``, otherwise
    ``borderline`` (e.g. the purely imaginary spectrum of a bilinear min-max game).
    """
    a = spectral_abscissa(J)
    s = scale(J)
    code = jnp.where(a < -tol * s, STABLE, jnp.where(a > tol * s, UNSTABLE, BORDERLINE))
    return code, a


def learning_rate_limit(J, speeds=None):
    r"""Largest common step :math:`\eta` for which :math:`x \leftarrow x + \eta K F(x)` is stable.

    For eigenvalues :math:`\lambda` of :math:`KJ`, all with negative real
    part, the limit is :math:`\min_\lambda -2\,\mathrm{Re}\,\lambda / |\lambda|^2`
    (the spectral radius of :math:`I + \eta K J` stays below 1 below it).
    Returns ``nan`` when :math:`KJ` is not Hurwitz.
    """
    M = J if speeds is None else jnp.asarray(speeds)[:, None] * J
    lam = jnp.linalg.eigvals(M)
    re = jnp.real(lam)
    limit = jnp.min(-2.0 * re / jnp.abs(lam) ** 2)
    return jnp.where(jnp.all(re < 0), limit, jnp.nan)


def block_mask(blocks) -> np.ndarray:
    """Boolean ``(n, n)`` mask of the diagonal blocks of sizes ``blocks``."""
    owner = np.repeat(np.arange(len(blocks)), blocks)
    return owner[:, None] == owner[None, :]


def best_response_radius(J, blocks):
    r"""Spectral radius of the best-response Jacobian.

    :math:`B = -\mathrm{blockdiag}(J_{ii})^{-1} (J - \mathrm{blockdiag}(J_{ii}))`;
    simultaneous discrete best responses are locally stable iff it is below 1.
    """
    mask = block_mask(blocks)
    D = jnp.where(mask, J, 0.0)
    B = -jnp.linalg.solve(D, jnp.where(mask, 0.0, J))
    return jnp.max(jnp.abs(jnp.linalg.eigvals(B)))

r"""Structured Lyapunov inequalities solved by a barrier (interior-point) method.

For a Jacobian ``J`` and a linear space of symmetric weight matrices
``P = sum_j y_j E_j`` (positive diagonal, block-diagonal on the players'
blocks, or one weight per player), solve

.. math::

   \min_{y, s} \; s \quad \text{s.t.} \quad PJ + J^T P \preceq s I,\;
   P \succ 0,\; \mathrm{tr}\, P = 1

by following the central path of
:math:`t s - \log\det(sI - PJ - J^T P) - \log\det P` with damped Newton steps
(one per value of ``t``, ``t`` growing geometrically; the trace constraint is
kept exactly through the Newton KKT system). An optimum ``s < 0`` gives a
Lyapunov certificate ``P``. An optimum ``s > 0`` proves that none exists,
and the barrier's dual point ``X = (sI - PJ - J^T P)^{-1} / tr(.)`` is the
proof: ``X`` is positive semidefinite with ``tr(E_j (JX + XJ^T)) >= 0`` for
every basis matrix, so ``tr((PJ + J^T P) X) >= 0`` for every admissible ``P``.

Pure JAX with a fixed number of steps: ``jit`` and ``vmap`` apply. It only
proposes; callers re-verify both certificates in float64.

Reference for the method: Boyd & Vandenberghe (2004), *Convex Optimization*,
chapter 11 (barrier method) and section 11.6 (generalised inequalities).
"""

from __future__ import annotations

import functools

import jax
import jax.numpy as jnp
import jax.scipy.linalg
import numpy as np

STRUCTURES = ("diagonal", "block", "player")

#: Trial step lengths of the line search (0 keeps the current point).
_ALPHAS = np.array([1.0, 0.5, 0.25, 0.1, 0.03, 1e-2, 1e-3, 0.0])


def basis(blocks, structure: str) -> np.ndarray:
    """Basis ``(m, n, n)`` of the symmetric weight matrices of ``structure`` on ``blocks``.

    ``diagonal``: ``e_a e_a^T``; ``block``: ``e_a e_b^T + e_b e_a^T`` for ``a <= b``
    owned by the same player (halved on the diagonal); ``player``: the identity
    on one player's block.
    """
    blocks = tuple(int(b) for b in blocks)
    n = sum(blocks)
    owner = np.repeat(np.arange(len(blocks)), blocks)
    mats = []
    if structure == "diagonal":
        for a in range(n):
            E = np.zeros((n, n))
            E[a, a] = 1.0
            mats.append(E)
    elif structure == "block":
        for a in range(n):
            for b in range(a, n):
                if owner[a] == owner[b]:
                    E = np.zeros((n, n))
                    E[a, b] = E[b, a] = 1.0
                    mats.append(E)
    elif structure == "player":
        for i in range(len(blocks)):
            mats.append(np.diag((owner == i).astype(float)))
    else:
        raise ValueError(f"structure must be one of {STRUCTURES}, got {structure!r}")
    return np.stack(mats)


def _inverses_and_logdets(Fs):
    """Inverses and log-determinants of a stack of symmetric matrices, in one batched call.

    A log-determinant is ``nan`` where its matrix is not positive definite.
    One LAPACK call per step on purpose: two independent batched LAPACK kernels
    in one graph were seen to deadlock jaxlib's CPU thread pool (DEVELOPERS.md).
    """
    n = Fs.shape[-1]
    L = jnp.linalg.cholesky(0.5 * (Fs + jnp.swapaxes(Fs, -1, -2)))   # nan where not positive definite
    d = jnp.diagonal(L, axis1=-2, axis2=-1)
    ok = jnp.all(jnp.isfinite(L), axis=(-2, -1)) & jnp.all(d > 0, axis=-1)
    L = jnp.where(ok[..., None, None], L, jnp.eye(n))
    Linv = jax.scipy.linalg.solve_triangular(L, jnp.broadcast_to(jnp.eye(n), L.shape), lower=True)
    inv = jnp.swapaxes(Linv, -1, -2) @ Linv
    logdet = 2.0 * jnp.sum(jnp.log(jnp.diagonal(L, axis1=-2, axis2=-1)), axis=-1)
    return inv, jnp.where(ok, logdet, jnp.nan)


@functools.partial(jax.jit, static_argnames=("blocks", "structure", "steps"))
def lyapunov_lmi(J, blocks, structure="diagonal", steps=70):
    """Best weight matrix found and the dual point.

    Returns ``(P, bound, X)``: ``P`` (largest entry 1) of the requested
    structure; ``bound`` an upper bound on the top eigenvalue of
    ``PJ + J^T P`` scaled by ``|P|_F |J|_F`` (negative: a certificate,
    to be re-verified); and ``X`` (trace 1), the barrier's dual point.
    """
    Enp = basis(blocks, structure)
    E = jnp.asarray(Enp)
    m, n = E.shape[0], E.shape[1]
    Jn = J / jnp.maximum(jnp.linalg.norm(J), 1e-300)
    QE = E @ Jn + jnp.swapaxes(E @ Jn, 1, 2)          # Q(y) = sum_j y_j QE_j
    eye = jnp.eye(n)
    D1 = jnp.concatenate([-QE, eye[None]])             # d(sI - Q)/dz, z = (y, s)
    D2 = jnp.concatenate([E, jnp.zeros((1, n, n))])    # dP/dz
    cz = jnp.concatenate([jnp.trace(E, axis1=1, axis2=2), jnp.zeros(1)])
    es = jnp.zeros(m + 1).at[m].set(1.0)

    def matrices(z):
        """``(sI - Q(y), P(y))`` stacked, for one point or a stack of points."""
        F1 = z[..., m, None, None] * eye - jnp.tensordot(z[..., :m], QE, 1)
        F2 = jnp.tensordot(z[..., :m], E, 1)
        return jnp.stack([F1, F2], axis=-3)

    # Start at P = I / n (the basis matrices have disjoint supports: project onto each)
    # with s above the top eigenvalue of Q, and t where that point is central in s.
    y0 = jnp.asarray(np.einsum("jab,ab->j", Enp, np.eye(n) / n) / np.einsum("jab,jab->j", Enp, Enp))
    s0 = jnp.linalg.norm(jnp.tensordot(y0, QE, 1)) + 1.0
    z0 = jnp.concatenate([y0, s0[None]])
    t0 = jnp.trace(_inverses_and_logdets(matrices(z0))[0][0])

    def step(carry, _):
        z, t = carry
        inv, _ = _inverses_and_logdets(matrices(z))
        # Gradient -tr(F^-1 F_j) and Hessian tr(F^-1 F_j F^-1 F_k) of -log det F, F in {F1, F2}.
        M = jnp.concatenate([inv[0] @ D1, inv[1] @ D2])            # (2(m+1), n, n)
        g = t * es - jnp.trace(M, axis1=1, axis2=2).reshape(2, m + 1).sum(0)
        left = M.reshape(2, m + 1, n * n)
        right = jnp.swapaxes(M, 1, 2).reshape(2, m + 1, n * n)
        H = jnp.einsum("fjx,fkx->jk", left, right)
        K = jnp.block([[H, cz[:, None]], [cz[None, :], jnp.zeros((1, 1))]])
        dz = jnp.linalg.solve(K, jnp.concatenate([-g, jnp.zeros(1)]))[: m + 1]
        dz = jnp.where(jnp.all(jnp.isfinite(dz)), dz, 0.0)
        trial = z[None] + jnp.asarray(_ALPHAS)[:, None] * dz[None]
        _, logdets = _inverses_and_logdets(matrices(trial))
        logdet = jnp.sum(logdets, axis=-1)
        vals = jnp.where(jnp.isfinite(logdet), t * trial[:, m] - logdet, jnp.inf)
        return (trial[jnp.argmin(vals)], t * 1.5), None

    (z, _), _ = jax.lax.scan(step, (z0, t0), None, length=steps)
    inv, _ = _inverses_and_logdets(matrices(z))
    P = jnp.tensordot(z[:m], E, 1)
    X = inv[0] / jnp.trace(inv[0])
    return P / jnp.max(jnp.abs(P)), z[m] / jnp.linalg.norm(P), X

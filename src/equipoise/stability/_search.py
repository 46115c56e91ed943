r"""Searches for destabilising speeds and cheap Lyapunov candidates (pure JAX; ``jit``/``vmap`` apply).

* :func:`destabilising_speeds` maximises the scale-free spectral abscissa
  :math:`\max \mathrm{Re}\,\lambda(KJ) / \|KJ\|_F` over log-speeds from several
  starts with Adam (optax); the problem is not convex.
* :func:`corner_speeds` tries every two-level (fast/slow) speed pattern.
* :func:`lyapunov_candidates` gives closed-form weight matrices to try before
  the barrier method of :mod:`._lmi`.

Every search only proposes; the caller re-verifies each certificate in float64.
"""

from __future__ import annotations

import functools

import jax
import jax.numpy as jnp
import numpy as np


def _expand(blocks) -> np.ndarray:
    """``(n, k)`` 0/1 matrix giving each coordinate its player's speed."""
    owner = np.repeat(np.arange(len(blocks)), blocks)
    return (owner[:, None] == np.arange(len(blocks))[None, :]).astype(float)


def _minimise(objective, x0s, steps: int, rate: float):
    """Adam from each start in ``x0s`` (vmapped); the best value seen and where."""
    import optax  # here, not at module level: only a search needs it

    opt = optax.adam(rate)

    def run(x):
        def step(carry, _):
            x, state, best_x, best = carry
            val, g = jax.value_and_grad(objective)(x)
            g = jnp.where(jnp.isfinite(g), g, 0.0)
            better = val < best
            best_x = jnp.where(better, x, best_x)
            best = jnp.where(better, val, best)
            upd, state = opt.update(g, state)
            return (optax.apply_updates(x, upd), state, best_x, best), None

        init = (x, opt.init(x), x, jnp.inf)
        (x, _, best_x, best), _ = jax.lax.scan(step, init, None, length=steps)
        last = objective(x)
        return jnp.where(last < best, x, best_x), jnp.minimum(last, best)

    xs, vals = jax.vmap(run)(x0s)
    i = jnp.argmin(vals)
    return xs[i], vals[i]


def _abscissa_ratio(J, logk, G):
    k = jnp.exp(G @ (logk - jnp.max(logk)))
    M = k[:, None] * J
    return jnp.max(jnp.real(jnp.linalg.eigvals(M))) / jnp.linalg.norm(M)


@functools.partial(jax.jit, static_argnames=("blocks", "starts", "steps", "seed", "spread"))
def destabilising_speeds(J, blocks, starts=16, steps=150, seed=0, spread=3.0):
    """Best destabilising speeds found (one per block, max 1) and their scaled abscissa."""
    G = jnp.asarray(_expand(blocks))
    w0 = spread * jax.random.normal(jax.random.PRNGKey(seed), (starts, len(blocks)))
    w, val = _minimise(lambda w: -_abscissa_ratio(J, w, G), w0.at[0].set(0.0), steps, 0.1)
    return jnp.exp(w - jnp.max(w)), -val


@functools.partial(jax.jit, static_argnames=("blocks",))
def lyapunov_candidates(J, blocks):
    """Cheap candidate weight matrices, shape ``(3, n, n)``, on the block pattern of ``blocks``.

    The identity; the block-diagonal part of the solution ``X`` of
    ``X J + J^T X = -I`` (positive definite when ``J`` is Hurwitz, and so is
    its block-diagonal part); and ``diag(1 / |J_kk|)``.
    """
    n = J.shape[0]
    owner = np.repeat(np.arange(len(blocks)), blocks)
    mask = jnp.asarray(owner[:, None] == owner[None, :])
    eye = jnp.eye(n)
    X = lyapunov_solution(J)
    X = jnp.where(mask, 0.5 * (X + X.T), 0.0)
    D = jnp.diag(1.0 / jnp.maximum(jnp.abs(jnp.diag(J)), 1e-300))
    cands = jnp.stack([eye, X, D])
    return cands / jnp.max(jnp.abs(cands), axis=(1, 2), keepdims=True)


#: Sign-function steps of :func:`lyapunov_solution` (quadratic convergence after scaling).
SIGN_STEPS = 40


def lyapunov_solution(J):
    r"""The solution :math:`X` of :math:`X J + J^T X = -I` for Hurwitz ``J``, in :math:`O(n^3)` a step.

    Newton's iteration for the matrix sign function, with norm scaling, applied to
    :math:`A = J^T`, :math:`Q = I`: :math:`A_{k+1} = (c_k A_k + A_k^{-1}/c_k)/2`,
    :math:`Q_{k+1} = (c_k Q_k + A_k^{-1} Q_k A_k^{-T}/c_k)/2`; then :math:`A_k \to -I` and
    :math:`X = Q_\infty / 2`. For a ``J`` that is not Hurwitz the result solves nothing (the
    candidate then fails re-verification, as every candidate must pass it).

    Reference: Roberts (1980), "Linear model reduction and solution of the algebraic Riccati
    equation by use of the sign function", Int. J. Control 32(4).
    """
    n = J.shape[0]

    def step(_, c):
        A, Q = c
        inv = jnp.linalg.inv(A)
        scale = jnp.sqrt(jnp.linalg.norm(inv) / jnp.maximum(jnp.linalg.norm(A), 1e-300))
        scale = jnp.where(jnp.isfinite(scale) & (scale > 0), scale, 1.0)
        return 0.5 * (scale * A + inv / scale), 0.5 * (scale * Q + inv @ Q @ inv.T / scale)

    _, Q = jax.lax.fori_loop(0, SIGN_STEPS, step, (J.T, jnp.eye(n)))
    return 0.5 * Q


#: Most players (or coordinates) for which all fast/slow corner patterns are tried.
MAX_CORNER_BLOCKS = 12


@functools.partial(jax.jit, static_argnames=("blocks",))
def corner_speeds(J, blocks):
    """Best of the two-level speed patterns: 1 on a subset of blocks, ``eps`` elsewhere.

    Every proper non-empty subset with ``eps`` in (1e-1, 1e-2, 1e-3); cheap and
    batched, it catches most destabilising speeds before the gradient search.
    Returns the best speeds (one per block, max 1) and their scaled abscissa.
    """
    k = len(blocks)
    G = jnp.asarray(_expand(blocks))
    sets = np.array([[(m >> i) & 1 for i in range(k)] for m in range(1, (1 << k) - 1)], dtype=bool)
    pats = np.concatenate([np.where(sets, 1.0, eps) for eps in (1e-1, 1e-2, 1e-3)])
    logk = jnp.log(jnp.asarray(pats))
    vals = jax.vmap(lambda w: _abscissa_ratio(J, w, G))(logk)
    i = jnp.argmax(vals)
    return jnp.asarray(pats)[i], vals[i]

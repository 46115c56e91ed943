r"""Optimisation searches for certificates (pure JAX with optax; ``vmap`` over starts).

* :func:`destabilising_speeds`: maximise the scale-free spectral abscissa
  :math:`\max \mathrm{Re}\,\lambda(KJ) / \|KJ\|_F` over log-speeds.
* :func:`lyapunov_weights`: minimise
  :math:`\lambda_{\max}(PJ + J^T P) / (\|P\|_F \|J\|_F)` over positive diagonal
  or block-diagonal positive definite :math:`P = LL^T`.

Both only propose; the caller re-verifies every certificate in float64.
"""

from __future__ import annotations

import functools

import jax
import jax.numpy as jnp
import numpy as np
import optax


def _expand(blocks) -> np.ndarray:
    """``(n, k)`` 0/1 matrix giving each coordinate its player's speed."""
    owner = np.repeat(np.arange(len(blocks)), blocks)
    return (owner[:, None] == np.arange(len(blocks))[None, :]).astype(float)


def _abscissa_ratio(J, logk, G):
    k = jnp.exp(G @ (logk - jnp.max(logk)))
    M = k[:, None] * J
    return jnp.max(jnp.real(jnp.linalg.eigvals(M))) / jnp.linalg.norm(M)


@functools.partial(jax.jit, static_argnames=("blocks", "starts", "steps", "seed", "spread"))
def destabilising_speeds(J, blocks, starts=16, steps=150, seed=0, spread=3.0):
    """Best destabilising speeds found (one per block, max 1) and their scaled abscissa."""
    G = jnp.asarray(_expand(blocks))
    k = len(blocks)
    key = jax.random.PRNGKey(seed)
    w0 = spread * jax.random.normal(key, (starts, k))
    w0 = w0.at[0].set(0.0)
    opt = optax.adam(0.1)
    objective = lambda w: -_abscissa_ratio(J, w, G)  # noqa: E731

    def run(w):
        state = opt.init(w)

        def step(carry, _):
            w, state, best_w, best = carry
            val, g = jax.value_and_grad(objective)(w)
            g = jnp.where(jnp.isfinite(g), g, 0.0)
            better = val < best
            best_w = jnp.where(better, w, best_w)
            best = jnp.where(better, val, best)
            upd, state = opt.update(g, state)
            return (optax.apply_updates(w, upd), state, best_w, best), None

        (w, _, best_w, best), _ = jax.lax.scan(step, (w, state, w, jnp.inf), None, length=steps)
        last = objective(w)
        return jnp.where(last < best, w, best_w), -jnp.minimum(last, best)

    ws, vals = jax.vmap(run)(w0)
    i = jnp.argmax(vals)
    w = ws[i]
    return jnp.exp(w - jnp.max(w)), vals[i]


def _lyapunov_matrix(theta, mask):
    L = jnp.where(mask, jnp.tril(theta), 0.0)
    L = L - jnp.diag(jnp.diag(L)) + jnp.diag(jnp.exp(jnp.diag(theta)))
    return L @ L.T


def _lyapunov_ratio(J, theta, mask):
    P = _lyapunov_matrix(theta, mask)
    Q = P @ J + J.T @ P
    return jnp.linalg.eigvalsh(0.5 * (Q + Q.T))[-1] / (jnp.linalg.norm(P) * jnp.linalg.norm(J))


@functools.partial(jax.jit, static_argnames=("blocks", "starts", "steps", "seed"))
def lyapunov_weights(J, blocks, starts=8, steps=300, seed=0):
    """Best ``P`` found (block-diagonal per ``blocks``) and its scaled top eigenvalue.

    ``blocks`` of all ones gives a positive diagonal ``P``.
    """
    n = J.shape[0]
    owner = np.repeat(np.arange(len(blocks)), blocks)
    mask = jnp.asarray(owner[:, None] == owner[None, :])
    key = jax.random.PRNGKey(seed)
    t0 = jax.random.normal(key, (starts, n, n)) * jnp.asarray([0.0] + [1.0] * (starts - 1))[:, None, None]
    opt = optax.adam(0.05)
    objective = lambda t: _lyapunov_ratio(J, t, mask)  # noqa: E731

    def run(t):
        state = opt.init(t)

        def step(carry, _):
            t, state, best_t, best = carry
            val, g = jax.value_and_grad(objective)(t)
            g = jnp.where(jnp.isfinite(g), g, 0.0)
            better = val < best
            best_t = jnp.where(better, t, best_t)
            best = jnp.where(better, val, best)
            upd, state = opt.update(g, state)
            return (optax.apply_updates(t, upd), state, best_t, best), None

        (t, _, best_t, best), _ = jax.lax.scan(step, (t, state, t, jnp.inf), None, length=steps)
        last = objective(t)
        return jnp.where(last < best, t, best_t), jnp.minimum(last, best)

    ts, vals = jax.vmap(run)(t0)
    i = jnp.argmin(vals)
    P = _lyapunov_matrix(ts[i], mask)
    return P / jnp.max(jnp.abs(P)), vals[i]

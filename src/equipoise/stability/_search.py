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


def _minimise(objective, x0s, steps: int, rate: float):
    """Adam from each start in ``x0s`` (vmapped); the best value seen and where."""
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


@functools.partial(jax.jit, static_argnames=("blocks", "starts", "steps", "seed", "spread"))
def destabilising_speeds(J, blocks, starts=16, steps=150, seed=0, spread=3.0):
    """Best destabilising speeds found (one per block, max 1) and their scaled abscissa."""
    G = jnp.asarray(_expand(blocks))
    w0 = spread * jax.random.normal(jax.random.PRNGKey(seed), (starts, len(blocks)))
    w, val = _minimise(lambda w: -_abscissa_ratio(J, w, G), w0.at[0].set(0.0), steps, 0.1)
    return jnp.exp(w - jnp.max(w)), -val


def _lyapunov_matrix(theta, mask):
    L = jnp.where(mask, jnp.tril(theta), 0.0)
    L = L - jnp.diag(jnp.diag(L)) + jnp.diag(jnp.exp(jnp.diag(theta)))
    return L @ L.T


def _top_ratio(J, P):
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
    t0 = jax.random.normal(jax.random.PRNGKey(seed), (starts, n, n)).at[0].set(0.0)
    t, val = _minimise(lambda t: _top_ratio(J, _lyapunov_matrix(t, mask)), t0, steps, 0.05)
    P = _lyapunov_matrix(t, mask)
    return P / jnp.max(jnp.abs(P)), val


@functools.partial(jax.jit, static_argnames=("blocks", "starts", "steps", "seed"))
def player_weights(J, blocks, starts=8, steps=300, seed=0):
    """Best weights ``r`` (one per player, max 1) for ``R = blockdiag(r_i I)``, and the scaled top eigenvalue."""
    G = jnp.asarray(_expand(blocks))
    w0 = jax.random.normal(jax.random.PRNGKey(seed), (starts, len(blocks))).at[0].set(0.0)
    w, val = _minimise(lambda w: _top_ratio(J, jnp.diag(jnp.exp(G @ w))), w0, steps, 0.05)
    return jnp.exp(w - jnp.max(w)), val


@functools.partial(jax.jit, static_argnames=("starts", "steps", "seed"))
def diagonal_obstruction(J, starts=8, steps=300, seed=0):
    r"""Search for :math:`X \succeq 0`, :math:`\mathrm{tr}\,X = 1`, maximising :math:`\min_i (JX)_{ii}`.

    A result with :math:`\min_i (JX)_{ii} \ge 0` proves that no positive
    diagonal :math:`P` makes :math:`PJ + J^T P` negative definite, since
    :math:`\mathrm{tr}((PJ + J^T P) X) = 2 \sum_i p_i (JX)_{ii}`.
    Returns ``X`` and ``min_i (JX)_ii / |J|_F``.
    """
    n = J.shape[0]
    t0 = jax.random.normal(jax.random.PRNGKey(seed), (starts, n, n))

    def gram(t):
        L = jnp.tril(t)
        X = L @ L.T
        return X / jnp.trace(X)

    def objective(t):
        return -jnp.min(jnp.diag(J @ gram(t))) / jnp.linalg.norm(J)

    t, val = _minimise(objective, t0, steps, 0.05)
    return gram(t), -val

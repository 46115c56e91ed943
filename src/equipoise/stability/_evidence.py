"""The numerical evidence a stability decision draws on, one matrix or a batch at a time.

Decisions ask an :class:`Evidence` for what they need (``get(kind, blocks)``).
For a single matrix the answer is computed at once by a jitted function. In a
batch, a missing answer raises :class:`Pending` and is recorded; the batch
driver computes all recorded requests of one kind together (``vmap``, in chunks
of fixed size or padded to a power of two, so few shapes compile) and runs the waiting decisions again.
Expensive searches are therefore paid for only by the matrices that need them.
"""

from __future__ import annotations

import functools

import jax
import jax.numpy as jnp
import numpy as np

from .. import _trace_cache
from . import _exact, _lmi, _minors, _search, _spectral


class Pending(Exception):
    """Raised in batch mode when a decision needs evidence not yet computed."""


def _exact_fn(J, blocks):
    n = J.shape[0]
    if n == 2:
        return _exact.dstable_2x2(J)
    if n == 3:
        return _exact.dstable_3x3(J)
    return jnp.asarray(False), jnp.asarray(jnp.nan), jnp.ones(n)


def _minors_fn(J, blocks):
    return _minors.normalised_minors(J, jnp.asarray(_minors.subsets(J.shape[0])))


KINDS = {
    "equal": lambda J, blocks: _spectral.equal_speeds(J),
    "learning_rate": lambda J, blocks: _spectral.learning_rate_limit(J),
    "best_response": lambda J, blocks: _spectral.best_response_radius(J, blocks),
    "minors": _minors_fn,
    "exact": _exact_fn,
    "lyapunov": lambda J, blocks: _lmi.lyapunov_lmi(
        J, blocks, "diagonal" if all(b == 1 for b in blocks) else "block"),
    "lyapunov_candidates": lambda J, blocks: _search.lyapunov_candidates(J, blocks),
    "fragile": lambda J, blocks: _search.destabilising_speeds(J, blocks),
    "corners": lambda J, blocks: _search.corner_speeds(J, blocks),
}


@functools.lru_cache(maxsize=None)
def _batched(kind: str, blocks: tuple[int, ...]):
    return _trace_cache.kept(("evidence", kind, blocks), jax.jit(jax.vmap(lambda J: KINDS[kind](J, blocks))))


def compile_ahead(kind: str, blocks: tuple[int, ...], n: int) -> None:
    """Start compiling evidence ``kind`` for a stack of one ``n`` x ``n`` matrix beside the caller."""
    _trace_cache.compile_ahead(_batched(kind, blocks), np.zeros((1, n, n)))


def _to_numpy(value):
    return jax.tree.map(np.asarray, value)


#: Batches are cut into chunks of this many matrices; a last, smaller chunk is padded to a power of two.
CHUNK = 256


def compute(kind: str, blocks: tuple[int, ...], Js: np.ndarray) -> list:
    """Evidence ``kind`` for each matrix of the stack ``Js`` (few compiled shapes: ``CHUNK`` and powers of two)."""
    out = []
    for start in range(0, Js.shape[0], CHUNK):
        part = Js[start:start + CHUNK]
        count = part.shape[0]
        size = 1 << max(0, (count - 1).bit_length())
        if size > count:
            part = np.concatenate([part, np.repeat(part[:1], size - count, axis=0)])
        leaves, tree = jax.tree.flatten(_to_numpy(_batched(kind, blocks)(jnp.asarray(part))))
        out += [jax.tree.unflatten(tree, [leaf[i] for leaf in leaves]) for i in range(count)]
    return out


class Evidence:
    """Answers for one matrix; see the module docstring."""

    def __init__(self, J: np.ndarray, store: dict | None = None, requests: set | None = None):
        self.J = J
        self.store = {} if store is None else store
        self.requests = requests

    def get(self, kind: str, blocks: tuple[int, ...] = ()):
        key = (kind, tuple(blocks))
        if key not in self.store:
            if self.requests is not None:
                self.requests.add(key)
                raise Pending(key)
            self.store[key] = compute(kind, key[1], self.J[None])[0]
        return self.store[key]

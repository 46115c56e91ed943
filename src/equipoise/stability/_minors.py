r"""Principal minors of :math:`-J`: the Hicksian label and destabilising index sets.

A negative principal minor of :math:`-J` on an index set :math:`S` means
:math:`J_{SS}` has a positive real eigenvalue (a real matrix with negative
determinant has a negative real eigenvalue), so speeds that are fast on
:math:`S` and slow elsewhere destabilise :math:`KJ`.
"""

from __future__ import annotations

import itertools

import jax
import jax.numpy as jnp
import numpy as np

#: Largest size for which all 2^n - 1 principal minors are enumerated.
MAX_ENUMERATION = 12


def subsets(n: int) -> np.ndarray:
    """All non-empty index sets of ``range(n)`` as a boolean ``(2^n - 1, n)`` array."""
    rows = [bits for bits in itertools.product((False, True), repeat=n) if any(bits)]
    return np.array(rows, dtype=bool)


def principal_minors(A, sets):
    """Principal minors ``det(A[S, S])`` for each row ``S`` of ``sets`` (jit-able)."""
    eye = jnp.eye(A.shape[0])

    def one(s):
        keep = s[:, None] & s[None, :]
        return jnp.linalg.det(jnp.where(keep, A, eye))



    return jax.vmap(one)(jnp.asarray(sets))


@jax.jit
def normalised_minors(J, sets):
    r"""Minors of :math:`-J` divided by :math:`\|J\|_F^{|S|}` (scale-free)."""
    s = jnp.maximum(jnp.linalg.norm(J), 1e-300)
    return principal_minors(-J, sets) / s ** jnp.sum(jnp.asarray(sets), axis=1)

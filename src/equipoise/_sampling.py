r"""Low-discrepancy starting points: scrambled Sobol' points, computed with numpy.

The points are those of ``scipy.stats.qmc.Sobol(d, scramble=True, seed=seed)``
(30 bits, linear matrix scramble and digital shift drawn from
``numpy.random.default_rng(seed)``), bit for bit; computing them here avoids
importing ``scipy.stats``, which alone takes longer than a warm solve. Only
the direction numbers are read from scipy's data file (Joe and Kuo's D(6)
set); where that file cannot be found, scipy's generator is used.

Point :math:`k` has the integer coordinates
:math:`q_k = s \oplus \bigoplus_{b:\, g_b(k) = 1} v_b` with :math:`g(k)` the
Gray code of :math:`k`, :math:`v_b` the scrambled direction numbers and
:math:`s` the shift; the point is :math:`q_k / 2^{30}`.

References
----------
P. Bratley and B. L. Fox (1988), Algorithm 659: Implementing Sobol's quasirandom sequence generator.
S. Joe and F. Y. Kuo (2003), Remark on algorithm 659.
J. Matousek (1998), On the L2-discrepancy for anchored boxes (linear matrix scrambling).
"""

from __future__ import annotations

import functools
import importlib.util
import os

import numpy as np

BITS = 30


@functools.lru_cache(maxsize=1)
def _direction_data() -> tuple[np.ndarray, np.ndarray] | None:
    """``(poly, vinit)`` from scipy's data file, or None where it is not found."""
    spec = importlib.util.find_spec("scipy")  # locates scipy without importing it
    if spec is None or not spec.submodule_search_locations:
        return None
    for root in spec.submodule_search_locations:
        path = os.path.join(root, "stats", "_sobol_direction_numbers.npz")
        if os.path.isfile(path):
            with np.load(path) as data:
                return data["poly"].astype(np.uint64), data["vinit"].astype(np.uint64)
    return None


def _directions(dim: int, poly: np.ndarray, vinit: np.ndarray) -> np.ndarray:
    """Unscrambled direction numbers ``(dim, BITS)``, column ``j`` scaled by ``2**(BITS-1-j)``."""
    v = np.zeros((dim, BITS), dtype=np.uint64)
    v[0] = 1
    for d in range(1, dim):
        p = int(poly[d])
        m = p.bit_length() - 1
        v[d, :m] = vinit[d, :m]
        # Bratley and Fox's recurrence for the primitive polynomial p of degree m.
        for j in range(m, BITS):
            new = int(v[d, j - m])
            for k in range(m):
                if (p >> (m - 1 - k)) & 1:
                    new ^= int(v[d, j - k - 1]) << (k + 1)
            v[d, j] = new
    return v << np.arange(BITS - 1, -1, -1, dtype=np.uint64)


def _bits_msb_first(values: np.ndarray) -> np.ndarray:
    """Bits of each value, most significant of the ``BITS`` first (new last axis)."""
    return (values[..., None] >> np.arange(BITS - 1, -1, -1, dtype=np.uint64)) & np.uint64(1)


def _scrambled(dim: int, seed: int, poly: np.ndarray, vinit: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Scrambled direction numbers ``(dim, BITS)`` and the digital shift ``(dim,)``."""
    rng = np.random.default_rng(seed)
    # The draws, in this order and with these shapes, are what makes the points scipy's.
    shift_bits = rng.integers(2, size=(dim, BITS), dtype=np.uint32).astype(np.uint64)
    lower = np.tril(rng.integers(2, size=(dim, BITS, BITS), dtype=np.uint32)).astype(np.uint64)
    lower[:, np.arange(BITS), np.arange(BITS)] = 1
    shift = shift_bits @ (np.uint64(1) << np.arange(BITS, dtype=np.uint64))
    v = _bits_msb_first(_directions(dim, poly, vinit))  # (dim, BITS numbers, BITS bits)
    # Bit p (most significant first) of each scrambled number is row p of the lower
    # triangular matrix times the number's bits, modulo 2.
    scrambled = np.einsum("dpi,dji->djp", lower, v) & np.uint64(1)
    weights = np.uint64(1) << np.arange(BITS - 1, -1, -1, dtype=np.uint64)
    return scrambled @ weights, shift


def _sobol(count: int, dim: int, seed: int, poly: np.ndarray, vinit: np.ndarray) -> np.ndarray:
    if dim > poly.shape[0]:
        raise ValueError(f"Sobol' points need dim <= {poly.shape[0]}, got {dim}")
    if count > 2**BITS:
        raise ValueError(f"at most 2**{BITS} Sobol' points, got {count}")
    sv, shift = _scrambled(dim, seed, poly, vinit)
    k = np.arange(count, dtype=np.uint64)
    gray = k ^ (k >> np.uint64(1))
    used = max(1, int(count - 1).bit_length())
    q = np.broadcast_to(shift, (count, dim)).copy()
    for b in range(used):
        on = ((gray >> np.uint64(b)) & np.uint64(1)).astype(bool)
        q[on] ^= sv[:, b]
    return q.astype(np.float64) * (1.0 / 2**BITS)


def unit_sample(count: int, dim: int, seed: int) -> np.ndarray:
    """``count`` points of a scrambled Sobol sequence in ``[0, 1]^dim``."""
    count, dim = int(count), int(dim)
    data = _direction_data()
    if data is None:
        return _scipy_sample(count, dim, seed)
    if count == 0 or dim == 0:
        return np.empty((count, dim))
    return _sobol(count, dim, int(seed), *data)


def _scipy_sample(count: int, dim: int, seed: int) -> np.ndarray:
    import warnings

    from scipy.stats import qmc

    with warnings.catch_warnings():
        # Counts that are not powers of two only lose the balance property.
        warnings.simplefilter("ignore", UserWarning)
        return qmc.Sobol(d=dim, scramble=True, seed=seed).random(count)

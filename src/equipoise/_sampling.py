"""Low-discrepancy starting points: scipy's scrambled Sobol' sequence, kept between runs.

Importing ``scipy.stats`` takes longer than a warm command-line solve, so where
the command line keeps a cache (``EQUIPOISE_CACHE``, see
:mod:`equipoise._compile_cache`) each sample scipy draws is also stored there,
under its size, dimension, seed and scipy's version, and the next run reads
it back instead of importing ``scipy.stats``. The points are scipy's either
way; a missing or unreadable file only means drawing them again.
"""

from __future__ import annotations

import os
import tempfile

import numpy as np

#: Folder of stored samples; None (the default) keeps nothing. Set by
#: :func:`equipoise._compile_cache.use_compile_cache`.
DIRECTORY: str | None = None


def unit_sample(count: int, dim: int, seed: int) -> np.ndarray:
    """``count`` points of a scrambled Sobol sequence in ``[0, 1]^dim``."""
    count, dim, seed = int(count), int(dim), int(seed)
    path = _path(count, dim, seed)
    if path is not None:
        try:
            u = np.load(path, allow_pickle=False)
            if u.shape == (count, dim) and u.dtype == np.float64:
                return u
        except (OSError, ValueError):
            pass
    u = _draw(count, dim, seed)
    if path is not None:
        _store(path, u)
    return u


def _draw(count: int, dim: int, seed: int) -> np.ndarray:
    import warnings

    from scipy.stats import qmc

    if count == 0 or dim == 0:
        return np.empty((count, dim))
    with warnings.catch_warnings():
        # Counts that are not powers of two only lose the balance property.
        warnings.simplefilter("ignore", UserWarning)
        return qmc.Sobol(d=dim, scramble=True, seed=seed).random(count)


def _path(count: int, dim: int, seed: int) -> str | None:
    if DIRECTORY is None:
        return None
    from importlib.metadata import version

    return os.path.join(DIRECTORY, f"sobol-scipy{version('scipy')}-{count}x{dim}-seed{seed}.npy")


def _store(path: str, u: np.ndarray) -> None:
    """Write atomically (a temporary file renamed into place); a failure only loses the shortcut."""
    try:
        os.makedirs(os.path.dirname(path), exist_ok=True)
        fd, scratch = tempfile.mkstemp(dir=os.path.dirname(path), suffix=".tmp")
        with os.fdopen(fd, "wb") as fh:
            np.save(fh, u, allow_pickle=False)
        os.replace(scratch, path)
    except OSError:
        pass

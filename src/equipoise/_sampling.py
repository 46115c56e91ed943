"""Low-discrepancy starting points."""

import warnings

import numpy as np
from scipy.stats import qmc


def unit_sample(count: int, dim: int, seed: int) -> np.ndarray:
    """``count`` points of a scrambled Sobol sequence in ``[0, 1]^dim``."""
    with warnings.catch_warnings():
        # Counts that are not powers of two only lose the balance property.
        warnings.simplefilter("ignore", UserWarning)
        return qmc.Sobol(d=dim, scramble=True, seed=seed).random(count)

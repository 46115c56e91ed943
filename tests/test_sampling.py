"""Starting points (equipoise._sampling): scipy's scrambled Sobol' points, computed without scipy.stats."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import qmc

from equipoise import _sampling
from equipoise._sampling import unit_sample


def _scipy(count, dim, seed):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # counts that are not powers of two
        return qmc.Sobol(d=dim, scramble=True, seed=seed).random(count)


@pytest.mark.parametrize("count", [1, 2, 3, 16, 64, 100, 1025])
@pytest.mark.parametrize("dim", [1, 2, 4, 9, 40, 300])
@pytest.mark.parametrize("seed", [0, 1, 12345])
def test_same_points_as_scipy(count, dim, seed):
    # Bit for bit: sweeps and benchmarks compare against scipy's sampler directly.
    assert np.array_equal(unit_sample(count, dim, seed), _scipy(count, dim, seed))


def test_points_in_the_unit_cube_and_distinct():
    u = unit_sample(256, 5, 7)
    assert u.shape == (256, 5) and u.dtype == np.float64
    assert np.all((u >= 0.0) & (u < 1.0))
    assert len(np.unique(u, axis=0)) == 256


def test_empty_sample():
    assert unit_sample(0, 3, 0).shape == (0, 3)


def test_falls_back_to_scipy_without_the_direction_numbers(monkeypatch):
    monkeypatch.setattr(_sampling, "_direction_data", lambda: None)
    assert np.array_equal(unit_sample(10, 3, 2), _scipy(10, 3, 2))

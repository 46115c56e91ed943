"""Starting points (equipoise._sampling): scipy's scrambled Sobol' points, kept between runs."""

from __future__ import annotations

import os
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


@pytest.fixture
def sample_folder(tmp_path, monkeypatch):
    monkeypatch.setattr(_sampling, "DIRECTORY", str(tmp_path / "samples"))
    return tmp_path / "samples"


@pytest.mark.parametrize("count, dim, seed", [(1, 1, 0), (64, 4, 0), (100, 9, 12345), (16, 300, 1)])
def test_same_points_as_scipy_with_and_without_the_store(count, dim, seed, sample_folder, monkeypatch):
    expected = _scipy(count, dim, seed)
    first = unit_sample(count, dim, seed)  # drawn by scipy and stored
    assert np.array_equal(first, expected)
    assert len(os.listdir(sample_folder)) == 1
    # The second call reads the stored sample: scipy is not asked again.
    monkeypatch.setattr(_sampling, "_draw", lambda *a: pytest.fail("drew again instead of reading"))
    assert np.array_equal(unit_sample(count, dim, seed), expected)
    monkeypatch.setattr(_sampling, "DIRECTORY", None)
    monkeypatch.undo()
    assert np.array_equal(unit_sample(count, dim, seed), expected)


def test_damaged_or_foreign_store_files_are_drawn_again(sample_folder):
    expected = _scipy(8, 3, 2)
    unit_sample(8, 3, 2)
    (path,) = sample_folder.iterdir()
    path.write_bytes(b"not a sample")
    assert np.array_equal(unit_sample(8, 3, 2), expected)
    np.save(path, np.zeros((2, 2)))  # wrong shape under the right name
    assert np.array_equal(unit_sample(8, 3, 2), expected)


def test_unwritable_store_still_gives_the_points(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    monkeypatch.setattr(_sampling, "DIRECTORY", str(blocker / "samples"))  # a folder inside a file
    assert np.array_equal(unit_sample(16, 2, 0), _scipy(16, 2, 0))


def test_empty_sample():
    assert unit_sample(0, 3, 0).shape == (0, 3)

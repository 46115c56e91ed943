"""Shared test setup.

Importing equipoise switches JAX to float64 before any test builds an array; the command
line's persistent compile cache is kept inside this session's temporary directory.
"""

import pytest

import equipoise  # noqa: F401


@pytest.fixture(scope="session", autouse=True)
def _compile_cache(tmp_path_factory):
    """Keep the persistent compile cache inside this session's temp dir."""
    where = tmp_path_factory.getbasetemp() / "equipoise-jax-cache"
    where.mkdir(exist_ok=True)
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("EQUIPOISE_CACHE", str(where))
        yield where

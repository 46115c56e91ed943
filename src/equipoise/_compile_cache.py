"""JAX's persistent compilation cache, for the command line and its worker processes."""

from __future__ import annotations

import os


def use_compile_cache() -> None:
    """Keep compiled solvers between runs in ``EQUIPOISE_CACHE`` (default ``~/.cache/equipoise/jax``;
    ``off`` disables), traced ones in its ``traces`` folder (:mod:`equipoise._trace_cache`) and
    Sobol samples in its ``samples`` folder (:mod:`equipoise._sampling`)."""
    where = os.environ.get("EQUIPOISE_CACHE", os.path.join(os.path.expanduser("~"), ".cache", "equipoise", "jax"))
    if where.lower() in ("", "0", "off", "none"):
        return
    import jax

    from . import _sampling, _trace_cache

    jax.config.update("jax_compilation_cache_dir", where)
    jax.config.update("jax_persistent_cache_min_compile_time_secs", 0.0)
    _trace_cache.DIRECTORY = os.path.join(where, "traces")
    _sampling.DIRECTORY = os.path.join(where, "samples")

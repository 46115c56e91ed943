"""Where batches run: in this process, in local worker processes, or on a Dask cluster.

Each engine takes the spec and the batches still to do and yields
``(batch, records, seconds)`` as batches finish (in any order); the caller
stores them. Workers load the model once (from its path when the file there
has the same contents, otherwise from the text they are sent, so a cluster
needs no shared file system) and compile once per model and batch shape.
"""

from __future__ import annotations

import concurrent.futures as cf
import hashlib
import multiprocessing
import os
import signal
import tempfile
import time
from collections.abc import Iterator

from .._errors import InputError
from ._batch import solve_batch

ENGINES = ("inprocess", "processes", "dask")

# Per worker process: fingerprint -> (game, base parameters, spec, points).
_WORKER_STATE: dict[str, tuple] = {}


def _prepare(spec, model_text: str, fingerprint: str):
    """The worker's game, base parameters and point table for this sweep (loaded once per process)."""
    if fingerprint not in _WORKER_STATE:
        from .._compile_cache import use_compile_cache
        from .._loader import load_game

        use_compile_cache()
        path = spec.model
        same = False
        if os.path.isfile(path):
            with open(path, encoding="utf-8", errors="replace") as fh:
                same = hashlib.sha256(fh.read().encode()).hexdigest() == hashlib.sha256(model_text.encode()).hexdigest()
        if not same:
            folder = os.path.join(tempfile.gettempdir(), f"equipoise-model-{fingerprint[:16]}")
            os.makedirs(folder, exist_ok=True)
            path = os.path.join(folder, os.path.basename(spec.model))
            scratch = f"{path}.{os.getpid()}"
            with open(scratch, "w", encoding="utf-8") as fh:  # whole file or none: workers share the folder
                fh.write(model_text)
            os.replace(scratch, path)
        game = load_game(path)
        _WORKER_STATE[fingerprint] = (game, spec.check_game(game), spec, spec.points())
    return _WORKER_STATE[fingerprint]


def run_batch(spec, model_text: str, fingerprint: str, batch: int) -> tuple[int, list[dict], float]:
    """Solve batch ``batch`` of the sweep (in whatever process this runs)."""
    t0 = time.perf_counter()
    game, base, spec, points = _prepare(spec, model_text, fingerprint)
    idx = spec.batch_indices(batch)
    return batch, solve_batch(game, spec, base, idx, points[idx]), time.perf_counter() - t0


def inprocess(spec, model_text: str, fingerprint: str, todo: list[int], **_) -> Iterator[tuple]:
    for b in todo:
        yield run_batch(spec, model_text, fingerprint, b)


def _quiet_worker() -> None:
    # Ctrl-C reaches the whole process group; the parent decides, workers carry on or are stopped.
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def processes(spec, model_text: str, fingerprint: str, todo: list[int], workers: int | None = None,
              **_) -> Iterator[tuple]:
    workers = workers or os.cpu_count() or 1
    pool = cf.ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                  initializer=_quiet_worker)
    try:
        futures = [pool.submit(run_batch, spec, model_text, fingerprint, b) for b in todo]
        handed: set = set()
        try:
            for fut in cf.as_completed(futures):
                handed.add(fut)
                yield fut.result()
        except KeyboardInterrupt:
            # Stop: drop what has not started, hand over what is running when it finishes, then stop.
            left = [f for f in futures if f not in handed and not f.cancel()]
            for fut in cf.as_completed(left):
                if fut.exception() is None:
                    yield fut.result()
            raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def dask(spec, model_text: str, fingerprint: str, todo: list[int], workers: int | None = None,
         scheduler: str | None = None, **_) -> Iterator[tuple]:
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise InputError("--engine dask: the Dask distributed package is not installed; "
                         "install it with pip install \"equipoise[dask]\"") from None
    cluster = None
    try:
        if scheduler:
            client = Client(scheduler, timeout="20s")
        else:
            cluster = LocalCluster(n_workers=workers or os.cpu_count() or 1, threads_per_worker=1,
                                   processes=True, dashboard_address=None, host="127.0.0.1")
            client = Client(cluster)
    except (OSError, ValueError) as exc:  # unreachable, or an address Dask cannot parse
        raise InputError(f"--scheduler {scheduler}: cannot reach the Dask scheduler ({exc})") from None
    try:
        futures = [client.submit(run_batch, spec, model_text, fingerprint, b, pure=False)
                   for b in todo]
        try:
            for fut in as_completed(futures):
                yield fut.result()
        finally:
            client.cancel(futures)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


RUNNERS = {"inprocess": inprocess, "processes": processes, "dask": dask}

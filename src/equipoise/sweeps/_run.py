"""``sweep``: run a spec's points batch by batch into a results store, resumably."""

from __future__ import annotations

import os
import sys
import time
from dataclasses import dataclass, field
from typing import Any

import jax.numpy as jnp
import numpy as np

from .._checks import check_payoffs, user_code
from .._errors import InputError
from .._loader import load_game
from .._sampling import unit_sample
from ._engines import ENGINES, RUNNERS
from ._spec import SweepSpec
from ._store import Store


@dataclass(frozen=True)
class SweepResult:
    """Outcome of :func:`sweep`.

    Attributes
    ----------
    store : str
        Path of the results store.
    points : int
        Points in the spec.
    stored : int
        Points in the store at the end (all of them unless interrupted).
    computed : int
        Points computed by this run (the rest were already stored).
    counts : dict
        Points per status (``solved``, ``no_equilibrium``, ``failed``) and
        ``equilibria``, the number of equilibrium rows.
    verdicts : dict
        Counts per label: ``nash``, ``equal_speeds``, ``player_speeds``,
        ``coordinate_speeds`` (``{label: count}`` each).
    seconds : float
        Wall time of this run.
    interrupted : bool
        True when the run was stopped early (Ctrl-C); finished batches are stored.
    """

    store: str
    points: int
    stored: int
    computed: int
    counts: dict[str, int]
    verdicts: dict[str, dict[str, int]]
    seconds: float
    interrupted: bool = False
    stats: dict[str, Any] = field(default_factory=dict)

    @property
    def complete(self) -> bool:
        return self.stored == self.points


def _model_text(path: str) -> str:
    try:
        with open(path, encoding="utf-8") as fh:
            return fh.read()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read the model file ({exc})") from None


def _check_first_point(game, spec: SweepSpec, base: dict) -> None:
    """Evaluate the payoffs once at the first point: model-code errors surface as one line here."""
    theta = {k: jnp.asarray(v) for k, v in spec.thetas(base, spec.first_point()).items()}
    theta = {k: v[0] for k, v in theta.items()}
    with user_code(game, "search_box"):
        lo, hi = (np.asarray(v) for v in game.region(theta))
    ok = np.isfinite(lo) & np.isfinite(hi) & (lo <= hi)
    lo, hi = np.where(ok, lo, 0.0), np.where(ok, hi, 1.0)
    check_payoffs(game, theta, lo + (hi - lo) * unit_sample(2, game.n, 0))


def sweep(spec: SweepSpec, store: str | os.PathLike, *, engine: str = "inprocess", workers: int | None = None,
          scheduler: str | None = None, new: bool = False, progress: bool = True) -> SweepResult:
    """Solve, verify and label every point of ``spec`` into the SQLite store ``store``.

    Running the same sweep again resumes it: stored batches are skipped.
    Every equilibrium found is verified (:func:`equipoise.verify`) and
    labelled (:func:`equipoise.stability.classify`, or the equal-speed
    label only, as ``spec.labels`` says).

    Parameters
    ----------
    spec : SweepSpec
    store : path
        The results store (created if missing).
    engine : {"inprocess", "processes", "dask"}
        Where batches run. Results are identical whichever runs them.
    workers : int, optional
        Worker processes for ``processes`` and a local Dask cluster
        (default: the number of cores).
    scheduler : str, optional
        Address of a running Dask scheduler (``engine="dask"``); without it a
        local cluster is started.
    new : bool
        Keep an existing store of another sweep aside and start a new one
        (otherwise such a store is refused).
    progress : bool
        Show a progress bar on standard error.

    Returns
    -------
    SweepResult

    Examples
    --------
    >>> from equipoise import Axis, SweepSpec, sweep
    >>> spec = SweepSpec("models/cournot_saltmere_ferries.py",
    ...                  axes=(Axis.linear("c[2]", 20.0, 90.0, 8),), batch=8)
    >>> sweep(spec, "ferries.sqlite", progress=False).counts["solved"]   # doctest: +SKIP
    8
    """
    t0 = time.perf_counter()
    if engine not in ENGINES:
        raise InputError(f"engine {engine!r}: expected one of {', '.join(ENGINES)}")
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise InputError(f"workers: expected a positive whole number, got {workers!r}")
    if scheduler and engine != "dask":
        raise InputError("--scheduler: only used with --engine dask")
    spec = spec.validate()
    game = load_game(spec.model)
    text = _model_text(spec.model)
    base = spec.check_game(game)
    _check_first_point(game, spec, base)
    for other, what in ((spec.model, "model file"), (spec.source, "sweep file")):
        if other and os.path.exists(store) and os.path.exists(other) and os.path.samefile(store, other):
            raise InputError(f"{store}: is the {what}; expected another path for the results store")
    fingerprint = spec.fingerprint(text)
    players = dict(zip(game.players, game.sizes))
    db = Store.create_or_resume(store, fingerprint=fingerprint, spec=spec.to_dict(), model=os.path.abspath(spec.model),
                                players=players, coordinates=[game.coordinate_name(k) for k in range(game.n)],
                                new=new)
    try:
        done = db.done_batches()
        todo = [b for b in range(spec.batches) if b not in done]
        remaining = int(sum(len(spec.batch_indices(b)) for b in todo))
        computed, interrupted = 0, False
        bar = _progress(remaining, progress)
        try:
            runs = RUNNERS[engine](spec, text, fingerprint, todo, workers=workers, scheduler=scheduler) if todo else ()
            for b, records, seconds in runs:
                if db.write_batch(b, records, seconds, engine):
                    computed += len(records)
                if bar is not None:
                    bar.update(len(records))
        except KeyboardInterrupt:
            interrupted = True
        finally:
            if bar is not None:
                bar.close()
        stored = sum(len(spec.batch_indices(b)) for b in db.done_batches())
        return SweepResult(str(store), spec.size, stored, computed, db.counts(), db.verdict_counts(),
                           time.perf_counter() - t0, interrupted,
                           {"engine": engine, "batches": spec.batches, "batches_run": len(todo)})
    finally:
        db.close()


def _progress(total: int, show: bool):
    if not show or total == 0:
        return None
    from tqdm import tqdm

    return tqdm(total=total, unit="pt", desc="sweep", file=sys.stderr, smoothing=0.1)

"""Sweeps over parameter grids and samples: batched solving, a resumable SQLite store, engines, maps."""

from ._plot import plot_store
from ._run import SweepResult, sweep
from ._spec import Axis, SweepSpec, load_spec
from ._store import Store

__all__ = ["Axis", "Store", "SweepResult", "SweepSpec", "load_spec", "plot_store", "sweep"]

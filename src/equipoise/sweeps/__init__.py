"""Sweeps over parameter grids and samples: batched solving, a resumable SQLite store, engines, maps."""

from .._lazy import lazy_names as _lazy_names

# Names are imported on first use, so that importing the package (or equipoise)
# does not load SQLite, the engines and the plotting code.
_LAZY = {"plot_store": "._plot", "SweepResult": "._run", "sweep": "._run", "Axis": "._spec",
         "SweepSpec": "._spec", "load_spec": "._spec", "Store": "._store"}

__all__ = ["Axis", "Store", "SweepResult", "SweepSpec", "load_spec", "plot_store", "sweep"]

__getattr__, __dir__ = _lazy_names(__name__, globals(), _LAZY)

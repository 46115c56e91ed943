"""Learning and adjustment dynamics: simulate runs, classify how they end, map basins."""

from .._lazy import lazy_names as _lazy_names

# Names are imported on first use, so that importing the package (or equipoise)
# does not load optax and the plotting code.
_LAZY = {"plot_basins": "._plot", "plot_simulation": "._plot", "Basins": "._simulate",
         "Simulation": "._simulate", "basins": "._simulate", "classify_path": "._simulate",
         "simulate": "._simulate"}

__all__ = ["Basins", "Simulation", "basins", "classify_path", "plot_basins", "plot_simulation", "simulate"]

__getattr__, __dir__ = _lazy_names(__name__, globals(), _LAZY)

"""Learning and adjustment dynamics: simulate runs, classify how they end, map basins."""

# Names are imported on first use, so that importing the package (or equipoise)
# does not load optax and the plotting code.
_LAZY = {"plot_basins": "._plot", "plot_simulation": "._plot", "Basins": "._simulate",
         "Simulation": "._simulate", "basins": "._simulate", "classify_path": "._simulate",
         "simulate": "._simulate"}

__all__ = ["Basins", "Simulation", "basins", "classify_path", "plot_basins", "plot_simulation", "simulate"]


def __getattr__(name):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module, __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))

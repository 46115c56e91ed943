"""Sweeps over parameter grids and samples: batched solving, a resumable SQLite store, engines, maps."""

# Names are imported on first use, so that importing the package (or equipoise)
# does not load SQLite, the engines and the plotting code.
_LAZY = {"plot_store": "._plot", "SweepResult": "._run", "sweep": "._run", "Axis": "._spec",
         "SweepSpec": "._spec", "load_spec": "._spec", "Store": "._store"}

__all__ = ["Axis", "Store", "SweepResult", "SweepSpec", "load_spec", "plot_store", "sweep"]


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

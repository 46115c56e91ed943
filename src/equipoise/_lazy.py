"""Public names imported on first use (a module-level ``__getattr__``), so start-up stays light."""

from __future__ import annotations

import importlib


def lazy_names(package: str, namespace: dict, names: dict[str, str]):
    """``(__getattr__, __dir__)`` for ``package``: ``names`` maps each public name to the
    (relative) module defining it; a name is imported on first use and then kept in
    ``namespace`` (the package's ``globals()``), so later look-ups skip this."""

    def __getattr__(name):
        module = names.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(module, package), name)
        namespace[name] = value
        return value

    def __dir__():
        return sorted(set(namespace) | set(names))

    return __getattr__, __dir__

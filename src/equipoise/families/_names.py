"""Player names shared by the families."""

from __future__ import annotations

from collections.abc import Sequence

from .._errors import InputError


def player_names(names: Sequence[str] | None, count: int, field: str = "names",
                 prefix: str = "firm") -> list[str]:
    """``names`` checked against ``count``, or ``<prefix>1 .. <prefix>N`` (default ``firm``)."""
    if names is None:
        return [f"{prefix}{i + 1}" for i in range(count)]
    names = [str(v) for v in names]
    if len(names) != count:
        raise InputError(f"{field}: expected {count} names, got {len(names)}")
    if len(set(names)) != len(names):
        raise InputError(f"{field}: names must be distinct, got {names}")
    return names

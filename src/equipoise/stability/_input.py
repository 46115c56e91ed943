"""Read a Jacobian file for ``equipoise check``: ``{"jacobian": [[..]], "blocks": [m_1, ...]}``."""

from __future__ import annotations

import json
import os

import numpy as np

from .._errors import InputError


def load_jacobian(path: str | os.PathLike) -> tuple[np.ndarray, tuple[int, ...]]:
    """The matrix and block sizes in a JSON file; :class:`InputError` names what is wrong."""
    path = os.fspath(path)
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; expected a JSON file with a \"jacobian\" field") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a directory; expected a JSON file") from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        line = getattr(exc, "lineno", None)
        where = f"{path}:{line}" if line else path
        raise InputError(f"{where}: not valid JSON ({exc.msg if hasattr(exc, 'msg') else exc})") from None
    if not isinstance(data, dict):
        raise InputError(f"{path}: expected a JSON object with a \"jacobian\" field, got {type(data).__name__}")
    unknown = sorted(set(data) - {"jacobian", "blocks"})
    if unknown:
        raise InputError(f"{path}: unknown field {unknown[0]!r}; expected only \"jacobian\" and \"blocks\"")
    if "jacobian" not in data:
        raise InputError(f"{path}: missing field \"jacobian\"; expected a square list of lists of numbers")
    rows = data["jacobian"]
    ok = (isinstance(rows, list) and rows and all(isinstance(r, list) for r in rows)
          and all(isinstance(v, (int, float)) and not isinstance(v, bool) for r in rows for v in r))
    if not ok:
        raise InputError(f"{path}: field \"jacobian\": expected a non-empty list of lists of numbers")
    n = len(rows)
    if any(len(r) != n for r in rows):
        raise InputError(f"{path}: field \"jacobian\": expected a square matrix, got {n} rows of lengths "
                         f"{sorted({len(r) for r in rows})}")
    try:
        J = np.asarray(rows, dtype=float)
    except OverflowError:
        J = np.full((n, n), np.inf)
    if not np.all(np.isfinite(J)):
        raise InputError(f"{path}: field \"jacobian\": expected finite numbers")
    blocks = data.get("blocks")
    if blocks is None:
        return J, (1,) * n
    if (not isinstance(blocks, list) or not blocks
            or not all(isinstance(b, int) and not isinstance(b, bool) and b > 0 for b in blocks)):
        raise InputError(f"{path}: field \"blocks\": expected a list of positive whole numbers")
    if sum(blocks) != n:
        raise InputError(f"{path}: field \"blocks\": sizes add up to {sum(blocks)}; expected {n}, "
                         "the size of the Jacobian")
    return J, tuple(blocks)

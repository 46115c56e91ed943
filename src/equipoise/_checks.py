"""Checks of a user's payoff function before anything is compiled.

Each failure is an :class:`InputError` whose one-line message names the model
file (when known), the player or start, and what was expected.
"""

from __future__ import annotations

import os
import traceback
from collections.abc import Mapping

import jax
import numpy as np

from ._errors import InputError


def _where(game) -> str:
    return f"{game.source}: " if game.source else ""


def user_frame(exc: BaseException, source: str | None) -> str:
    """``file:line`` of the deepest traceback frame in the user's file."""
    frames = traceback.extract_tb(exc.__traceback__)
    here = os.path.dirname(os.path.abspath(__file__))
    chosen = None
    for fr in frames:
        path = os.path.abspath(fr.filename)
        if source and path == os.path.abspath(source):
            chosen = fr
        elif chosen is None and not path.startswith(here) and "site-packages" not in path:
            chosen = fr
    if chosen is None:
        return ""
    if source and os.path.abspath(chosen.filename) == os.path.abspath(source):
        return f"{source}:{chosen.lineno}"
    return f"{os.path.basename(chosen.filename)}:{chosen.lineno}"


def check_payoffs(game, theta, starts: np.ndarray) -> None:
    """Evaluate the payoffs at the starts; raise :class:`InputError` if unusable."""
    where = _where(game)
    first = game.split(jax.numpy.asarray(starts[0]))
    try:
        out = game.payoffs(first, theta)
    except InputError:
        raise
    except Exception as exc:  # the user's code may raise anything
        loc = user_frame(exc, game.source)
        loc = f" (at {loc})" if loc else ""
        raise InputError(f"{where}payoffs raised {type(exc).__name__}: {exc}{loc}") from None
    if not isinstance(out, Mapping):
        raise InputError(f"{where}payoffs returned {type(out).__name__}; expected a dict {{player: payoff}}")
    keys = set(out)
    expected = set(game.players)
    if keys != expected:
        missing = ", ".join(sorted(map(str, expected - keys))) or "none"
        extra = ", ".join(sorted(map(str, keys - expected))) or "none"
        raise InputError(
            f"{where}payoffs returned keys {sorted(map(str, keys))}; expected exactly the players "
            f"{list(game.players)} (missing: {missing}; unexpected: {extra})"
        )
    for player in game.players:
        try:
            shape = np.shape(out[player])
        except Exception:
            shape = None
        if shape != ():
            raise InputError(
                f"{where}payoffs[{player!r}] has shape {shape}; expected a scalar payoff"
            )
    values = np.asarray(game.cached("payoff_batch", lambda: jax.jit(jax.vmap(game.payoff_vector, (0, None))))(
        starts, theta))
    bad = ~np.isfinite(values)
    if bad.any():
        s, i = np.argwhere(bad)[0]
        point = ", ".join(f"{v:.6g}" for v in starts[s])
        raise InputError(
            f"{where}payoffs[{game.players[i]!r}] is not finite ({values[s, i]}) at the starting point "
            f"[{point}]; expected finite payoffs on the search box (set bounds or search_box)"
        )

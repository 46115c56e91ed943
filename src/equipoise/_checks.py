"""Checks of a user's payoff function before anything is compiled.

Each failure is an :class:`InputError` whose one-line message names the model
file (when known), the player or start, and what was expected.
"""

from __future__ import annotations

import contextlib
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


_TRACING_ERRORS = tuple(
    getattr(jax.errors, name)
    for name in ("ConcretizationTypeError", "TracerArrayConversionError", "TracerBoolConversionError",
                 "TracerIntegerConversionError", "NonConcreteBooleanIndexError")
    if hasattr(jax.errors, name)
)


def _in_user_file(exc: BaseException, source: str | None) -> bool:
    if not source:
        return False
    target = os.path.abspath(source)
    return any(os.path.abspath(fr.filename) == target for fr in traceback.extract_tb(exc.__traceback__))


@contextlib.contextmanager
def user_code(game, what: str, any_error: bool = False):
    """Turn a failure inside the user's model code into one :class:`InputError` line.

    Only tracing errors and errors raised in the model file are converted, unless
    ``any_error`` (for a direct call of the user's function, where nothing else runs).
    """
    try:
        yield
    except InputError:
        raise
    except Exception as exc:
        if not (any_error or isinstance(exc, _TRACING_ERRORS) or _in_user_file(exc, game.source)):
            raise
        loc = user_frame(exc, game.source)
        loc = f" (at {loc})" if loc else ""
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
        hint = ""
        if isinstance(exc, _TRACING_ERRORS):
            hint = "; write model code with jax.numpy, and jnp.where instead of Python if on actions"
        raise InputError(f"{_where(game)}{what} failed: {type(exc).__name__}: {first}{loc}{hint}") from None


def _check_structure(game, out, what: str, sizes) -> None:
    where = _where(game)
    if not isinstance(out, Mapping):
        raise InputError(f"{where}{what} returned {type(out).__name__}; expected a dict {{player: ...}}")
    keys = set(out)
    expected = set(game.players)
    if keys != expected:
        missing = ", ".join(sorted(map(str, expected - keys))) or "none"
        extra = ", ".join(sorted(map(str, keys - expected))) or "none"
        raise InputError(
            f"{where}{what} returned keys {sorted(map(str, keys))}; expected exactly the players "
            f"{list(game.players)} (missing: {missing}; unexpected: {extra})"
        )
    for player, shape in zip(game.players, sizes):
        value = out[player]
        want = "a scalar payoff" if shape == () else f"an array of {shape[0]} numbers"
        try:  # jnp, not np: the values are traced (see check_payoffs)
            arr = jax.numpy.asarray(value)
            numeric = np.issubdtype(arr.dtype, np.number)
        except Exception:
            numeric = False
        if not numeric:
            raise InputError(f"{where}{what}[{player!r}] is a {type(value).__name__} ({value!r:.40}); expected {want}")
        if arr.shape != shape:
            raise InputError(f"{where}{what}[{player!r}] has shape {arr.shape}; expected {want}")


def check_payoffs(game, theta, starts: np.ndarray) -> None:
    """Evaluate the payoffs at the starts; raise :class:`InputError` if unusable.

    One compiled function per game does it all: the checks of what the payoffs
    (and ``foc``) return and of their derivatives run while it is traced, the
    payoff values come out of it. Evaluating the user's functions op by op
    instead would compile every operation separately.
    """
    where = _where(game)
    probe = game.cached("payoff_probe", lambda: jax.jit(lambda xs, th: _probe(game, xs, th)))
    with user_code(game, "payoffs"):
        values = np.asarray(probe(jax.numpy.asarray(starts), theta))
    bad = ~np.isfinite(values)
    if bad.any():
        s, i = np.argwhere(bad)[0]
        point = ", ".join(f"{v:.6g}" for v in starts[s])
        raise InputError(
            f"{where}payoffs[{game.players[i]!r}] is not finite ({values[s, i]}) at the starting point "
            f"[{point}]; expected finite payoffs on the search box (set bounds or search_box)"
        )


def _probe(game, xs, theta):
    """Payoffs at each start ``xs[s]``, shape ``(S, N)``; checks the user's functions while traced."""
    first = game.split(xs[0])
    with user_code(game, "payoffs", any_error=True):
        out = game.payoffs(first, theta)
    _check_structure(game, out, "payoffs", [()] * len(game.players))
    if game.foc is not None:
        with user_code(game, "foc", any_error=True):
            foc_out = game.foc(first, theta)
        _check_structure(game, foc_out, "foc", [(m,) for m in game.sizes])
    with user_code(game, "payoffs"):
        # Differentiability shows only when the derivatives are traced.
        jax.eval_shape(game.jacobian, xs[0], theta)
        if game.foc is not None:
            jax.eval_shape(game.solver_field, xs[0], theta)
    return jax.vmap(game.payoff_vector, (0, None))(xs, theta)

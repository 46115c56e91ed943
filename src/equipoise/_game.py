"""The game: players, their action blocks, parameters, bounds and search box.

A game is given by payoffs written in JAX. Everything numerical downstream
(pseudo-gradient, game Jacobian) is derived by automatic differentiation.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from . import _trace_cache
from ._errors import InputError

Params = dict[str, jax.Array]

#: Half-width of the default search interval for an action with no finite
#: bound and no search box (see :class:`Game`).
DEFAULT_BOX_HALF_WIDTH = 10.0


class Game:
    r"""A continuous-action game.

    Player :math:`i` chooses :math:`x_i \in \mathbb{R}^{m_i}` within optional
    bounds to maximise :math:`u_i(x_i, x_{-i}; \theta)`.

    Parameters
    ----------
    players : mapping of str to int
        Player name to number of actions, in stacking order.
    payoffs : callable
        ``payoffs(x, theta) -> {player: scalar}`` where ``x`` maps each player
        to a 1-D array of its actions and ``theta`` maps each parameter name
        to an array. Must be written with ``jax.numpy``.
    params : mapping of str to number or nested list, optional
        Default parameter values. Overrides must keep each value's shape.
    lower, upper : mapping of str to number or list, optional
        Bounds per player (a number applies to all its actions). Missing
        means unbounded.
    search_box : mapping or callable, optional
        ``{player: (lo, hi)}`` (numbers or lists), or a function of ``theta``
        returning such a mapping, written with ``jax.numpy``. Used for
        starting points and for the deviation check of unbounded actions.
        Where neither a bound nor a box is given, an action's interval runs
        ``DEFAULT_BOX_HALF_WIDTH * max(1, |b|)`` from its finite bound ``b``,
        or is ``[-10, 10]`` if both bounds are missing.
    foc : callable, optional
        ``foc(x, theta) -> {player: array of its actions' size}``, a
        first-order system the solver uses in place of the pseudo-gradient.
        Each coordinate must be a positive multiple of the corresponding
        pseudo-gradient coordinate, so its roots and bound conditions are the
        same; a family supplies one when it is better scaled (the logit
        family divides by market shares). Verification and the Jacobian
        always use the true pseudo-gradient.
    name : str, optional
        A label used in reports.
    consumer_surplus : callable, optional
        ``consumer_surplus(x, theta) -> scalar`` in money units, written with
        ``jax.numpy``; welfare reports use it (see :mod:`equipoise._welfare`).
        A model file may instead define a module-level ``consumer_surplus``.
    producer_surplus : callable, optional
        ``producer_surplus(x, theta) -> scalar``; default the sum of payoffs
        (needed where payoffs are weighted, e.g. ownership-weighted profits).
    fixed_point : callable, optional
        ``fixed_point(x, theta) -> x_new`` on stacked actions, a map whose
        fixed points are exactly the game's first-order points and which
        converges by plain iteration from the search box (a family supplies
        one where theory gives it, e.g. the logit markup equation); used by
        :func:`equipoise.fixed_point_solve` and ``solve(method="fixed_point")``.
    best_response : callable, optional
        ``best_response(x, theta) -> stacked actions`` whose block ``i`` is a
        *global* maximiser of player ``i``'s payoff given the others' actions
        in ``x``. Only a family that can prove this supplies it (the logit
        family does, by a closed form); verification then computes each
        player's gain exactly instead of searching for deviations.

    Examples
    --------
    >>> import jax.numpy as jnp
    >>> from equipoise import Game
    >>> def payoffs(x, theta):
    ...     q1, q2 = x["a"][0], x["b"][0]
    ...     price = theta["a"] - q1 - q2
    ...     return {"a": price * q1, "b": price * q2}
    >>> game = Game({"a": 1, "b": 1}, payoffs, params={"a": 12.0},
    ...             lower={"a": 0.0, "b": 0.0})
    >>> game.n
    2
    """

    def __init__(
        self,
        players: Mapping[str, int],
        payoffs: Callable[[dict, dict], Mapping[str, Any]],
        params: Mapping[str, Any] | None = None,
        lower: Mapping[str, Any] | None = None,
        upper: Mapping[str, Any] | None = None,
        search_box: Mapping[str, Any] | Callable | None = None,
        foc: Callable[[dict, dict], Mapping[str, Any]] | None = None,
        name: str | None = None,
        consumer_surplus: Callable[[dict, dict], Any] | None = None,
        producer_surplus: Callable[[dict, dict], Any] | None = None,
        fixed_point: Callable[[Any, dict], Any] | None = None,
        best_response: Callable[[Any, dict], Any] | None = None,
    ):
        if not isinstance(players, Mapping) or not players:
            raise InputError("players: expected a non-empty mapping of player name to number of actions")
        sizes = []
        for player, m in players.items():
            if not isinstance(player, str):
                raise InputError(f"players: names must be strings, got {player!r}")
            if isinstance(m, bool) or not isinstance(m, (int, np.integer)) or m < 1:
                raise InputError(f"players[{player!r}]: expected a positive whole number of actions, got {m!r}")
            sizes.append(int(m))
        if not callable(payoffs):
            raise InputError("payoffs: expected a function payoffs(x, theta) -> {player: payoff}")
        self.players: tuple[str, ...] = tuple(players)
        self.sizes: tuple[int, ...] = tuple(sizes)
        self.offsets: tuple[int, ...] = tuple(int(o) for o in np.cumsum((0,) + self.sizes[:-1]))
        self.n: int = int(sum(sizes))
        self.owner = np.repeat(np.arange(len(sizes)), sizes)
        self.payoffs = payoffs
        if foc is not None and not callable(foc):
            raise InputError("foc: expected a function foc(x, theta) -> {player: array}")
        self.foc = foc
        if consumer_surplus is not None and not callable(consumer_surplus):
            raise InputError("consumer_surplus: expected a function consumer_surplus(x, theta) -> number")
        self.consumer_surplus = consumer_surplus
        if producer_surplus is not None and not callable(producer_surplus):
            raise InputError("producer_surplus: expected a function producer_surplus(x, theta) -> number")
        self.producer_surplus = producer_surplus
        for label, hook in (("fixed_point", fixed_point), ("best_response", best_response)):
            if hook is not None and not callable(hook):
                raise InputError(f"{label}: expected a function {label}(x, theta) -> stacked actions")
        self.fixed_point = fixed_point
        self.best_response = best_response
        self.name = name
        self.source: str | None = None
        self.defaults: dict[str, np.ndarray] = {
            str(k): _as_param(k, v) for k, v in (params or {}).items()
        }
        self.lower = self._per_action("lower", lower, -math.inf)
        self.upper = self._per_action("upper", upper, math.inf)
        bad = np.nonzero(self.lower > self.upper)[0]
        if bad.size:
            k = int(bad[0])
            raise InputError(
                f"lower/upper: {self.coordinate_name(k)} has lower bound {self.lower[k]:g} "
                f"above its upper bound {self.upper[k]:g}; expected lower <= upper"
            )
        if search_box is not None and not callable(search_box):
            lo, hi = self._box_arrays(search_box)
            search_box = {"lo": lo, "hi": hi}
        self._search_box = search_box
        self._cache: dict[Any, Any] = {}

    # ------------------------------------------------------------ structure
    def coordinate_name(self, k: int) -> str:
        """Name of stacked coordinate ``k``: ``player`` or ``player[j]``."""
        i = int(self.owner[k])
        if self.sizes[i] == 1:
            return self.players[i]
        return f"{self.players[i]}[{k - self.offsets[i]}]"

    def split(self, x) -> dict[str, jax.Array]:
        """Stacked actions ``x`` (shape ``(n,)``) to ``{player: actions}``."""
        return {p: x[o : o + m] for p, o, m in zip(self.players, self.offsets, self.sizes)}

    def stack(self, actions: Mapping[str, Any]) -> jax.Array:
        """``{player: actions}`` to the stacked vector of shape ``(n,)``."""
        return jnp.concatenate([jnp.atleast_1d(jnp.asarray(actions[p], dtype=float)) for p in self.players])

    def _per_action(self, field: str, spec, fill: float) -> np.ndarray:
        out = np.full(self.n, fill, dtype=float)
        if spec is None:
            return out
        if not isinstance(spec, Mapping):
            raise InputError(f"{field}: expected a mapping of player name to a number or a list")
        for player, value in spec.items():
            if player not in self.players:
                raise InputError(f"{field}: unknown player {player!r}; players are {', '.join(self.players)}")
            if value is None:
                continue
            i = self.players.index(player)
            o, m = self.offsets[i], self.sizes[i]
            try:
                arr = np.asarray(value, dtype=float)
            except (TypeError, ValueError):
                raise InputError(f"{field}[{player!r}]: expected a number or a list of {m} numbers, got {value!r}") from None
            if arr.ndim == 0:
                arr = np.full(m, float(arr))
            if arr.shape != (m,) or np.isnan(arr).any():
                raise InputError(f"{field}[{player!r}]: expected a number or a list of {m} numbers, got {value!r}")
            out[o : o + m] = arr
        return out

    def _box_arrays(self, box) -> tuple[np.ndarray, np.ndarray]:
        if not isinstance(box, Mapping):
            raise InputError("search_box: expected a mapping {player: (lo, hi)} or a function of theta")
        lo = np.full(self.n, np.nan)
        hi = np.full(self.n, np.nan)
        for player, pair in box.items():
            if player not in self.players:
                raise InputError(f"search_box: unknown player {player!r}; players are {', '.join(self.players)}")
            if not isinstance(pair, (tuple, list)) or len(pair) != 2:
                raise InputError(f"search_box[{player!r}]: expected a pair (lo, hi), got {pair!r}")
            i = self.players.index(player)
            o, m = self.offsets[i], self.sizes[i]
            for arr, v, side in ((lo, pair[0], "lo"), (hi, pair[1], "hi")):
                try:
                    a = np.broadcast_to(np.asarray(v, dtype=float), (m,))
                except (TypeError, ValueError):
                    raise InputError(f"search_box[{player!r}] {side}: expected a number or {m} numbers, got {v!r}") from None
                if not np.all(np.isfinite(a)):
                    raise InputError(f"search_box[{player!r}] {side}: expected finite numbers, got {v!r}")
                arr[o : o + m] = a
        if np.any(lo > hi):
            k = int(np.nonzero(lo > hi)[0][0])
            raise InputError(f"search_box: {self.coordinate_name(k)} has lo {lo[k]:g} above hi {hi[k]:g}")
        return lo, hi

    # ------------------------------------------------------------ parameters
    def theta(self, overrides: Mapping[str, Any] | None = None) -> Params:
        """Parameter values as float64 arrays, defaults updated by ``overrides``.

        Raises :class:`InputError` for an unknown name or a value whose shape
        differs from the default's.
        """
        out = dict(self.defaults)
        for name, value in (overrides or {}).items():
            if name not in self.defaults:
                known = ", ".join(self.defaults) or "none"
                raise InputError(f"parameter {name!r}: unknown; this model's parameters are {known}")
            if isinstance(value, jax.Array) and not isinstance(value, jax.core.Tracer):
                value = np.asarray(value)
            if isinstance(value, jax.core.Tracer):
                arr = value
            else:
                arr = _as_param(name, value)
            expected = self.defaults[name].shape
            if tuple(arr.shape) != expected:
                raise InputError(
                    f"parameter {name!r}: expected {_describe_shape(expected)}, "
                    f"got {_describe_shape(tuple(arr.shape))}"
                )
            out[name] = arr
        return {k: jnp.asarray(v, dtype=float) for k, v in out.items()}

    # ------------------------------------------------------------ numerics
    def payoff_vector(self, x, theta) -> jax.Array:
        """All players' payoffs at stacked actions ``x``, shape ``(N,)``."""
        out = self.payoffs(self.split(x), theta)
        return jnp.stack([jnp.asarray(out[p], dtype=float).reshape(()) for p in self.players])

    def pseudo_gradient(self, x, theta) -> jax.Array:
        r"""The pseudo-gradient :math:`F(x) = (\nabla_{x_i} u_i)_i`, shape ``(n,)``."""
        full = jax.jacrev(self.payoff_vector)(x, theta)  # (N, n)
        return full[self.owner, jnp.arange(self.n)]

    def solver_field(self, x, theta) -> jax.Array:
        """The first-order system the solver drives to zero (``foc`` or ``F``)."""
        if self.foc is None:
            return self.pseudo_gradient(x, theta)
        out = self.foc(self.split(x), theta)
        return jnp.concatenate([jnp.asarray(out[p], dtype=float).reshape(m) for p, m in zip(self.players, self.sizes)])

    def jacobian(self, x, theta) -> jax.Array:
        r"""The game Jacobian :math:`J = \partial F / \partial x`, shape ``(n, n)``.

        Row ``k`` holds the derivatives of the owner's marginal payoff in
        coordinate ``k``; the diagonal blocks are the players' own Hessians.
        In general ``J`` is not symmetric.
        """
        return jax.jacfwd(self.pseudo_gradient)(x, theta)

    def region(self, theta) -> tuple[jax.Array, jax.Array]:
        """The finite box used for starts and deviation checks, ``(lo, hi)``.

        Finite bounds are used where given; otherwise the search box, then the
        default described in :class:`Game`. Works on traced ``theta``.
        """
        if not any(isinstance(v, jax.core.Tracer) for v in jax.tree.leaves(theta)):
            # Compiled once rather than run op by op: every eager operation is a
            # compilation of its own, and a compiled function is kept between runs.
            return self.cached("region", lambda: jax.jit(self._region))(theta)
        return self._region(theta)

    def _region(self, theta) -> tuple[jax.Array, jax.Array]:
        lo_b = jnp.asarray(self.lower)
        hi_b = jnp.asarray(self.upper)
        if self._search_box is None:
            sb_lo = jnp.full(self.n, jnp.nan)
            sb_hi = jnp.full(self.n, jnp.nan)
        elif callable(self._search_box):
            box = self._search_box(theta)
            sb_lo, sb_hi = self._traced_box(box)
        else:
            sb_lo = jnp.asarray(self._search_box["lo"])
            sb_hi = jnp.asarray(self._search_box["hi"])
        fin_lo = np.isfinite(self.lower)
        fin_hi = np.isfinite(self.upper)
        w = DEFAULT_BOX_HALF_WIDTH
        safe_lo = np.where(fin_lo, self.lower, 0.0)
        safe_hi = np.where(fin_hi, self.upper, 0.0)
        dflt_lo = np.where(fin_hi, safe_hi - w * np.maximum(1.0, np.abs(safe_hi)), -w)
        dflt_hi = np.where(fin_lo, safe_lo + w * np.maximum(1.0, np.abs(safe_lo)), w)
        lo = jnp.where(fin_lo, lo_b, jnp.where(jnp.isnan(sb_lo), dflt_lo, sb_lo))
        hi = jnp.where(fin_hi, hi_b, jnp.where(jnp.isnan(sb_hi), dflt_hi, sb_hi))
        # A search box may reach past a finite bound; actions never do.
        lo = jnp.maximum(lo, jnp.where(fin_lo, lo_b, -jnp.inf))
        hi = jnp.minimum(hi, jnp.where(fin_hi, hi_b, jnp.inf))
        return lo, hi

    def _traced_box(self, box):
        lo = []
        hi = []
        for p, m in zip(self.players, self.sizes):
            pair = box.get(p) if isinstance(box, Mapping) else None
            if pair is None:
                lo.append(jnp.full(m, jnp.nan))
                hi.append(jnp.full(m, jnp.nan))
            else:
                lo.append(jnp.broadcast_to(jnp.asarray(pair[0], dtype=float), (m,)))
                hi.append(jnp.broadcast_to(jnp.asarray(pair[1], dtype=float), (m,)))
        return jnp.concatenate(lo), jnp.concatenate(hi)

    def cached(self, key, build: Callable[[], Any]):
        """Memoise a compiled function on this game (one compile per game).

        For a game loaded from a model file, jitted functions are also kept
        between runs when the command line's cache is on (see
        :mod:`equipoise._trace_cache`); ``key`` then names the function and
        its options.
        """
        if key not in self._cache:
            self._cache[key] = _trace_cache.persistent(self, key, build())
        return self._cache[key]

    def __repr__(self) -> str:
        label = self.name or self.source or "Game"
        blocks = ", ".join(f"{p}: {m}" for p, m in zip(self.players, self.sizes))
        return f"<{label}: {blocks}>"


def _as_param(name, value) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"parameter {name!r}: expected a number or a (nested) list of numbers, got {value!r}") from None
    if not np.all(np.isfinite(arr)):
        raise InputError(f"parameter {name!r}: expected finite numbers, got {value!r}")
    return arr


def _describe_shape(shape: tuple[int, ...]) -> str:
    if shape == ():
        return "a number"
    if len(shape) == 1:
        return f"a list of {shape[0]} numbers"
    return "an array of shape (" + ", ".join(str(s) for s in shape) + ")"

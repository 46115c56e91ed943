"""What a sweep covers: a model file, fixed parameter values, axes, and how each point is solved.

A :class:`SweepSpec` is plain data. It can be written in Python, read from a TOML
file (:func:`load_spec`) or built from command-line flags (:func:`parse_axis`).
The points are the Cartesian product of the axes (first axis slowest) or, with
``sample``, a scrambled Sobol sample of the box the axes span. Points are cut
into batches of ``batch`` consecutive points; a batch is the unit of work,
of storage and of resumption, so its contents depend on the spec alone.
"""

from __future__ import annotations

import dataclasses
import hashlib
import itertools
import json
import math
import os
import re
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._errors import InputError
from .._sampling import unit_sample

#: Stability labels a sweep can attach: every label, equal speeds only, or none.
LABELS = ("full", "equal", "none")
#: Largest sweep, batch and number of starts accepted (far beyond what one machine solves in a day).
MAX_POINTS, MAX_BATCH, MAX_STARTS = 10**9, 65536, 4096
#: Column names of the store's points table and results view: an axis may not take one (case ignored).
RESERVED = ("id", "batch", "status", "reason", "equilibria", "point", "rank", "actions", "payoffs", "residual",
            "nash", "starts", "equal_speeds", "equal_abscissa", "player_speeds", "coordinate_speeds", "hicksian",
            "learning_rate_limit", "best_response_radius", "stability")

_NAME = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:\[\s*(\d+)\s*\])?\s*$")


@dataclass(frozen=True)
class Axis:
    """One swept parameter, or one entry ``name[index]`` of a vector parameter.

    Attributes
    ----------
    name : str
        ``"a"`` or ``"c[2]"``; the CSV column and the plot label use it as given.
    values : tuple of float
        Grid values (Cartesian sweeps).
    low, high : float, optional
        The interval sampled in a ``sample`` sweep.
    scale : {"linear", "log"}
        How a sample fills ``[low, high]``.

    Examples
    --------
    >>> Axis.linear("c[2]", 10.0, 40.0, 4).values
    (10.0, 20.0, 30.0, 40.0)
    """

    name: str
    values: tuple[float, ...] = ()
    low: float | None = None
    high: float | None = None
    scale: str = "linear"

    @classmethod
    def linear(cls, name: str, start: float, stop: float, num: int) -> "Axis":
        """``num`` evenly spaced values from ``start`` to ``stop`` inclusive."""
        _finite_ends(name, start, stop)
        return cls(name, tuple(float(v) for v in np.linspace(start, stop, _count(name, num))))

    @classmethod
    def log(cls, name: str, start: float, stop: float, num: int) -> "Axis":
        """``num`` values evenly spaced in logarithm from ``start`` to ``stop`` (both positive)."""
        _finite_ends(name, start, stop)
        if not (start > 0 and stop > 0):
            raise InputError(f"axis {name}: a log range needs positive start and stop, got {start:g}:{stop:g}")
        return cls(name, tuple(float(v) for v in np.geomspace(start, stop, _count(name, num))), scale="log")

    @property
    def parameter(self) -> tuple[str, int | None]:
        """``(parameter name, entry index or None)``."""
        m = _NAME.match(self.name)
        if not m:
            raise InputError(f"axis {self.name!r}: expected NAME or NAME[INDEX], e.g. c[0]")
        return m.group(1), None if m.group(2) is None else int(m.group(2))


def _count(name: str, num) -> int:
    if isinstance(num, bool) or not isinstance(num, (int, np.integer)) or not 1 <= num <= MAX_POINTS:
        raise InputError(f"axis {name}: expected a positive whole number of values (at most {MAX_POINTS}), "
                         f"got {num!r}")
    return int(num)


def _finite_ends(name: str, start, stop) -> None:
    if not (math.isfinite(start) and math.isfinite(stop)):
        raise InputError(f"axis {name}: expected finite start and stop, got {start!r}:{stop!r}")


@dataclass(frozen=True)
class SweepSpec:
    """A sweep: model file, fixed parameters, axes and solve settings.

    Attributes
    ----------
    model : str
        Path of the model file (a Python file defining ``game``).
    axes : tuple of Axis
    params : dict
        Fixed parameter overrides, applied at every point before the axes.
    sample : int, optional
        Number of points of a scrambled Sobol sample of the axes' box
        (``low``/``high`` of each axis); None for the Cartesian grid.
    sample_seed : int
        Scrambling seed of that sample.
    starts : int
        Sobol starting points per point (warm starts from the batch
        neighbours' equilibria are added).
    seed : int
        Seed of the starting points and of the deviation search.
    all_equilibria : bool
        Run the full multistart with deflation rounds at every point
        (:func:`equipoise.solve` with ``all_equilibria=True``), point by point.
    labels : {"full", "equal", "none"}
        Stability labels attached to each equilibrium.
    deviation_starts : int
        Starts per player of the global deviation check.
    batch : int
        Points per batch (the unit of vectorisation, storage and resumption).
    source : str, optional
        The TOML file the spec came from (for error messages); not part of
        the spec's identity.
    """

    model: str
    axes: tuple[Axis, ...]
    params: Mapping[str, Any] = field(default_factory=dict)
    sample: int | None = None
    sample_seed: int = 0
    starts: int = 8
    seed: int = 0
    all_equilibria: bool = False
    labels: str = "full"
    deviation_starts: int = 8
    batch: int = 64
    source: str | None = field(default=None, compare=False)

    # ------------------------------------------------------------ checks
    def where(self, what: str) -> str:
        return f"{self.source}: {what}" if self.source else what

    def validate(self) -> "SweepSpec":
        """Check the settings (not yet the model); raises :class:`InputError`."""
        if not self.axes:
            raise InputError(self.where("axes: expected at least one axis"))
        seen: dict[tuple, str] = {}
        columns: set[str] = set()
        for axis in self.axes:
            try:
                target = axis.parameter
            except InputError as exc:
                raise InputError(self.where(str(exc))) from None
            if target in seen:
                raise InputError(self.where(f"axis {axis.name}: the same parameter entry as axis {seen[target]}; "
                                            "expected each axis once"))
            seen[target] = axis.name
            if axis.name.lower() in RESERVED or axis.name.lower() in columns:
                raise InputError(self.where(f"axis {axis.name}: the name clashes with a column of the results "
                                            "store; write it differently (e.g. with spaces removed or an index)"
                                            if axis.name.lower() in columns else
                                            f"axis {axis.name}: the name is a column of the results store "
                                            f"({', '.join(RESERVED)}); rename the parameter in the model"))
            columns.add(axis.name.lower())
            if self.sample is None:
                if not axis.values:
                    raise InputError(self.where(f"axis {axis.name}: expected values (a list, or start, stop "
                                                "and num) for a grid sweep"))
                if not all(math.isfinite(v) for v in axis.values):
                    raise InputError(self.where(f"axis {axis.name}: expected finite values"))
            else:
                if axis.low is None or axis.high is None or not (math.isfinite(axis.low) and math.isfinite(axis.high)):
                    raise InputError(self.where(f"axis {axis.name}: a sample sweep needs finite start and stop"))
                if axis.low > axis.high:
                    raise InputError(self.where(f"axis {axis.name}: start {axis.low:g} is above stop {axis.high:g}"))
                if axis.scale == "log" and axis.low <= 0:
                    raise InputError(self.where(f"axis {axis.name}: a log range needs positive start and stop"))
            if axis.scale not in ("linear", "log"):
                raise InputError(self.where(f"axis {axis.name}: scale {axis.scale!r}; expected 'linear' or 'log'"))
        _whole(self, "starts", self.starts, 1, MAX_STARTS)
        _whole(self, "deviation_starts", self.deviation_starts, 1, MAX_STARTS)
        _whole(self, "batch", self.batch, 1, MAX_BATCH)
        _whole(self, "seed", self.seed, 0)
        _whole(self, "sample_seed", self.sample_seed, 0)
        if self.sample is not None:
            _whole(self, "sample", self.sample, 1, MAX_POINTS)
        elif self.size > MAX_POINTS:
            raise InputError(self.where(f"axes: {self.size} grid points; expected at most {MAX_POINTS}"))
        if self.labels not in LABELS:
            raise InputError(self.where(f"labels: {self.labels!r}; expected one of {', '.join(LABELS)}"))
        if not isinstance(self.all_equilibria, bool):
            raise InputError(self.where(f"all_equilibria: expected true or false, got {self.all_equilibria!r}"))
        return self

    def check_game(self, game) -> dict[str, np.ndarray]:
        """Check the fixed parameters and axes against ``game``; the base parameter values."""
        try:
            base = {k: np.asarray(v) for k, v in game.theta(dict(self.params)).items()}
        except InputError as exc:
            raise InputError(self.where(f"params: {exc}")) from None
        for axis in self.axes:
            name, index = axis.parameter
            if name not in base:
                raise InputError(self.where(f"axis {axis.name}: {name!r} is not a parameter of the model "
                                            f"(it has {', '.join(base) or 'none'})"))
            shape = base[name].shape
            if index is None and shape != ():
                hint = f"give an entry, e.g. {name}[0]" if len(shape) == 1 else \
                    "only numbers and entries of vector parameters can be swept"
                raise InputError(self.where(f"axis {axis.name}: parameter {name!r} has shape {shape}; {hint}"))
            if index is not None and (len(shape) != 1 or not 0 <= index < shape[0]):
                raise InputError(self.where(f"axis {axis.name}: expected an index into a vector of "
                                            f"{shape[0] if len(shape) == 1 else 'one dimension'} entries"))
        return base

    # ------------------------------------------------------------ points
    @property
    def size(self) -> int:
        """Number of points."""
        if self.sample is not None:
            return int(self.sample)
        return math.prod(len(a.values) for a in self.axes)

    @property
    def batches(self) -> int:
        """Number of batches."""
        return -(-self.size // self.batch)

    def points(self) -> np.ndarray:
        """Axis values of every point, shape ``(size, len(axes))``, in point order."""
        if self.sample is None:
            return np.array(list(itertools.product(*[a.values for a in self.axes])), dtype=float)
        u = unit_sample(int(self.sample), len(self.axes), int(self.sample_seed))
        cols = []
        for k, a in enumerate(self.axes):
            if a.scale == "log":
                cols.append(np.exp(np.log(a.low) + (np.log(a.high) - np.log(a.low)) * u[:, k]))
            else:
                cols.append(a.low + (a.high - a.low) * u[:, k])
        return np.stack(cols, axis=1)

    def first_point(self) -> np.ndarray:
        """Axis values of point 0, shape ``(1, len(axes))``, without building the whole grid."""
        if self.sample is not None:
            return self.points()[:1]
        return np.array([[a.values[0] for a in self.axes]], dtype=float)

    def batch_indices(self, b: int) -> np.ndarray:
        """Point indices of batch ``b``."""
        return np.arange(b * self.batch, min((b + 1) * self.batch, self.size))

    def thetas(self, base: Mapping[str, np.ndarray], values: np.ndarray) -> dict[str, np.ndarray]:
        """Full parameter arrays for the points with axis ``values`` (leading axis: points)."""
        out = {k: np.repeat(np.asarray(v, dtype=float)[None], values.shape[0], axis=0) for k, v in base.items()}
        for k, axis in enumerate(self.axes):
            name, index = axis.parameter
            if index is None:
                out[name][:] = values[:, k]
            else:
                out[name][:, index] = values[:, k]
        return out

    # ------------------------------------------------------------ identity
    def to_dict(self) -> dict[str, Any]:
        """JSON-ready description (everything but ``source``)."""
        out = {f.name: getattr(self, f.name) for f in dataclasses.fields(self) if f.name != "source"}
        out["axes"] = [dataclasses.asdict(a) for a in self.axes]
        out["params"] = {k: np.asarray(v, dtype=float).tolist() for k, v in dict(self.params).items()}
        return out

    def fingerprint(self, model_text: str) -> str:
        """Identity of the results: the model file's contents and everything but the model's path."""
        body = self.to_dict()
        body.pop("model")
        body["model_sha256"] = hashlib.sha256(model_text.encode()).hexdigest()
        return hashlib.sha256(json.dumps(body, sort_keys=True).encode()).hexdigest()


def _whole(spec: SweepSpec, key: str, value, least: int, most: int | None = None) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < least \
            or (most is not None and value > most):
        kind = "positive" if least > 0 else "non-negative"
        limit = f" (at most {most})" if most is not None else ""
        raise InputError(spec.where(f"{key}: expected a {kind} whole number{limit}, got {value!r}"))


# ---------------------------------------------------------------- TOML
_TOP = {"model", "store", "params", "axis", "sample", "solve"}
_AXIS = {"name", "values", "start", "stop", "num", "scale"}
_SAMPLE = {"points", "seed"}
_SOLVE = {"starts", "seed", "all_equilibria", "labels", "deviation_starts", "batch"}


def load_spec(path: str | os.PathLike) -> tuple[SweepSpec, str | None]:
    """Read a sweep specification from a TOML file.

    A relative ``model`` (and ``store``) is taken relative to the TOML file.

    Returns
    -------
    spec : SweepSpec
    store : str or None
        The ``store`` the file names, if any.

    Examples
    --------
    A file such as::

        model = "cournot_saltmere_ferries.py"
        store = "ferries.sqlite"

        [params]
        a = 120.0

        [[axis]]
        name = "c[2]"
        start = 20.0
        stop = 90.0
        num = 36

        [solve]
        starts = 8
        labels = "full"
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"{path}: sweep file not found; expected a TOML file")
    try:
        with open(path, "rb") as fh:
            doc = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {exc}") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not valid TOML: not UTF-8 text") from None

    def bad(msg: str):
        return InputError(f"{path}: {msg}")

    _known(doc, _TOP, "the top level", bad)
    model = doc.get("model")
    if not isinstance(model, str) or not model:
        raise bad("model: expected the path of a model file, e.g. model = \"ferries.py\"")
    here = os.path.dirname(os.path.abspath(path))
    model = model if os.path.isabs(model) else os.path.join(here, model)
    store = doc.get("store")
    if store is not None:
        if not isinstance(store, str) or not store:
            raise bad("store: expected a file path")
        store = store if os.path.isabs(store) else os.path.join(here, store)
    params = doc.get("params", {})
    if not isinstance(params, dict):
        raise bad("params: expected a table of parameter values")
    for key, value in params.items():
        if not _numeric(value):
            raise bad(f"params: {key}: expected a number or a (nested) list of numbers, got {value!r}")
    sample = doc.get("sample")
    if sample is not None:
        if not isinstance(sample, dict):
            raise bad("sample: expected a table with points (and seed)")
        _known(sample, _SAMPLE, "[sample]", bad)
        if "points" not in sample:
            raise bad("[sample] points: missing; expected the number of sampled points")
    raw_axes = doc.get("axis")
    if not isinstance(raw_axes, list) or not raw_axes or not all(isinstance(a, dict) for a in raw_axes):
        raise bad("axis: expected one or more [[axis]] tables")
    axes = [_axis_from_table(t, k, sample is not None, bad) for k, t in enumerate(raw_axes)]
    solve = doc.get("solve", {})
    if not isinstance(solve, dict):
        raise bad("solve: expected a table of solve settings")
    _known(solve, _SOLVE, "[solve]", bad)
    spec = SweepSpec(model=model, axes=tuple(axes), params=params,
                     sample=None if sample is None else sample.get("points"),
                     sample_seed=0 if sample is None else sample.get("seed", 0),
                     source=path, **solve)
    return spec.validate(), store


def _known(table: dict, allowed: set, where: str, bad) -> None:
    for key in table:
        if key not in allowed:
            raise bad(f"unknown key {key!r} in {where}; expected one of {', '.join(sorted(allowed))}")


def _axis_from_table(t: dict, k: int, sampled: bool, bad) -> Axis:
    _known(t, _AXIS, f"[[axis]] number {k + 1}", bad)
    name = t.get("name")
    if not isinstance(name, str):
        raise bad(f"[[axis]] number {k + 1}: name: expected NAME or NAME[INDEX], e.g. \"c[0]\"")
    scale = t.get("scale", "linear")
    if scale not in ("linear", "log"):
        raise bad(f"axis {name}: scale {scale!r}; expected \"linear\" or \"log\"")
    if "values" in t:
        if any(key in t for key in ("start", "stop", "num")):
            raise bad(f"axis {name}: give either values or start/stop/num, not both")
        vals = t["values"]
        if not isinstance(vals, list) or not vals or not all(_number(v) for v in vals):
            raise bad(f"axis {name}: values: expected a non-empty list of numbers")
        if sampled:
            raise bad(f"axis {name}: a [sample] sweep takes start and stop, not values")
        if "scale" in t:
            raise bad(f"axis {name}: scale applies to start/stop ranges, not to a list of values")
        return Axis(name, tuple(float(v) for v in vals))
    if sampled and "num" in t:
        raise bad(f"axis {name}: num: a [sample] sweep draws [sample] points; give start and stop only")
    for key in ("start", "stop") + (() if sampled else ("num",)):
        if key not in t:
            raise bad(f"axis {name}: {key}: missing; expected values, or start, stop"
                      + ("" if sampled else " and num"))
        if key != "num" and not _number(t[key]):
            raise bad(f"axis {name}: {key}: expected a number, got {t[key]!r}")
    try:
        if sampled:
            return Axis(name, low=float(t["start"]), high=float(t["stop"]), scale=scale)
        make = Axis.log if scale == "log" else Axis.linear
        return make(name, float(t["start"]), float(t["stop"]), t["num"])
    except InputError as exc:
        raise bad(str(exc)) from None


def _number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _numeric(v) -> bool:
    return all(_numeric(x) for x in v) if isinstance(v, list) and v else _number(v)


# ---------------------------------------------------------------- flags
def parse_axis(text: str, sampled: bool = False) -> Axis:
    """An axis from a command-line flag.

    ``NAME=START:STOP:NUM`` (linear), ``NAME=START:STOP:NUM:log``,
    ``NAME=[v1,v2,...]``, and for a sample sweep ``NAME=LOW:HIGH`` or
    ``NAME=LOW:HIGH:log``.
    """
    name, sep, rhs = text.partition("=")
    if not sep or not name.strip():
        raise InputError(f"--axis {text!r}: expected NAME=START:STOP:NUM, e.g. --axis c[2]=10:40:31")
    name = name.strip()
    rhs = rhs.strip()
    if rhs.startswith("["):
        try:
            vals = json.loads(rhs)
        except json.JSONDecodeError:
            vals = None
        if not isinstance(vals, list) or not vals or not all(_number(v) for v in vals):
            raise InputError(f"--axis {text!r}: expected a JSON list of numbers after '='")
        if sampled:
            raise InputError(f"--axis {text!r}: a sampled sweep takes NAME=LOW:HIGH, not a list")
        return Axis(name, tuple(float(v) for v in vals))
    parts = rhs.split(":")
    scale = "linear"
    if parts and parts[-1] in ("log", "linear"):
        scale = parts.pop()
    want = 2 if sampled else 3
    form = "NAME=LOW:HIGH[:log]" if sampled else "NAME=START:STOP:NUM[:log]"
    if len(parts) != want:
        raise InputError(f"--axis {text!r}: expected {form}")
    try:
        lo, hi = float(parts[0]), float(parts[1])
        num = int(parts[2]) if not sampled else None
    except ValueError:
        raise InputError(f"--axis {text!r}: expected numbers in {form}") from None
    if sampled:
        _finite_ends(name, lo, hi)
        return Axis(name, low=lo, high=hi, scale=scale)
    return (Axis.log if scale == "log" else Axis.linear)(name, lo, hi, num)


def spec_from_flags(model: str, axes: Sequence[str], params: Mapping[str, Any], sample: int | None,
                    **settings) -> SweepSpec:
    """A spec from the command line's flags (see :func:`parse_axis`)."""
    return SweepSpec(model=model, axes=tuple(parse_axis(a, sample is not None) for a in axes),
                     params=dict(params), sample=sample, **settings).validate()

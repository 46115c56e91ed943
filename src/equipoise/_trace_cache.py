"""Traced functions kept between runs, for games loaded from a model file.

JAX's persistent compilation cache skips compiling, but every new process
still traces and lowers each function, about a second for a solve. This
module keeps the lowered function instead (``jax.export``, serialized) in
``traces/`` inside the compilation cache directory; the next process with
the same model and the same argument shapes deserializes it and only looks up
the compiled code.

An entry is found by a SHA-256 key over everything a trace depends on: the
model file's text; the game's data (players, bounds, search box, parameter
shapes) and the jaxprs of its functions (payoffs, ``foc``, ...), so that data
or code the model file reads from elsewhere is covered too; the name and
options of the cached function; the structure, shapes and dtypes of the
arguments; equipoise's own source; the versions of Python, jax, jaxlib and
numpy, the JAX settings that change a trace. Anything that cannot be keyed
safely (a game function of unknown kind, options other than plain numbers
and strings) is not cached. A missing, stale or unreadable entry only means
tracing as usual.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import re
import sys
import tempfile
import threading
from concurrent.futures import Future, ThreadPoolExecutor

import jax
import numpy as np

from ._errors import InputError

#: Where entries are kept; None (the default) switches the cache off. Set by
#: :func:`equipoise._compile_cache.use_compile_cache`.
DIRECTORY: str | None = None

_MAGIC = b"equipoise-trace 1\n"

#: How a game's functions are called when their jaxprs are fingerprinted: on the
#: players' action dict, on the stacked actions, or on the parameters alone.
_CALLS = {"payoffs": "split", "foc": "split", "consumer_surplus": "split", "producer_surplus": "split",
          "fixed_point": "stacked", "best_response": "stacked", "_search_box": "theta"}

#: Game attributes no trace depends on.
_SKIP = {"_cache", "source", "name"}

#: Settings that change what a trace produces.
_SETTINGS = ("jax_enable_x64", "jax_numpy_rank_promotion", "jax_numpy_dtype_promotion",
             "jax_default_matmul_precision", "jax_enable_checks", "jax_debug_nans", "jax_debug_infs")


class _Unsupported(Exception):
    """Something that cannot be keyed or stored safely: no persistent entry."""


def persistent(game, key, value):
    """``value`` (what a :meth:`Game.cached` builder returned) with its jitted functions kept on disk."""
    if DIRECTORY is None or game.source is None:
        return value
    if isinstance(value, tuple) and value and all(_is_jitted(f) for f in value):
        return tuple(_Persistent(game, (key, i), f) for i, f in enumerate(value))
    if _is_jitted(value):
        return _Persistent(game, key, value)
    return value


def kept(key, fn):
    """A jitted function of equipoise's own, depending on no game (such as the stability
    evidence), with its trace kept on disk like those of :func:`persistent`."""
    return _Persistent(None, key, fn) if _is_jitted(fn) else fn


def compile_ahead(fn, *args) -> None:
    """Start compiling ``fn`` for arguments like ``args`` beside the caller, where ``fn`` keeps its
    trace (see :meth:`_Persistent.ahead`); otherwise nothing."""
    ahead = getattr(fn, "ahead", None)
    if ahead is not None:
        ahead(*args)


def _is_jitted(value) -> bool:
    return isinstance(value, jax.stages.Wrapped)


class _Persistent:
    """Calls a jitted function through its stored export; traces (and stores) on a miss.

    Traced arguments (inside ``jit``, ``vmap``, ``grad``) go straight to the
    function, so transformations work as before.
    """

    def __init__(self, game, key, fn):
        self._game = game
        self._key = key
        self._fn = fn
        self._calls: dict = {}
        self._lock = threading.Lock()
        functools.update_wrapper(self, fn)

    def __call__(self, *args, **kwargs):
        signature, leaves = _signature(args, kwargs)
        if signature is None:
            return self._fn(*args, **kwargs)
        with self._lock:
            call = self._calls.get(signature)
            if call is None:
                call = self._calls[signature] = self._prepare(leaves, *signature)
        if isinstance(call, Future):
            call = call.result()  # compiled ahead; wait for it rather than compile twice
            self._calls[signature] = call
        if call is False:
            return self._fn(*args)
        flat, out_tree = call
        return jax.tree.unflatten(out_tree, flat(*leaves))

    def ahead(self, *args) -> None:
        """Prepare and compile for arguments like ``args`` in a background thread.

        A later call with such arguments waits for it. Meant for functions a
        caller knows it will need after a long compilation of another: on two
        cores, the compilations run side by side.
        """
        signature, leaves = _signature(args, {})
        if signature is None:
            return
        with self._lock:
            if signature not in self._calls:
                self._calls[signature] = _executor().submit(self._compiled, leaves, *signature)

    def _compiled(self, leaves, tree, types):
        try:
            call = self._prepare(leaves, tree, types)
            if call is False:
                return False
            flat, out_tree = call
            return flat.lower(*leaves).compile(), out_tree
        except Exception:  # the call itself will fail, or succeed, the usual way
            return False

    def _prepare(self, leaves, tree, types):
        """``(jitted flat call, output tree)`` from disk or by exporting; False where that fails."""
        try:
            digest = _entry_key(self._game, self._key, tree, types)
        except Exception:  # _Unsupported, or a source file that cannot be read: no entry
            return False
        path = os.path.join(DIRECTORY, digest[:2], digest + ".bin")
        loaded = _load(path, digest)
        if loaded is not None:
            return loaded
        out = {}

        def flat(*xs):
            result = self._fn(*jax.tree.unflatten(tree, xs))
            out["tree"] = jax.tree.structure(result)
            return tuple(jax.tree.leaves(result))

        try:
            exported = jax.export.export(jax.jit(flat))(*leaves)
            header = json.dumps(_encode(out["tree"])).encode()
            blob = bytes(exported.serialize())
        except InputError:
            raise
        except Exception:  # e.g. a host callback in the model, which export refuses: trace as usual
            return False
        _store(path, digest, header, blob)
        return jax.jit(exported.call), out["tree"]


def _signature(args, kwargs):
    """``((tree, types), leaves)`` of concrete positional arrays; ``(None, None)`` where the call
    must go straight to the function (traced arguments, keywords, non-arrays, cache off)."""
    if DIRECTORY is None or kwargs or jax.config.jax_disable_jit:
        return None, None
    leaves, tree = jax.tree.flatten(args)
    if any(isinstance(v, jax.core.Tracer) for v in leaves):
        return None, None
    try:
        return (tree, tuple(jax.typeof(v) for v in leaves)), leaves
    except TypeError:
        return None, None


@functools.lru_cache(maxsize=1)
def _executor() -> ThreadPoolExecutor:
    # One thread beside the caller's: XLA compiles a function on one core.
    return ThreadPoolExecutor(max_workers=1, thread_name_prefix="equipoise-compile")


def _load(path: str, digest: str):
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError:
        return None
    try:
        head, rest = data[: len(_MAGIC)], data[len(_MAGIC):]
        stored_key, checksum, header, blob = rest.split(b"\n", 3)
        if head != _MAGIC or stored_key.decode() != digest or checksum.decode() != _checksum(header, blob):
            return None  # someone else's entry, or a damaged one (deserializing it could crash)
        out_tree = jax.tree.structure(_decode(json.loads(header)))
        exported = jax.export.deserialize(bytearray(blob))
    except Exception:  # a truncated or foreign file is a miss, and is overwritten
        return None
    return jax.jit(exported.call), out_tree


def _checksum(header: bytes, blob: bytes) -> str:
    return hashlib.sha256(header + b"\n" + blob).hexdigest()


def _store(path: str, digest: str, header: bytes, blob: bytes) -> None:
    """Write atomically (processes of a sweep may store the same entry at once); failures are ignored."""
    try:
        os.makedirs(os.path.dirname(path), exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=os.path.dirname(path), suffix=".tmp")
        try:
            with os.fdopen(fd, "wb") as f:
                f.write(b"\n".join([_MAGIC + digest.encode(), _checksum(header, blob).encode(), header, blob]))
            os.replace(tmp, path)
        except BaseException:
            os.unlink(tmp)
            raise
    except OSError:
        pass


# ---------------------------------------------------------------- keys
def _entry_key(game, key, tree, types) -> str:
    h = hashlib.sha256()
    for part in (_environment(), _game_fingerprint(game), _plain(key), str(tree),
                 repr([(t.shape, str(t.dtype), t.weak_type) for t in types])):
        h.update(part.encode())
        h.update(b"\0")
    return h.hexdigest()


@functools.lru_cache(maxsize=1)
def _environment() -> str:
    """equipoise's source, the versions and the settings a trace depends on."""
    import jaxlib

    h = hashlib.sha256()
    root = os.path.dirname(os.path.abspath(__file__))
    for folder, dirs, files in sorted(os.walk(root)):
        dirs.sort()
        for name in sorted(files):
            if name.endswith(".py"):
                path = os.path.join(folder, name)
                h.update(os.path.relpath(path, root).encode())
                with open(path, "rb") as f:
                    h.update(f.read())
    versions = (sys.version, jax.__version__, jaxlib.__version__, np.__version__, jax.default_backend())
    return h.hexdigest() + repr(versions)


def _settings() -> str:
    return repr([(name, getattr(jax.config, name, None)) for name in _SETTINGS])


def _game_fingerprint(game) -> str:
    """The model file, the game's data and the jaxprs of its functions (once per game)."""
    if game is None:
        return "no game" + _settings()
    found = game.cached("trace_fingerprint", lambda: _safe_fingerprint(game))
    if not found:
        raise _Unsupported
    return found + _settings()


def _safe_fingerprint(game) -> str:
    try:
        return _compute_fingerprint(game)
    except Exception:  # _Unsupported, or model code that fails here and will report where it is used
        return ""


def _compute_fingerprint(game) -> str:
    h = hashlib.sha256()
    with open(game.source, "rb") as f:
        h.update(f.read())
    hooks = []
    for name, value in sorted(vars(game).items()):
        if name in _SKIP:
            continue
        if callable(value):
            if name not in _CALLS:
                raise _Unsupported(name)  # a function of unknown kind: its trace cannot be keyed
            hooks.append((name, value))
        else:
            h.update(f"{name}={_describe(value)};".encode())

    def probe(x, theta):
        out = {}
        for name, f in hooks:
            how = _CALLS[name]
            out[name] = f(game.split(x), theta) if how == "split" else f(x, theta) if how == "stacked" else f(theta)
        return out

    x = jax.ShapeDtypeStruct((game.n,), np.float64)
    theta = {k: jax.ShapeDtypeStruct(np.shape(v), np.float64) for k, v in game.defaults.items()}
    closed = jax.make_jaxpr(probe)(x, theta)
    # Printed jaxprs may name Python objects by address (custom derivative rules).
    h.update(re.sub(r" at 0x[0-9a-fA-F]+", "", str(closed)).encode())
    for c in closed.consts:
        h.update(_describe(np.asarray(c)).encode())
    return h.hexdigest()


def _describe(value) -> str:
    """A deterministic text for game data; _Unsupported for anything else."""
    if value is None or isinstance(value, (bool, int, float, str, np.integer, np.floating)):
        return repr(value)
    if isinstance(value, (np.ndarray, jax.Array)):
        arr = np.asarray(value)
        return f"array({arr.dtype},{arr.shape},{hashlib.sha256(np.ascontiguousarray(arr).tobytes()).hexdigest()})"
    if isinstance(value, (tuple, list)):
        return "[" + ",".join(_describe(v) for v in value) + "]"
    if isinstance(value, dict):
        items = sorted(((_describe(k), v) for k, v in value.items()), key=lambda kv: kv[0])
        return "{" + ",".join(f"{k}:{_describe(v)}" for k, v in items) + "}"
    raise _Unsupported(type(value).__name__)


def _plain(key) -> str:
    """A cache key of plain values (``Game.cached`` keys), or _Unsupported."""
    if key is None or isinstance(key, (bool, int, float, str)):
        return repr(key)
    if isinstance(key, tuple):
        return "(" + ",".join(_plain(k) for k in key) + ")"
    raise _Unsupported(type(key).__name__)


# ---------------------------------------------------------------- output structure
def _encode(tree):
    """A pytree structure as JSON: leaves, None, tuples, lists, dicts with string keys, named tuples."""
    if jax.tree_util.treedef_is_leaf(tree) and tree.num_leaves == 1:
        return "*"
    kind, data = tree.node_data()
    children = [_encode(c) for c in tree.children()]
    if kind is type(None):
        return None
    if kind is tuple:
        return {"tuple": children}
    if kind is list:
        return {"list": children}
    if kind is dict and all(isinstance(k, str) for k in data):
        return {"dict": [list(data), children]}
    if issubclass(kind, tuple) and hasattr(kind, "_fields"):
        return {"namedtuple": [kind.__module__, kind.__qualname__, children]}
    raise _Unsupported(kind.__name__)


def _decode(obj):
    """An example object with the encoded structure (leaves are 0)."""
    if obj == "*":
        return 0
    if obj is None:
        return None
    (kind, value), = obj.items()
    if kind == "tuple":
        return tuple(_decode(c) for c in value)
    if kind == "list":
        return [_decode(c) for c in value]
    if kind == "dict":
        keys, children = value
        return {k: _decode(c) for k, c in zip(keys, children)}
    if kind == "namedtuple":
        module, name, children = value
        # Only classes of modules already imported: reading an entry never imports code.
        cls = sys.modules.get(module)
        for part in name.split("."):
            cls = getattr(cls, part, None)
        if not (isinstance(cls, type) and issubclass(cls, tuple) and hasattr(cls, "_fields")):
            raise ValueError(f"{module}.{name} is not a named tuple")
        return cls(*(_decode(c) for c in children))
    raise ValueError(f"unknown node {kind!r}")

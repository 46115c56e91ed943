"""Load a model file: a Python file that defines ``game``."""

from __future__ import annotations

import hashlib
import importlib.util
import os
import sys

from ._checks import user_frame
from ._errors import InputError
from ._game import Game


def load_game(path: str | os.PathLike) -> Game:
    """Import the model file at ``path`` and return its ``game``.

    Raises
    ------
    InputError
        The file is missing, fails to import (the message shows the line),
        defines no ``game``, or ``game`` is not a :class:`Game`.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        what = "is a directory" if os.path.isdir(path) else "not found"
        raise InputError(f"{path}: model file {what}; expected a Python file that defines `game`")
    digest = hashlib.sha1(os.path.abspath(path).encode()).hexdigest()[:12]
    module_name = f"equipoise_model_{digest}"
    spec = importlib.util.spec_from_file_location(module_name, path)
    if spec is None or spec.loader is None:
        raise InputError(f"{path}: cannot be imported as Python; expected a .py file that defines `game`")
    module = importlib.util.module_from_spec(spec)
    sys.modules[module_name] = module
    try:
        spec.loader.exec_module(module)
    except SyntaxError as exc:
        sys.modules.pop(module_name, None)
        raise InputError(f"{path}:{exc.lineno}: syntax error: {exc.msg}") from None
    except InputError as exc:
        sys.modules.pop(module_name, None)
        loc = user_frame(exc, path)
        raise InputError(f"{loc or path}: {exc}") from None
    except SystemExit as exc:
        sys.modules.pop(module_name, None)
        raise InputError(f"{path}: model file called exit ({exc.code!r}) while being imported; "
                         "expected it to define `game`") from None
    except Exception as exc:  # the model's own code may raise anything
        sys.modules.pop(module_name, None)
        loc = user_frame(exc, path)
        raise InputError(f"{loc or path}: model file failed to import: {type(exc).__name__}: {exc}") from None
    if not hasattr(module, "game"):
        raise InputError(f"{path}: defines no `game`; expected `game = Game(...)` or a family such as cournot(...)")
    game = module.game
    if not isinstance(game, Game):
        raise InputError(f"{path}: `game` is a {type(game).__name__}; expected an equipoise.Game")
    game.source = path
    extra = getattr(module, "consumer_surplus", None)
    if extra is not None and game.consumer_surplus is None:
        if not callable(extra):
            raise InputError(f"{path}: `consumer_surplus` is a {type(extra).__name__}; expected a function "
                             "consumer_surplus(x, theta) -> number")
        game.consumer_surplus = extra
    return game

"""What ``import equipoise`` and a solve from the command line load.

Start-up time of the command line is mostly imports: the solve path must not
load the sweep, plotting and dynamics machinery, nor, once the cache holds the
starting points scipy drew, scipy.stats. Checked in a fresh interpreter.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

HEAVY = ["scipy.stats", "optax", "sqlite3", "matplotlib", "tqdm", "dask", "equipoise.sweeps._store",
         "equipoise.dynamics._simulate", "equipoise._continuation"]

MODEL = Path(__file__).resolve().parents[1] / "models" / "cournot_saltmere_ferries.py"


def _loaded(code: str, tmp_path) -> list[str]:
    probe = code + f"\nimport sys, json\nprint(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))"
    env = {"EQUIPOISE_CACHE": str(tmp_path / "cache")}
    import os

    proc = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=600,
                          env={**os.environ, **env})
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_import_loads_nothing_heavy(tmp_path):
    assert _loaded("import equipoise, equipoise.cli", tmp_path) == []


def test_solve_from_the_command_line_loads_nothing_heavy(tmp_path):
    code = ("import contextlib, io\nfrom equipoise.cli import main\n"
            f"with contextlib.redirect_stdout(io.StringIO()):\n    assert main(['solve', {str(MODEL)!r}]) == 0")
    # The first run draws its Sobol starts with scipy.stats and keeps them in the cache.
    assert _loaded(code, tmp_path) == ["scipy.stats"]
    # optax is imported only when a search for destabilising speeds runs; the ferries need none.
    assert _loaded(code, tmp_path) == []


def test_lazy_names_resolve():
    import equipoise

    assert equipoise.sweep.__module__ == "equipoise.sweeps._run"
    assert equipoise.simulate.__module__ == "equipoise.dynamics._simulate"
    assert "solve" in dir(equipoise)

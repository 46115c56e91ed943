"""Wall time of one command-line solve, cold and warm, against the cost of importing JAX.

equipoise side: ``equipoise solve models/logit_valemont_bakeries.py`` in a subprocess, its whole
wall time. Cold: ``EQUIPOISE_CACHE`` points at a fresh, empty temporary directory, so every
compiled function is built; warm: the same command again with the same directory, so the
compiled functions come from JAX's persistent cache. ``--repeats`` (default 3) such pairs, each
with its own new directory; the figures are medians.

In-run reference: the wall time of ``python -c "import jax"`` (median of the same number of
runs), the floor any JAX-based tool pays; ``python -c "import equipoise"`` is shown beside it.

Goals: at most 6 s cold, at most 3 s warm.

    python benchmarks/bench_cli.py [--repeats 3] [--model models/logit_valemont_bakeries.py] [--quick]

All benchmarks at once, tables into benchmarks/RESULTS.md: ``python benchmarks/run_all.py``.
"""

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np

import _common as C

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def wall(cmd, env=None):
    t = time.perf_counter()
    done = subprocess.run(cmd, capture_output=True, text=True, env=env, cwd=ROOT)
    seconds = time.perf_counter() - t
    if done.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)} failed (exit {done.returncode}):\n{done.stderr[-2000:]}")
    return seconds, done.stdout


def equipoise_command():
    """The installed ``equipoise`` script next to this interpreter, else ``python -m equipoise.cli``."""
    exe = os.path.join(os.path.dirname(sys.executable), "equipoise")
    if os.path.exists(exe):
        return [exe]
    return [sys.executable, "-m", "equipoise.cli"]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--model", default="models/logit_valemont_bakeries.py")
    ap.add_argument("--quick", action="store_true", help="a smoke run: one cold and one warm run")
    args = ap.parse_args()
    repeats = 1 if args.quick else args.repeats
    note = C.machine_note()

    cmd = equipoise_command() + ["solve", args.model]
    cold, warm, ref_jax, ref_eq = [], [], [], []
    for _ in range(repeats):
        ref_jax.append(wall([sys.executable, "-c", "import jax"])[0])
        ref_eq.append(wall([sys.executable, "-c", "import equipoise"])[0])
        folder = tempfile.mkdtemp(prefix="bench-cli-cache-")
        try:
            env = dict(os.environ, EQUIPOISE_CACHE=folder)
            t, out = wall(cmd, env)
            cold.append(t)
            entries = sum(len(files) for _, _, files in os.walk(folder))
            t, out_warm = wall(cmd, env)
            warm.append(t)
        finally:
            shutil.rmtree(folder, ignore_errors=True)
    # The report says how long the solve took; everything else must match.
    same = re.sub(r"in [0-9.]+ s", "", out).strip() == re.sub(r"in [0-9.]+ s", "", out_warm).strip()
    t_cold, t_warm = float(np.median(cold)), float(np.median(warm))
    t_jax, t_eq = float(np.median(ref_jax)), float(np.median(ref_eq))
    print(f"{' '.join(['equipoise'] + cmd[-2:])}: cold {', '.join(f'{t:.2f}' for t in cold)} s, "
          f"warm {', '.join(f'{t:.2f}' for t in warm)} s ({entries} cache files after a cold run; warm output "
          f"{'identical' if same else 'DIFFERENT'} but for the reported time); python -c 'import jax' {', '.join(f'{t:.2f}' for t in ref_jax)} s; "
          f"python -c 'import equipoise' {', '.join(f'{t:.2f}' for t in ref_eq)} s")
    rows = [
        ["`equipoise solve` cold (empty EQUIPOISE_CACHE)", f"{t_cold:.2f} s", ", ".join(f"{t:.2f}" for t in cold),
         f"{t_cold / t_jax:.1f}x", C.goal(t_cold <= 6, "<= 6 s")],
        ["`equipoise solve` warm (second run, same cache)", f"{t_warm:.2f} s", ", ".join(f"{t:.2f}" for t in warm),
         f"{t_warm / t_jax:.1f}x", C.goal(t_warm <= 3, "<= 3 s")],
        ["reference: `python -c \"import jax\"`", f"{t_jax:.2f} s", ", ".join(f"{t:.2f}" for t in ref_jax), "1.0x", ""],
        ["`python -c \"import equipoise\"`", f"{t_eq:.2f} s", ", ".join(f"{t:.2f}" for t in ref_eq),
         f"{t_eq / t_jax:.1f}x", ""],
    ]
    print(C.markdown_section(
        "cli", "One command-line solve, cold and warm (`python benchmarks/bench_cli.py`)",
        [f"`equipoise solve {args.model}` in a subprocess, whole wall time; cold: EQUIPOISE_CACHE set to a new empty "
         f"directory, warm: the same command again with that directory ({entries} cache files after a cold run; "
         f"warm output {'identical to' if same else '**different from**'} cold but for the reported time). {repeats} pair(s), each with its "
         f"own directory; medians. Reference in the same run: the wall time of `python -c \"import jax\"`. {note}."],
        ["run", "median wall time", "runs (s)", "over `import jax`", "goal"],
        rows))


if __name__ == "__main__":
    main()

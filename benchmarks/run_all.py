"""Run every benchmark and write their tables into benchmarks/RESULTS.md.

    python benchmarks/run_all.py                 # all benchmarks, full sizes (about half an hour)
    python benchmarks/run_all.py --quick         # a smoke run with small sizes (a few minutes)
    python benchmarks/run_all.py --only large,scaling

Each script (bench_bulk.py, bench_large.py, bench_scaling.py, bench_cli.py, bench_sweep.py,
bench_stability.py) runs in its own Python process, its output streamed here; each ends with a
Markdown section between ``<!-- bench: NAME -->`` and ``<!-- /bench -->``. Those sections replace
the ones of the same name inside the generated block of RESULTS.md, between
``<!-- generated: begin -->`` and ``<!-- generated: end -->`` (created after the title on the
first run), under a line naming the machine, the date and the library versions; sections of
benchmarks not run this time are kept, each with the date and mode of its own run. Nothing
outside the block is touched, so the hand-written analysis below it stays as written.

Every benchmark runs with ``OPENBLAS_NUM_THREADS=1`` unless ``--blas-threads`` says otherwise
(``--blas-threads 0`` keeps the environment as it is). Both sides of every figure use the same
OpenBLAS (jaxlib's CPU LU and QR call it too), and on this 2-core machine a second thread gains
nothing at these sizes while any other busy process makes the two-thread calls stall: a 200-price
dense Newton solve measured 4.8 ms with one thread and 680 to 780 ms with two while another
process kept one core busy (about 5 to 7 ms either way on an idle machine).

A benchmark that fails or runs past ``--timeout`` gets a section saying so and the last lines of
its error output; the exit status is then 1.
"""

from __future__ import annotations

import argparse
import datetime
import importlib.metadata
import os
import platform
import re
import signal
import subprocess
import sys
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
RESULTS = os.path.join(HERE, "RESULTS.md")
BEGIN, END = "<!-- generated: begin -->", "<!-- generated: end -->"
SECTION = re.compile(r"<!-- bench: (\w+) -->\n.*?<!-- /bench -->", re.S)
COMMAND = ("Every figure below the title can be regenerated with one command, `python benchmarks/run_all.py` "
           "(`--quick` for a smoke run with small sizes, `--only bulk,large` for some; one OpenBLAS thread "
           "unless `--blas-threads` says otherwise, see its docstring); it rewrites only the generated block that "
           "follows, and the hand-written analysis after the block is kept as written.")

#: (name, script) in the order of the generated block.
BENCHES = [
    ("bulk", "bench_bulk.py"),
    ("large", "bench_large.py"),
    ("scaling", "bench_scaling.py"),
    ("cli", "bench_cli.py"),
    ("sweep", "bench_sweep.py"),
    ("stability", "bench_stability.py"),
]


def machine_line():
    """CPU model and cores, the date, Python / jax / numpy / scipy versions."""
    model = platform.processor() or "unknown CPU"
    try:
        with open("/proc/cpuinfo") as fh:
            names = [line.split(":", 1)[1].strip() for line in fh if line.startswith("model name")]
        if names:
            model = names[0]
    except OSError:
        pass

    def version(pkg):
        try:
            return importlib.metadata.version(pkg)
        except importlib.metadata.PackageNotFoundError:
            return "not installed"

    return (f"Machine: {model}, {os.cpu_count()} cores, no GPU (CPU only). Block written "
            f"{datetime.datetime.now().strftime('%Y-%m-%d %H:%M')}; Python {platform.python_version()}, "
            f"jax {version('jax')}, numpy {version('numpy')}, scipy {version('scipy')}, "
            f"equipoise {version('equipoise')} at commit {git_head()}.")


def git_head():
    try:
        out = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True, text=True, cwd=ROOT)
        dirty = subprocess.run(["git", "status", "--porcelain", "--", "src"], capture_output=True, text=True, cwd=ROOT)
        return out.stdout.strip() + (" (with uncommitted changes in src/)" if dirty.stdout.strip() else "")
    except OSError:
        return "unknown"


def run_one(name, script, quick, timeout, env):
    """Run one benchmark, streaming its output; its Markdown section (or a failure section) and success."""
    cmd = [sys.executable, os.path.join(HERE, script)] + (["--quick"] if quick else [])
    print(f"\n=== {name}: {' '.join(os.path.relpath(c, ROOT) if c.startswith(ROOT) else c for c in cmd)}", flush=True)
    t = time.perf_counter()
    # Its own session, so a timeout can end the benchmark and the processes it started, and nothing else.
    proc = subprocess.Popen(cmd, cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    out, err = [], []

    def pump(stream, sink, echo):
        for line in stream:
            sink.append(line)
            echo.write(line)
            echo.flush()

    threads = [threading.Thread(target=pump, args=(proc.stdout, out, sys.stdout)),
               threading.Thread(target=pump, args=(proc.stderr, err, sys.stderr))]
    for th in threads:
        th.start()
    timed_out = False
    try:
        proc.wait(timeout=timeout)
    except subprocess.TimeoutExpired:
        timed_out = True
        os.killpg(proc.pid, signal.SIGTERM)
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
    for th in threads:
        th.join()
    seconds = time.perf_counter() - t
    stamp = (f"_Run {datetime.datetime.now().strftime('%Y-%m-%d %H:%M')}, "
             f"{'quick smoke run (small sizes; figures not comparable with the goals)' if quick else 'full run'}, "
             f"{seconds:.0f} s for the script._")
    found = SECTION.search("".join(out))
    if found and proc.returncode == 0:
        lines = found.group(0).split("\n")
        return "\n".join(lines[:2] + ["", stamp] + lines[2:]), True
    why = f"timed out after {timeout:.0f} s" if timed_out else (
        f"exit status {proc.returncode}" if proc.returncode else "no Markdown section in its output")
    tail = "".join(err[-15:]).rstrip() or "".join(out[-15:]).rstrip()
    return "\n".join([f"<!-- bench: {name} -->", f"### {name} (`python benchmarks/{script}`): **failed**", "",
                      stamp, "", f"The script {why}. Last lines of its output:", "", "```", tail, "```",
                      "<!-- /bench -->"]), False


def write_block(sections):
    """Replace the generated block of RESULTS.md (creating it after the title if missing), keeping the
    sections of benchmarks not run this time."""
    with open(RESULTS, encoding="utf-8") as fh:
        text = fh.read()
    if BEGIN in text and END in text:
        head, rest = text.split(BEGIN, 1)
        old, tail = rest.split(END, 1)
    else:
        lines = text.split("\n")
        title = next((i for i, line in enumerate(lines) if line.startswith("# ")), -1)
        head = "\n".join(lines[: title + 1]) + "\n\n"
        old, tail = "", "\n\n" + "\n".join(lines[title + 1:]).lstrip("\n")
    prefix = COMMAND.split(",")[0]
    if prefix in head:  # an earlier wording of the same paragraph
        head = re.sub(re.escape(prefix) + r"[^\n]*", lambda _: COMMAND, head)
    else:
        head = head.rstrip("\n") + "\n\n" + COMMAND + "\n\n"
    kept = {m.group(1): m.group(0) for m in SECTION.finditer(old)}
    kept.update(sections)
    order = [name for name, _ in BENCHES] + sorted(set(kept) - {name for name, _ in BENCHES})
    body = [machine_line(), ""]
    for name in order:
        if name in kept:
            body += [kept[name], ""]
    with open(RESULTS, "w", encoding="utf-8") as fh:
        fh.write(head + BEGIN + "\n" + "\n".join(body) + END + tail)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="small sizes: a smoke run of the whole suite")
    ap.add_argument("--only", help="comma-separated names: " + ", ".join(n for n, _ in BENCHES))
    ap.add_argument("--timeout", type=float, help="seconds per benchmark (default 3600, 900 with --quick)")
    ap.add_argument("--no-write", action="store_true", help="print the sections, leave RESULTS.md alone")
    ap.add_argument("--blas-threads", type=int, default=1,
                    help="OPENBLAS_NUM_THREADS for every benchmark (default 1; 0 keeps the environment's setting)")
    args = ap.parse_args()
    names = [n for n, _ in BENCHES]
    chosen = names if not args.only else [s.strip() for s in args.only.split(",") if s.strip()]
    unknown = [n for n in chosen if n not in names]
    if unknown:
        ap.error(f"--only: unknown benchmark(s) {', '.join(unknown)}; known: {', '.join(names)}")
    timeout = args.timeout or (900.0 if args.quick else 3600.0)
    env = dict(os.environ)
    if args.blas_threads:
        env["OPENBLAS_NUM_THREADS"] = str(args.blas_threads)
    sections, failed = {}, []
    t = time.perf_counter()
    for name, script in BENCHES:
        if name in chosen:
            sections[name], ok = run_one(name, script, args.quick, timeout, env)
            if not ok:
                failed.append(name)
    print(f"\n=== {len(sections)} benchmark(s) in {time.perf_counter() - t:.0f} s"
          + (f"; failed: {', '.join(failed)}" if failed else ""))
    if args.no_write:
        print("\n\n".join(sections.values()))
    else:
        write_block(sections)
        print(f"wrote the generated block of {os.path.relpath(RESULTS, ROOT)}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())

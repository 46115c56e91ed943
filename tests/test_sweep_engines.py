"""Engines give identical rows; a killed or interrupted sweep resumes to the uninterrupted result."""

import os
import signal
import sqlite3
import subprocess
import sys
import time

import pytest

from equipoise.sweeps import Axis, Store, SweepSpec, sweep
from equipoise.sweeps._spec import spec_from_flags

FERRIES = os.path.abspath("models/cournot_saltmere_ferries.py")


def rows(path):
    with Store.read(path) as db:
        return db.points(), db.equilibria(stability=True)


@pytest.fixture(scope="module")
def small_spec():
    return SweepSpec(FERRIES, axes=(Axis.linear("c[2]", 20.0, 90.0, 4), Axis.linear("c[1]", 10.0, 60.0, 3)),
                     batch=4, starts=4)


@pytest.fixture(scope="module")
def reference(small_spec, tmp_path_factory):
    path = tmp_path_factory.mktemp("ref") / "ref.sqlite"
    sweep(small_spec, path, progress=False)
    return rows(path)


def test_local_processes_give_identical_rows(small_spec, reference, tmp_path):
    res = sweep(small_spec, tmp_path / "p.sqlite", engine="processes", workers=2, progress=False)
    assert res.complete and res.stats["engine"] == "processes"
    assert rows(tmp_path / "p.sqlite") == reference


def test_local_dask_cluster_gives_identical_rows(small_spec, reference, tmp_path):
    pytest.importorskip("distributed")
    res = sweep(small_spec, tmp_path / "d.sqlite", engine="dask", workers=2, progress=False)
    assert res.complete and res.stats["engine"] == "dask"
    assert rows(tmp_path / "d.sqlite") == reference


def test_dask_scheduler_address_on_loopback(small_spec, reference, tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None,
                                  host="127.0.0.1") as cluster:
        res = sweep(small_spec, tmp_path / "s.sqlite", engine="dask", scheduler=cluster.scheduler_address,
                    progress=False)
    assert res.complete
    assert rows(tmp_path / "s.sqlite") == reference


ARGS = [FERRIES, "--axis", "c[2]=20:90:60", "--batch", "2", "--starts", "2", "--quiet"]


def _stored_batches(path) -> int:
    try:
        with sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=0.05) as conn:
            return conn.execute("SELECT COUNT(*) FROM batches").fetchone()[0]
    except sqlite3.Error:
        return 0


def _start(store):
    cmd = [sys.executable, "-m", "equipoise.cli", "sweep", *ARGS, "--store", str(store)]
    return subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _wait_for_batches(proc, store, least):
    deadline = time.monotonic() + 180
    while _stored_batches(store) < least:
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the sweep stored nothing in time"
        time.sleep(0.005)


@pytest.fixture(scope="module")
def uninterrupted(tmp_path_factory):
    path = tmp_path_factory.mktemp("whole") / "whole.sqlite"
    spec = spec_from_flags(FERRIES, ["c[2]=20:90:60"], {}, None, batch=2, starts=2)
    sweep(spec, path, progress=False)
    return rows(path)


def test_sigkill_part_way_then_resume_equals_an_uninterrupted_run(uninterrupted, tmp_path):
    store = tmp_path / "killed.sqlite"
    proc = _start(store)
    _wait_for_batches(proc, store, 2)
    proc.send_signal(signal.SIGKILL)
    proc.communicate()
    part = _stored_batches(store)
    assert 2 <= part < 30, "the kill must land part-way"
    points, eqs = rows(store)
    assert len(points) == 2 * part and len(eqs) == 2 * part  # whole batches only
    again = subprocess.run([sys.executable, "-m", "equipoise.cli", "sweep", *ARGS, "--store", str(store), "--json"],
                           capture_output=True, text=True, timeout=300)
    assert again.returncode == 0, again.stderr
    assert f'"computed": {60 - 2 * part}' in again.stdout
    assert rows(store) == uninterrupted


def test_ctrl_c_commits_finished_batches_and_says_how_to_resume(uninterrupted, tmp_path):
    store = tmp_path / "stopped.sqlite"
    proc = _start(store)
    _wait_for_batches(proc, store, 1)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, (out, err)
    assert "interrupted" in out + err and "Traceback" not in err
    part = _stored_batches(store)
    points, _ = rows(store)
    assert len(points) == 2 * part
    if part < 30:
        assert "run the same command again to resume" in out
    sweep(spec_from_flags(FERRIES, ["c[2]=20:90:60"], {}, None, batch=2, starts=2), store, progress=False)
    assert rows(store) == uninterrupted


def test_ctrl_c_on_worker_processes_keeps_the_batches_in_flight(uninterrupted, tmp_path):
    store = tmp_path / "pool.sqlite"
    cmd = [sys.executable, "-m", "equipoise.cli", "sweep", *ARGS, "--store", str(store), "--engine", "processes",
           "--workers", "2"]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    _wait_for_batches(proc, store, 2)
    before = _stored_batches(store)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=180)
    assert proc.returncode == 130 and "Traceback" not in err, (out, err)
    after = _stored_batches(store)
    assert after >= before  # the batches running at the interrupt were finished and stored
    points, eqs = rows(store)
    assert len(points) == 2 * after
    whole = {p["id"]: p for p in uninterrupted[0]}
    assert all(p == whole[p["id"]] for p in points)  # whole batches, each as an uninterrupted run stores it
    whole_eqs = {(e["point"], e["k"]): e for e in uninterrupted[1]}
    assert all(e == whole_eqs[(e["point"], e["k"])] for e in eqs)

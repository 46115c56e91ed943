"""The sweep and export commands: one command runs a sweep, bad input is one line and exit 2."""

import csv
import json
import os

import numpy as np
import pytest

from equipoise.cli import main

FERRIES = os.path.abspath("models/cournot_saltmere_ferries.py")


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cli")
    spec = folder / "ferries.toml"
    spec.write_text(f'model = "{FERRIES}"\n\n[[axis]]\nname = "c[2]"\nvalues = [20.0, 50.0, 80.0]\n\n'
                    '[[axis]]\nname = "a"\nstart = 100.0\nstop = 140.0\nnum = 2\n\n[solve]\nbatch = 4\nstarts = 4\n')
    return folder, spec


def test_sweep_file_runs_into_the_default_store_and_summarises(swept, capsys):
    folder, spec = swept
    assert main(["sweep", str(spec), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert f"store: {folder / 'ferries.sqlite'}" in out
    assert "points: 6 of 6 stored (6 computed" in out
    assert "solved 6, no equilibrium found 0, failed 0; equilibria stored 6" in out
    assert "per-coordinate speeds: 6 robust" in out
    assert "qualified expert review" in out
    assert main(["sweep", str(spec), "--quiet", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert (summary["points"], summary["computed"], summary["complete"]) == (6, 0, True)
    assert summary["verdicts"]["nash"] == {"global": 6}


def test_export_writes_one_row_per_point_and_equilibrium(swept, tmp_path, capsys):
    folder, spec = swept
    main(["sweep", str(spec), "--quiet"])
    capsys.readouterr()
    target = tmp_path / "out.csv"
    assert main(["export", str(folder / "ferries.sqlite"), "--csv", str(target)]) == 0
    assert capsys.readouterr().out.strip() == f"wrote 6 rows to {target}"
    with open(target, newline="") as fh:
        table = list(csv.DictReader(fh))
    assert [r["c[2]"] for r in table] == ["20.0", "20.0", "50.0", "50.0", "80.0", "80.0"]
    assert [r["a"] for r in table] == ["100.0", "140.0"] * 3
    # Tirole (1988) ch. 5: with all three active, q_3 = (a - 4 c_3 + sum c) / (4 b).
    row = table[1]
    assert float(row["gullwing"]) == pytest.approx((140.0 - 4 * 20.0 + 18.0 + 24.0 + 20.0) / 6.0, rel=1e-9)
    assert {r["coordinate_speeds"] for r in table} == {"robust"}


def test_flags_sweep_with_sample(tmp_path, capsys):
    store = tmp_path / "s.sqlite"
    code = main(["sweep", FERRIES, "--axis", "c[0]=10:30", "--sample", "5", "--batch", "8", "--labels", "none",
                 "--store", str(store), "--quiet", "--json"])
    assert code == 0
    assert json.loads(capsys.readouterr().out)["counts"] == {"solved": 5, "equilibria": 5}


@pytest.mark.parametrize("argv, message", [
    (["sweep", FERRIES, "--store", "x.sqlite"], "expected a sweep file (.toml) or a model file with --axis"),
    (["sweep", FERRIES, "--axis", "c[2]=1:2:3"], "--store: expected the path of the results store"),
    (["sweep", FERRIES, "--axis", "c[2]=1:2", "--store", "x.sqlite"], "--axis 'c[2]=1:2': expected NAME=START:STOP:NUM"),
    (["sweep", FERRIES, "--axis", "c[2]=a:2:3", "--store", "x.sqlite"], "expected numbers in"),
    (["sweep", FERRIES, "--axis", "c[2]=1:2:3", "--axis", "c[2]=1:2:3", "--store", "x.sqlite"], "the same parameter entry as axis"),
    (["sweep", FERRIES, "--axis", "q=1:2:3", "--store", "x.sqlite"], "axis q: 'q' is not a parameter"),
    (["sweep", FERRIES, "--axis", "c[2]=1:2:3", "--store", "x.sqlite", "--batch", "0"], "--batch: expected a positive"),
    (["sweep", FERRIES, "--axis", "c[2]=1:2:3", "--store", "x.sqlite", "--scheduler", "tcp://127.0.0.1:1"],
     "--scheduler: only used with --engine dask"),
    (["sweep", FERRIES, "--axis", "c[2]=1:2:3", "--store", "x.sqlite", "--engine", "cloud"], "invalid choice"),
    (["sweep", FERRIES, "--axis", "b=0:2:3:log", "--store", "x.sqlite"], "a log range needs positive"),
    (["sweep", "nowhere.toml"], "nowhere.toml: sweep file not found"),
    (["export", "nowhere.sqlite", "--csv", "x.csv"], "nowhere.sqlite: results store not found"),
])
def test_bad_input_is_one_line_and_exit_2(argv, message, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse's own checks exit directly
        code = exc.code
    assert code == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1 and "Traceback" not in err
    assert not (tmp_path / "x.sqlite").exists()


def test_toml_with_flags_and_corrupt_store(swept, tmp_path, capsys):
    _, spec = swept
    assert main(["sweep", str(spec), "--axis", "a=1:2:3"]) == 2
    assert "--axis cannot be combined with a sweep file" in capsys.readouterr().err
    junk = tmp_path / "junk.sqlite"
    junk.write_bytes(np.random.default_rng(0).bytes(4096))
    for argv in (["export", str(junk), "--csv", str(tmp_path / "o.csv")],
                 ["sweep", str(spec), "--store", str(junk), "--quiet"],
                 ["plot", str(junk), "--x", "a", "--out", str(tmp_path / "o.png")]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert f"{junk}: not a readable results store" in err and err.count("\n") == 1
    assert not (tmp_path / "o.csv").exists()


def test_plot_command_writes_a_png_of_the_requested_size(swept, tmp_path, capsys):
    from matplotlib.image import imread

    folder, spec = swept
    main(["sweep", str(spec), "--quiet"])
    capsys.readouterr()
    target = tmp_path / "map.png"
    assert main(["plot", str(folder / "ferries.sqlite"), "--x", "c[2]", "--y", "a", "--size", "640x480",
                 "--out", str(target)]) == 0
    assert capsys.readouterr().out.strip() == f"wrote {target}"
    img = imread(target)
    assert img.shape[:2] == (480, 640)
    assert img[..., :3].std() > 0.05 and len(np.unique(img.reshape(-1, img.shape[-1]), axis=0)) > 50
    assert main(["plot", str(folder / "ferries.sqlite"), "--x", "c[2]", "--size", "big", "--out",
                 str(tmp_path / "b.png")]) == 2
    assert "--size 'big': expected WIDTHxHEIGHT" in capsys.readouterr().err

"""``equipoise check FILE.json``: stability labels of a Jacobian given as JSON.

The command is run in-process through ``equipoise.cli.main`` with the persistent compile
cache switched off (EQUIPOISE_CACHE=off), so nothing is written outside the test's temporary
directory. Instances are the worked instances of the project's reference notes
(REFERENCES.md, "Matrix stability"; their source is the criterion they were built from).
"""

from __future__ import annotations

import json

import pytest

import equipoise  # noqa: F401  (float64 on)
from equipoise.cli import main
from equipoise.stability import classify


@pytest.fixture(autouse=True)
def _no_compile_cache(monkeypatch):
    monkeypatch.setenv("EQUIPOISE_CACHE", "off")


def _check(capsys, path, *extra):
    rc = main(["check", str(path), *extra])
    out, err = capsys.readouterr()
    return rc, out, err


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _write_json(tmp_path, name, obj):
    return _write(tmp_path, name, json.dumps(obj))


# Worked instances (REFERENCES, Matrix stability) and the per-coordinate verdict each was built
# to have: the 2x2 criterion fails (a11 > 0), the Cain sum fails (3 + 3 + 3 < sqrt 134), the
# Cain sum holds (8.045 > 1).
WORKED = {
    "hurwitz_not_dstable_2x2": ([[1.0, -2.0], [3.0, -4.0]], "fragile"),
    "hicksian_not_dstable_3x3": ([[-1.0, 0.0, -5.0], [-5.0, -1.0, 0.0], [0.0, -5.0, -9.0]], "fragile"),
    "dstable_not_diagonally_stable_3x3": ([[-1.0, -2.0, 2.0], [3.0, -2.0, 1.0], [1.0, 3.0, -3.0]], "robust"),
}


@pytest.mark.parametrize("name", sorted(WORKED))
def test_check_json_is_the_classify_object(tmp_path, capsys, name):
    J, verdict = WORKED[name]
    path = _write_json(tmp_path, name + ".json", {"jacobian": J})
    rc, out, err = _check(capsys, path, "--json")
    assert rc == 0, err
    assert err == ""
    doc = json.loads(out)
    # The same object as the library call, after the same JSON round trip.
    assert doc == json.loads(json.dumps(classify(J).to_dict()))
    assert doc["equal_speeds"]["verdict"] == "stable"  # every worked instance is Hurwitz
    assert doc["coordinate_speeds"]["verdict"] == verdict


def test_check_table_words(tmp_path, capsys):
    J, _ = WORKED["dstable_not_diagonally_stable_3x3"]
    rc, out, err = _check(capsys, _write_json(tmp_path, "robust.json", {"jacobian": J}))
    assert rc == 0 and err == ""
    assert "stable for any such speeds" in out
    assert "FRAGILE" not in out
    assert "3 coordinates" in out
    assert "Caution" in out

    J, _ = WORKED["hurwitz_not_dstable_2x2"]
    rc, out, err = _check(capsys, _write_json(tmp_path, "fragile.json", {"jacobian": J}))
    assert rc == 0 and err == ""
    assert "FRAGILE" in out
    # The certificate printed is the one the library found (2x2 worked instance: speeds
    # diag(d, 1) destabilise for d > 4, so the first speed is the fast one).
    rep = classify(J)
    k = rep.coordinate_speeds.certificate["speeds"]
    assert k[0] > 4 * k[1]
    assert "equal speeds: stable" in out


def test_check_unstable_table(tmp_path, capsys):
    # Derived: triangular with a positive diagonal entry, eigenvalues 1 and -1.
    J = [[1.0, 0.0], [2.0, -1.0]]
    rc, out, err = _check(capsys, _write_json(tmp_path, "unstable.json", {"jacobian": J}))
    assert rc == 0 and err == ""
    assert "equal speeds: UNSTABLE" in out
    assert "FRAGILE" in out


# Fiez & Ratliff (2021), "Local convergence analysis of gradient descent ascent with finite
# timescale separation", ICLR (from memory): f = -x^2 + 2xy - y^2/2 has tau* = 2, stable for
# every ratio above it (REFERENCES, Learning in games).
FIEZ_RATLIFF = [[2.0, -2.0], [2.0, -1.0]]
# Derived: K J = [[-1, -2], [2 tau, 2 tau]] has trace 2 tau - 1 and determinant 2 tau, so it is
# stable exactly for tau < 1/2.
SLOW_SECOND = [[-1.0, -2.0], [2.0, 2.0]]
# Derived: [[-2, 1, 0], [0, -1, 1], [1, 0, -3]] with blocks [2, 1] is Metzler and Hurwitz, hence
# stable at every speed ratio (Berman & Plemmons, Nonnegative Matrices in the Mathematical
# Sciences, ch. 6, from memory).
METZLER_2_1 = [[-2.0, 1.0, 0.0], [0.0, -1.0, 1.0], [1.0, 0.0, -3.0]]


@pytest.mark.parametrize("J, blocks, want", [
    (FIEZ_RATLIFF, [1, 1], [[2.0, None]]),
    (SLOW_SECOND, [1, 1], [[None, 0.5]]),
    (METZLER_2_1, [2, 1], [[None, None]]),
], ids=["fiez-ratliff", "slow-second", "metzler-2-1"])
def test_check_two_player_stable_ratios(tmp_path, capsys, J, blocks, want):
    path = _write_json(tmp_path, "two.json", {"jacobian": J, "blocks": blocks})
    rc, out, err = _check(capsys, path, "--json")
    assert rc == 0 and err == ""
    assert '"stable_ratios"' in out
    ratios = json.loads(out)["player_speeds"]["stable_ratios"]
    assert len(ratios) == len(want)
    for (lo, hi), (wlo, whi) in zip(ratios, want):
        # null marks an open end (0 or infinity); finite ends to float64 root accuracy.
        assert (lo is None) == (wlo is None) and (hi is None) == (whi is None)
        if wlo is not None:
            assert lo == pytest.approx(wlo, rel=1e-9)
        if whi is not None:
            assert hi == pytest.approx(whi, rel=1e-9)
    # The table names the ratios too, with 0 / inf for the open ends.
    rc, out, err = _check(capsys, path)
    assert rc == 0
    assert "stable speed ratios k2/k1:" in out
    assert ("inf)" in out) == (want[0][1] is None)
    assert ("(0," in out) == (want[0][0] is None)


# ---------------------------------------------------------------- bad input files
GOOD = [[-1.0, 0.0], [0.0, -1.0]]
BAD_FILES = {
    # name: (file text, words the one error line must contain besides the file name)
    "invalid_json": ('{"jacobian": [[1, 2], [3, 4]', ["JSON"]),
    "empty_file": ("", ["JSON"]),
    "not_object": ("[[1, 2], [3, 4]]", ["object"]),
    "missing_jacobian": (json.dumps({"blocks": [1, 1]}), ["jacobian"]),
    "non_square": (json.dumps({"jacobian": [[1, 2, 3], [4, 5, 6]]}), ["jacobian", "square"]),
    "ragged": (json.dumps({"jacobian": [[1, 2], [3]]}), ["jacobian", "square"]),
    "empty_jacobian": (json.dumps({"jacobian": []}), ["jacobian"]),
    "jacobian_not_list": (json.dumps({"jacobian": 3}), ["jacobian"]),
    "non_numeric": (json.dumps({"jacobian": [[1, "a"], [2, 3]]}), ["jacobian"]),
    "boolean_entry": (json.dumps({"jacobian": [[True, 0], [0, -1]]}), ["jacobian"]),
    "null_entry": (json.dumps({"jacobian": [[None, 0], [0, -1]]}), ["jacobian"]),
    "nested_too_deep": (json.dumps({"jacobian": [[[1], 0], [0, -1]]}), ["jacobian"]),
    # Python's json reads the non-standard NaN / Infinity tokens, and 1e400 overflows to inf.
    "nan": ('{"jacobian": [[NaN, 0], [0, -1]]}', ["jacobian", "finite"]),
    "infinity": ('{"jacobian": [[-Infinity, 0], [0, -1]]}', ["jacobian", "finite"]),
    "overflowing_float": ('{"jacobian": [[1e400, 0], [0, -1]]}', ["jacobian", "finite"]),
    "blocks_wrong_sum": (json.dumps({"jacobian": GOOD, "blocks": [1, 2]}), ["blocks"]),
    "blocks_zero": (json.dumps({"jacobian": GOOD, "blocks": [0, 2]}), ["blocks"]),
    "blocks_negative": (json.dumps({"jacobian": GOOD, "blocks": [3, -1]}), ["blocks"]),
    "blocks_fraction": (json.dumps({"jacobian": GOOD, "blocks": [1.5, 0.5]}), ["blocks"]),
    "blocks_float_integer": (json.dumps({"jacobian": GOOD, "blocks": [1.0, 1.0]}), ["blocks"]),
    "blocks_empty": (json.dumps({"jacobian": GOOD, "blocks": []}), ["blocks"]),
    "blocks_not_list": (json.dumps({"jacobian": GOOD, "blocks": 2}), ["blocks"]),
    "blocks_boolean": (json.dumps({"jacobian": GOOD, "blocks": [True, True]}), ["blocks"]),
    "unknown_field": (json.dumps({"jacobian": GOOD, "speeds": [1, 2]}), ["speeds"]),
}


def _assert_one_line_error(rc, out, err, path, words):
    # Project rule (cli.py, DEVELOPERS): every user mistake ends in one line on standard error
    # naming the file and field, exit status 2, no traceback.
    assert rc == 2
    assert out == ""
    assert "Traceback" not in err
    assert err.endswith("\n") and err.count("\n") == 1, err
    assert err.startswith("equipoise check: error: ")
    assert str(path) in err
    for w in words:
        assert w in err, (w, err)


@pytest.mark.parametrize("name", sorted(BAD_FILES))
def test_check_bad_file(tmp_path, capsys, name):
    text, words = BAD_FILES[name]
    path = _write(tmp_path, name + ".json", text)
    rc, out, err = _check(capsys, path, "--json")
    _assert_one_line_error(rc, out, err, path, words)


def test_check_missing_file(tmp_path, capsys):
    path = tmp_path / "nowhere.json"
    rc, out, err = _check(capsys, path)
    _assert_one_line_error(rc, out, err, path, ["not found"])


def test_check_directory(tmp_path, capsys):
    rc, out, err = _check(capsys, tmp_path)
    _assert_one_line_error(rc, out, err, tmp_path, ["directory"])


def test_check_not_utf8(tmp_path, capsys):
    path = tmp_path / "latin1.json"
    path.write_bytes(b'{"jacobian": [[-1, 0], [0, -1]], "note\xe9": 1}')
    rc, out, err = _check(capsys, path)
    _assert_one_line_error(rc, out, err, path, ["JSON"])


def test_check_huge_integer_literal(tmp_path, capsys):
    path = _write(tmp_path, "huge.json", '{"jacobian": [[1' + "0" * 400 + ', 0], [0, -1]]}')
    rc, out, err = _check(capsys, path)
    _assert_one_line_error(rc, out, err, path, ["jacobian"])


def test_check_missing_argument(capsys):
    # argparse's own error, also one line and status 2 (cli._Parser).
    with pytest.raises(SystemExit) as exc:
        main(["check"])
    out, err = capsys.readouterr()
    assert exc.value.code == 2
    assert err.count("\n") == 1 and "Traceback" not in err

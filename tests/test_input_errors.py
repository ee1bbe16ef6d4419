"""Bad input ends with exit code 2 and one line on stderr naming the file, the problem and the fix."""

from __future__ import annotations

import hashlib
import subprocess
import sys
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from conftest import run_cli

GOOD = "site,energy_kwh,outdoor_c\nA,10.5,3\nB,12.0,4\nC,11.0,5\n"


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _write(tmp_path: Path, name: str, content: bytes | str) -> Path:
    path = tmp_path / name
    path.write_bytes(content.encode("utf-8") if isinstance(content, str) else content)
    return path


CASES = {
    "empty file": ("empty.csv", b"", ["--target", "energy_kwh"], "is empty"),
    "blank file": ("blank.csv", b"\n\n", ["--target", "energy_kwh"], "is empty"),
    "header only": ("header.csv", b"site,energy_kwh\n", ["--target", "energy_kwh"], "no data rows"),
    "ragged rows": ("ragged.csv", b"a,b,c\n1,2,3\n4,5\n6,7,8\n", ["--target", "a"], "line 3 has 2 fields"),
    "duplicate names": ("dup.csv", b"a,b,a\n1,2,3\n", ["--target", "b"], "two columns named 'a'"),
    "unknown target": ("good.csv", GOOD, ["--target", "energy_kw"], "closest: 'energy_kwh'"),
    "missing target flag": ("good.csv", GOOD, [], "--target: is required"),
    "unknown id": ("good.csv", GOOD, ["--target", "energy_kwh", "--id", "sight"], "closest: 'site'"),
    "unknown exclude": ("good.csv", GOOD, ["--target", "energy_kwh", "--exclude", "nope"], "--exclude 'nope'"),
    "unreadable parquet": ("broken.parquet", b"PAR1 this is not really parquet PAR1", ["--target", "a"], "not a readable Parquet file"),
    "latin-1 bytes": ("latin.csv", "site,energy_kwh\nMünchen,3\n".encode("latin-1"), ["--target", "energy_kwh"], "--encoding"),
    "bad gate": ("good.csv", GOOD, ["--target", "energy_kwh", "--fail-at", "severe"], "not a grade"),
    "bad format": ("good.csv", GOOD, ["--target", "energy_kwh", "--format", "yaml"], "not a report format"),
    "unknown rule": ("good.csv", GOOD, ["--target", "energy_kwh", "--skip", "collinearity.vfi"], "not a known rule"),
    "bad missing codes": ("good.csv", GOOD, ["--target", "energy_kwh", "--missing-codes", "nocolumn"], "COL=CODE"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_input_is_one_line_exit_2_and_file_unchanged(tmp_path: Path, case: str) -> None:
    name, content, args, expected = CASES[case]
    path = _write(tmp_path, name, content)
    before = _digest(path)
    run = run_cli("check", path, *args)
    assert run.code == 2, run.err
    assert run.out == ""
    lines = run.err.strip().splitlines()
    assert len(lines) == 1, run.err
    assert lines[0].startswith("prefit: ")
    assert expected in lines[0]
    assert "Traceback" not in run.err
    assert _digest(path) == before


def test_missing_file(tmp_path: Path) -> None:
    run = run_cli("check", tmp_path / "nowhere.csv", "--target", "y")
    assert run.code == 2
    assert "nowhere.csv: does not exist" in run.err and len(run.err.strip().splitlines()) == 1


def test_folder_instead_of_file(tmp_path: Path) -> None:
    run = run_cli("check", tmp_path, "--target", "y")
    assert run.code == 2 and "is a folder" in run.err


def test_real_process_has_no_traceback_and_debug_shows_one(tmp_path: Path) -> None:
    path = _write(tmp_path, "ragged.csv", b"a,b\n1,2\n3\n")
    plain = subprocess.run([sys.executable, "-m", "prefit", "check", str(path), "--target", "a"], capture_output=True, text=True)
    assert plain.returncode == 2
    assert plain.stderr.count("\n") == 1 and "Traceback" not in plain.stderr
    debug = subprocess.run([sys.executable, "-m", "prefit", "--debug", "check", str(path), "--target", "a"], capture_output=True, text=True)
    assert debug.returncode != 0 and "Traceback" in debug.stderr


def test_unknown_flag_is_one_line(tmp_path: Path) -> None:
    path = _write(tmp_path, "good.csv", GOOD)
    run = run_cli("check", path, "--target", "energy_kwh", "--colour-scheme", "x")
    assert run.code == 2 and len(run.err.strip().splitlines()) == 1 and "unrecognized arguments" in run.err


def test_parquet_and_every_good_run_leave_the_file_unchanged(tmp_path: Path) -> None:
    path = tmp_path / "t.parquet"
    pq.write_table(pa.table({"y": [1.0, 2.0, 4.0, 3.0, 5.0], "x": [1, 2, 3, 4, 6]}), path)
    before = _digest(path)
    assert run_cli("check", path, "--target", "y", "--format", "json").code in (0, 1)
    assert _digest(path) == before

"""Bad input ends with exit code 2 and one line on stderr naming the file, the problem and the fix."""

from __future__ import annotations

import gzip
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


OK_TABLE = "y,x,z\n1,2,3\n3,5,1\n4,4,2\n5,7,1\n6,5,3\n7,9,9\n"

# Files both engines must refuse with the same one line (exit 2), never a traceback.
BOTH_ENGINES = {
    "ragged rows": ("ragged.csv", b"y,x\n1,2\n3,5,6\n4,4\n", "line 3 has 3 fields where the header has 2"),
    "unclosed quote": ("quote.csv", b'y,x\n1,2\n3,"5\n4,4\n5,6\n', "line 3 opens a quoted value that never closes"),
    "gz that is not gzip": ("plain.csv.gz", OK_TABLE.encode(), "is not a readable gzip file"),
    "truncated gz": ("cut.csv.gz", gzip.compress(OK_TABLE.encode() * 50)[:40], "is not a readable gzip file"),
    "latin-1 bytes": ("latin.csv", "y,x\n1,M\xfcnchen\n".encode("latin-1"), "is not valid UTF-8 (byte 0xfc on line 2)"),
    "wrong separator": ("semi.csv", OK_TABLE.replace(",", ";").encode(), "give --sep ';'"),
    "nested JSON Lines": ("nested.jsonl", b'{"y": 1, "x": [1, 2]}\n{"y": 2, "x": [3]}\n', "column 'x' holds nested values"),
}


@pytest.mark.parametrize("engine", ["memory", "stream"])
@pytest.mark.parametrize("case", sorted(BOTH_ENGINES))
def test_both_engines_refuse_a_bad_file_in_the_same_line(tmp_path: Path, case: str, engine: str) -> None:
    name, content, expected = BOTH_ENGINES[case]
    path = _write(tmp_path, name, content)
    args = ["--sep", ","] if case == "wrong separator" else []
    run = run_cli("check", path, "--target", "y", "--engine", engine, *args)
    assert run.code == 2, run.err
    assert run.err.count("\n") == 1 and expected in run.err, run.err


@pytest.mark.parametrize("engine", ["memory", "stream"])
@pytest.mark.parametrize(
    "name, content",
    [
        ("cr.csv", OK_TABLE.replace("\n", "\r").encode()),
        ("utf16.csv", OK_TABLE.encode("utf-16")),
        ("utf16be.csv", b"\xfe\xff" + OK_TABLE.encode("utf-16-be")),
    ],
)
def test_cr_line_ends_and_utf16_with_a_mark_read_as_the_plain_table(tmp_path: Path, name: str, content: bytes, engine: str) -> None:
    plain = run_cli("check", _write(tmp_path, "plain.csv", OK_TABLE), "--target", "y", "--format", "json", "--engine", engine).json()
    run = run_cli("check", _write(tmp_path, name, content), "--target", "y", "--format", "json", "--engine", engine)
    assert run.code in (0, 1), run.err
    assert run.json()["findings"] == plain["findings"]


def test_an_inch_mark_inside_a_value_is_not_an_open_quote(tmp_path: Path) -> None:
    path = _write(tmp_path, "inch.csv", 'y,x,size\n1,2,12"\n3,5,10\n4,4,8\n5,7,9\n6,5,3\n7,9,4\n')
    run = run_cli("check", path, "--target", "y")
    assert run.code in (0, 1), run.err


@pytest.mark.parametrize("engine", ["memory", "stream"])
def test_an_empty_column_name_is_shown_by_its_position(tmp_path: Path, engine: str) -> None:
    path = _write(tmp_path, "unnamed.csv", ",y,x\n1,2,3\n2,3,5\n3,4,4\n4,1,2\n5,5,5\n")
    report = run_cli("check", path, "--target", "y", "--format", "json", "--engine", engine).json()
    assert "(unnamed column 1)" in report["design"]["kinds"]
    assert run_cli("check", path, "--target", "y", "--exclude", "(unnamed column 1)").code in (0, 1)


@pytest.mark.parametrize(
    "args, expected",
    [
        (["--exclude", "y"], "--exclude 'y': is the --target column"),
        (["--id", "y"], "--id 'y': is also the --target column"),
        (["--predictors", "x", "--exclude", "x"], "--predictors and --exclude 'x': both name this column"),
        (["--range", "x=a:b"], "must be a finite number"),
        (["--range", "x=1"], "must be COL=LOW:HIGH"),
        (["--range", "x=nan:1"], "must be a finite number"),
        (["--missing-codes", "=1"], "must be COL=CODE"),
        (["--fail-at", ""], "gate: must be a non-empty text"),
        (["--fail-at", "blocks,note"], "is not a grade"),
        (["--scheduler", "not a url"], "--scheduler: only applies to the Dask engine"),
    ],
)
def test_contradicting_or_malformed_options_are_usage_errors(tmp_path: Path, args: list[str], expected: str) -> None:
    path = _write(tmp_path, "t.csv", OK_TABLE)
    run = run_cli("check", path, "--target", "y", *args)
    assert run.code == 2 and run.err.count("\n") == 1 and expected in run.err, run.err


def test_a_rule_exempting_a_missing_column_is_a_usage_error(tmp_path: Path) -> None:
    path = _write(tmp_path, "t.csv", OK_TABLE)
    (tmp_path / "prefit.toml").write_text('[rule."collinearity.vif"]\nexempt = ["nope"]\n')
    run = run_cli("check", path, "--target", "y")
    assert run.code == 2 and "exempt 'nope': is not a column of the table" in run.err


def test_output_never_overwrites_an_input_table(tmp_path: Path) -> None:
    path = _write(tmp_path, "t.csv", OK_TABLE)
    before = _digest(path)
    for args in (["--output", str(path)], ["--output", "./t.csv"], ["--accept-file", str(path), "--accept-current"]):
        run = run_cli("check", path, "--target", "y", *args)
        assert run.code == 2 and "is a table this run reads" in run.err, run.err
    assert _digest(path) == before


def test_a_dask_scheduler_that_is_not_an_address_is_a_usage_error(tmp_path: Path) -> None:
    pytest.importorskip("distributed")
    path = _write(tmp_path, "t.csv", OK_TABLE)
    run = run_cli("check", path, "--target", "y", "--engine", "dask", "--scheduler", "not a url")
    assert run.code == 2 and "is not a scheduler address" in run.err and run.err.count("\n") == 1

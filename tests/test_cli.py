"""The command line end to end: reports, exit codes, determinism, catalogue and explanations."""

from __future__ import annotations

import json
import subprocess
import sys
from importlib import resources
from pathlib import Path

import jsonschema
import numpy as np
import pandas as pd
import pytest
from conftest import SAMPLE_TABLES, run_cli

import prefit


def report_schema() -> dict:
    return json.loads(resources.files("prefit").joinpath("report/report.schema.json").read_text())


def _sum_table(tmp_path: Path) -> Path:
    rng = np.random.default_rng(2)
    n = 300
    frame = pd.DataFrame({"compressor_kwh": rng.uniform(2000, 9000, n).round(1), "lighting_kwh": rng.uniform(50, 400, n).round(1), "defrost_kwh": rng.uniform(0, 300, n).round(1)})
    frame["gross_kwh"] = frame["compressor_kwh"] + frame["lighting_kwh"] + frame["defrost_kwh"]
    frame["outdoor_c"] = rng.uniform(-5, 35, n).round(1)
    frame["energy_kwh"] = (1.1 * frame["gross_kwh"] + 40 * frame["outdoor_c"] + rng.normal(0, 200, n)).round(1)
    path = tmp_path / "sum.csv"
    frame.to_csv(path, index=False)
    return path


def test_exact_total_blocks_and_names_all_four_columns(tmp_path: Path) -> None:
    run = run_cli("check", _sum_table(tmp_path), "--target", "energy_kwh", "--format", "json")
    assert run.code == 1
    exact = [f for f in run.json()["findings"] if f["rule"] == "collinearity.exact"]
    assert len(exact) == 1 and exact[0]["grade"] == "blocks"
    assert sorted(exact[0]["columns"]) == ["compressor_kwh", "defrost_kwh", "gross_kwh", "lighting_kwh"]
    assert "gross_kwh = 1.00*compressor_kwh + 1.00*lighting_kwh + 1.00*defrost_kwh" in exact[0]["message"]
    frame = pd.read_csv(tmp_path / "sum.csv")
    design = np.column_stack([np.ones(len(frame)), frame.drop(columns="energy_kwh").to_numpy()])
    # reference: numpy.linalg.matrix_rank (SVD) of the same design: one column short of full rank
    assert exact[0]["details"]["rank"] == np.linalg.matrix_rank(design) == design.shape[1] - 1
    right = exact[0]["details"]["right"]
    parts = frame[list(right)].to_numpy() @ np.array(list(right.values()))
    # reference: numpy arithmetic on the file's values: the reported relation reproduces the total
    np.testing.assert_allclose(parts, frame["gross_kwh"].to_numpy(), rtol=1e-9)


def test_duplicate_column_and_dummy_trap(tmp_path: Path) -> None:
    rng = np.random.default_rng(4)
    n = 120
    kind = rng.choice(["chilled", "frozen", "blast"], n)
    frame = pd.DataFrame({"outdoor_c": rng.normal(15, 6, n)})
    frame["outdoor_f"] = frame["outdoor_c"] * 1.8 + 32
    for level in ("chilled", "frozen", "blast"):
        frame[f"is_{level}"] = (kind == level).astype(int)
    frame["energy_kwh"] = 50 * frame["outdoor_c"] + 300 * frame["is_frozen"] + rng.normal(0, 30, n)
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    findings = [f for f in run_cli("check", path, "--target", "energy_kwh", "--format", "json").json()["findings"] if f["rule"] == "collinearity.exact"]
    equations = sorted(f["details"]["equation"] for f in findings)
    assert len(findings) == 2
    assert any(e.startswith("intercept = ") and all(f"is_{lvl}" in e for lvl in ("chilled", "frozen", "blast")) for e in equations)
    assert any("outdoor_f" in e and "outdoor_c" in e for e in equations)


def test_json_validates_is_sorted_and_byte_identical(tmp_path: Path) -> None:
    table = SAMPLE_TABLES / "warehouse_submeters.csv"
    first = run_cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--format", "json")
    second = run_cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--format", "json")
    assert first.out == second.out
    document = first.json()
    jsonschema.validate(document, report_schema())
    order = [("blocks", "misleads", "weakens", "note").index(f["grade"]) for f in document["findings"]]
    assert order == sorted(order)
    assert document["summary"]["blocks"] == sum(f["grade"] == "blocks" for f in document["findings"])
    assert document["tool"] == {"name": "prefit", "version": prefit.__version__}
    import hashlib

    assert document["table"]["sha256"] == hashlib.sha256(table.read_bytes()).hexdigest()


def test_output_file_and_plain_text_report(tmp_path: Path) -> None:
    out = tmp_path / "report.json"
    run = run_cli("check", SAMPLE_TABLES / "warehouse_submeters.csv", "--target", "energy_kwh", "--format", "json", "--output", out)
    assert run.out == "" and run.code == 1
    assert json.loads(out.read_text())["findings"]
    text = run_cli("check", SAMPLE_TABLES / "warehouse_submeters.csv", "--target", "energy_kwh", "--id", "site_id")
    assert "\x1b[" not in text.out
    assert "BLOCKS" in text.out and "collinearity.exact" in text.out and "NOT READY" in text.out
    assert all(line == line.rstrip() for line in text.out.splitlines())


def test_colour_always_carries_the_grade_word(tmp_path: Path) -> None:
    run = run_cli("check", SAMPLE_TABLES / "warehouse_submeters.csv", "--target", "energy_kwh", "--colour", "always")
    assert "\x1b[" in run.out and "BLOCKS" in run.out


def test_rules_catalogue_and_why() -> None:
    catalogue = json.loads(run_cli("rules", "--format", "json").out)["rules"]
    ids = [r["id"] for r in catalogue]
    assert ids == sorted(ids) and "collinearity.exact" in ids
    per_parameter = next(r for r in catalogue if r["id"] == "sample-size.per-parameter")
    assert {t["name"] for t in per_parameter["thresholds"]} >= {"misleads", "weakens"}
    assert all(t["source"] for r in catalogue for t in r["thresholds"])
    assert "sample-size.per-parameter" in run_cli("rules").out
    why = run_cli("why", "collinearity.exact")
    assert why.code == 0 and "What it does to a fit" in why.out and "Remedy" in why.out
    listing = run_cli("why")
    assert "collinearity:" in listing.out and "target.constant" in listing.out
    unknown = run_cli("why", "collinearity.exakt")
    assert unknown.code == 2 and "collinearity.exact" in unknown.err


def test_version_and_module_entry() -> None:
    run = subprocess.run([sys.executable, "-m", "prefit", "--version"], capture_output=True, text=True)
    assert run.returncode == 0 and run.stdout.strip() == f"prefit {prefit.__version__}"


@pytest.mark.parametrize(
    "frame, rule, grade",
    [
        (pd.DataFrame({"y": [np.nan] * 5, "x": [1.0, 2, 3, 4, 5]}), "target.missing-values", "blocks"),
        (pd.DataFrame({"y": [3.0] * 30, "x": np.arange(30.0)}), "target.constant", "blocks"),
        (pd.DataFrame({"y": np.arange(30.0) % 7, "x": np.arange(30.0), "k": [5.0] * 30}), "hygiene.constant-predictor", "blocks"),
        (pd.DataFrame({"y": [1.0, 2.0, 3.5], "a": [1.0, 2.0, 4.0], "b": [3.0, 1.0, 2.0]}), "sample-size.per-parameter", "blocks"),
    ],
)
def test_first_rules_grade_as_documented(tmp_path: Path, frame: pd.DataFrame, rule: str, grade: str) -> None:
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    run = run_cli("check", path, "--target", "y", "--format", "json")
    assert run.code == 1, run.err
    assert (rule, grade) in {(f["rule"], f["grade"]) for f in run.json()["findings"]}


def test_a_repeating_id_column_is_reported_as_not_unique(tmp_path: Path) -> None:
    frame = pd.read_csv(SAMPLE_TABLES / "warehouse_clean.csv")
    args = ("check", SAMPLE_TABLES / "warehouse_clean.csv", "--target", "energy_kwh", "--id", "site_id", "--exclude", "day")
    design = run_cli(*args, "--format", "json").json()["design"]
    # reference: pandas nunique of the same column
    assert design["id"] == "site_id" and design["id_values"] == frame["site_id"].nunique()
    assert design["id_values"] < len(frame)
    assert f"not unique: {frame['site_id'].nunique():,} values for {len(frame):,} rows" in " ".join(run_cli(*args).out.split())
    unique = tmp_path / "unique.csv"
    frame.assign(row=range(len(frame))).to_csv(unique, index=False)
    labelled = run_cli("check", unique, "--target", "energy_kwh", "--id", "row", "--exclude", "day,site_id")
    assert "not unique" not in labelled.out


OK_TABLE = "y,x,z\n1,2,3\n3,5,1\n4,4,2\n5,7,1\n6,5,3\n7,9,9\n"


def _prefit(*args: str, **kwargs: object) -> subprocess.CompletedProcess[bytes]:
    """The real console entry point in a child process (its own stdout, stderr and exit code)."""
    return subprocess.run([sys.executable, "-c", "from prefit.cli import run; run()", *args], capture_output=True, timeout=300, **kwargs)  # type: ignore[call-overload]


def test_no_command_prints_one_usage_line_and_exits_2() -> None:
    run = run_cli()
    assert run.code == 2 and run.err.count("\n") == 1 and "prefit check TABLE --target COLUMN" in run.err


def test_debug_on_a_usage_error_shows_the_traceback_then_the_line_and_keeps_exit_2(tmp_path: Path) -> None:
    table = tmp_path / "t.csv"
    table.write_text(OK_TABLE)
    for args in (("--debug", "check", str(table)), ("check", "--debug", str(table))):
        done = _prefit(*args)
        err = done.stderr.decode()
        assert done.returncode == 2, err
        assert "Traceback" in err and err.rstrip().splitlines()[-1].startswith("prefit: --target: is required")


def test_an_internal_failure_is_exit_3_with_one_line(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import prefit.api

    def broken(*args: object, **kwargs: object) -> None:
        raise KeyError("lost")

    monkeypatch.setattr(prefit.api, "check_file", broken)
    table = tmp_path / "t.csv"
    table.write_text(OK_TABLE)
    run = run_cli("check", table, "--target", "y")
    assert run.code == 3 and run.err.count("\n") == 1 and "internal error (KeyError: 'lost')" in run.err


def test_memory_exhaustion_is_exit_2_naming_the_stream_engine(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import prefit.pipeline

    def exhausted(*args: object, **kwargs: object) -> None:
        raise MemoryError

    monkeypatch.setattr(prefit.pipeline, "memory_context", exhausted)
    table = tmp_path / "t.csv"
    table.write_text(OK_TABLE)
    run = run_cli("check", table, "--target", "y")
    assert run.code == 2 and run.err.count("\n") == 1 and "--engine stream" in run.err


def test_closed_full_or_early_closed_stdout_ends_without_a_traceback(tmp_path: Path) -> None:
    table = tmp_path / "t.csv"
    table.write_text(OK_TABLE)
    closed = _prefit("check", str(table), "--target", "y", stdout=None, stdin=subprocess.DEVNULL, close_fds=True, preexec_fn=lambda: __import__("os").close(1))
    assert closed.returncode == 2 and b"stdout: is closed" in closed.stderr and b"Traceback" not in closed.stderr
    with open("/dev/full", "wb") as full:
        done = subprocess.run([sys.executable, "-c", "from prefit.cli import run; run()", "check", str(table), "--target", "y"], stdout=full, stderr=subprocess.PIPE, timeout=300)
    assert done.returncode == 2 and b"No space left" in done.stderr and done.stderr.count(b"\n") == 1
    piped = subprocess.run(
        f"{sys.executable} -c 'from prefit.cli import run; run()' check {table} --target y --explain | head -1", shell=True, capture_output=True, timeout=300
    )
    assert piped.stdout.decode().startswith("prefit ") and piped.stderr == b""


def test_a_successful_run_with_plots_keeps_stderr_empty(tmp_path: Path) -> None:
    columns = {f"a_rather_long_column_name_{i:03d}": np.arange(30.0) * (i + 1) % 7 for i in range(40)}
    frame = pd.DataFrame(columns)
    frame["y"] = np.arange(30.0)
    frame.to_csv(tmp_path / "wide.csv", index=False)
    done = _prefit("check", str(tmp_path / "wide.csv"), "--target", "y", "--format", "html", "--output", str(tmp_path / "r.html"))
    assert done.returncode in (0, 1) and done.stderr == b""

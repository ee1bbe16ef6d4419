"""Accepted findings: fingerprints survive reordering, change with a flagged row's values; the gate sees only new findings."""

from __future__ import annotations

import json
import shutil
from dataclasses import replace
from pathlib import Path
from typing import Iterator

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from conftest import SAMPLE_TABLES, examples, run_cli
from hypothesis import given, settings
from hypothesis import strategies as st

import prefit
from prefit.accepted import DEFAULT_REASON, AcceptedSet, fingerprints, load_accepted
from prefit.api import build_context, run_check
from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.options import CheckOptions
from prefit.reading import TableInfo
from prefit.registry import Registry
from prefit.rule import Rule, RuleSettings

ROWS = 40


def _hottest_rows(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    outdoor = ctx.values("outdoor_c")
    positions = np.flatnonzero(outdoor >= np.sort(outdoor)[-3])
    rows, values, total = ctx.listed_rows(positions, outdoor[positions])
    yield settings.finding(Grade.MISLEADS, "the three hottest days", columns=("outdoor_c", "energy_kwh"), rows=rows, row_values=values, row_count=total)


def _whole_table(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    yield settings.finding(Grade.WEAKENS, "a finding about the whole table", columns=("door_openings",))


def demo_registry() -> Registry:
    registry = Registry()
    registry.add(Rule(id="demo.hottest", summary="Flags the hottest rows.", why="demo", remedy="none", check=_hottest_rows, grades=(Grade.MISLEADS,)), "tests")
    registry.add(Rule(id="demo.whole", summary="Flags the table.", why="demo", remedy="none", check=_whole_table, grades=(Grade.WEAKENS,)), "tests")
    return registry


def invented(with_id: bool) -> pd.DataFrame:
    """Invented site-days with distinct temperatures (demo data)."""
    rng = np.random.default_rng(11)
    frame = pd.DataFrame(
        {
            "outdoor_c": rng.permutation(np.linspace(-5.0, 33.0, ROWS)).round(2),
            "door_openings": rng.integers(50, 800, ROWS),
            "compressor_type": rng.choice(["screw", "scroll", "CO2 transcritical"], ROWS),
        }
    )
    frame["energy_kwh"] = (5000 + 90 * frame["outdoor_c"] + 2 * frame["door_openings"] + rng.normal(0, 200, ROWS)).round(1)
    if with_id:
        frame.insert(0, "site_day", [f"CS-{i % 8:03d}/{i // 8}" for i in range(ROWS)])
    return frame


def demo_input(frame: pd.DataFrame) -> tuple[pa.Table, TableInfo, CheckOptions]:
    table = pa.Table.from_pandas(frame, preserve_index=False)
    info = TableInfo(path="invented.csv", format="csv", rows=table.num_rows, columns=table.num_columns, sha256=None)
    return table, info, CheckOptions(target="energy_kwh", id="site_day" if "site_day" in frame else None)


def demo_report(frame: pd.DataFrame) -> prefit.Report:
    return run_check(*demo_input(frame), registry=demo_registry())


def demo_context(frame: pd.DataFrame) -> RunContext:
    """The run context of the demo table, through which its findings' rows are digested."""
    return build_context(*demo_input(frame))


def keys(frame: pd.DataFrame) -> dict[str, object]:
    report = demo_report(frame)
    return {f.rule: k for f, k in zip(report.findings, report.fingerprints)}


@pytest.mark.parametrize("with_id", [False, True])
@settings(max_examples=examples(15))
@given(order=st.permutations(range(ROWS)), columns=st.permutations(range(4)))
def test_fingerprints_survive_reordering_of_rows_and_columns(with_id: bool, order: list[int], columns: list[int]) -> None:
    frame = invented(with_id)
    names = list(frame.columns)
    moved = names[:1] + [names[1:][i] for i in columns] if with_id else [names[i] for i in columns]
    shuffled = frame.iloc[order][moved].reset_index(drop=True)
    assert keys(shuffled) == keys(frame)


@pytest.mark.parametrize("with_id", [False, True])
def test_a_changed_value_in_a_flagged_row_makes_the_fingerprint_new(with_id: bool) -> None:
    frame = invented(with_id)
    before = keys(frame)
    flagged = int(frame["outdoor_c"].idxmax())
    quiet = int(frame["outdoor_c"].idxmin())
    changed = frame.copy()
    changed.loc[flagged, "door_openings"] += 1
    after = keys(changed)
    assert after["demo.hottest"] != before["demo.hottest"]
    assert after["demo.whole"] == before["demo.whole"]
    elsewhere = frame.copy()
    elsewhere.loc[quiet, "door_openings"] += 1
    assert keys(elsewhere) == before


def test_a_stronger_grade_makes_the_fingerprint_new() -> None:
    report = demo_report(invented(False))
    finding = report.findings[0]
    context = demo_context(invented(False))
    raised = replace(finding, grade=Grade.BLOCKS)
    assert fingerprints([raised], context)[0] != fingerprints([finding], context)[0]


def test_accepting_moves_matches_out_of_the_gate() -> None:
    report = demo_report(invented(True))
    assert report.exit_code == 1
    accepted = AcceptedSet.from_findings(report.findings, report.fingerprints)
    after = report.accepting(accepted)
    assert after.findings == () and len(after.accepted) == 2 and after.exit_code == 0
    assert after.to_dict()["accepted"] == 2


def _rows_from(report_json: dict[str, object]) -> dict[str, int]:
    return {f["rule"]: f["row_count"] for f in report_json["findings"]}  # type: ignore[index]


@pytest.mark.parametrize("with_id", [False, True])
def test_accepted_findings_workflow_end_to_end(tmp_path: Path, with_id: bool) -> None:
    source = SAMPLE_TABLES / "warehouse_humidity_codes.csv"
    table = tmp_path / "march.csv"
    shutil.copy(source, table)
    args = ["--target", "energy_kwh", "--exclude", "day"] + (["--id", "site_id"] if with_id else ["--exclude", "site_id"])
    accept = tmp_path / "accepted.json"

    first = run_cli("check", table, *args, "--format", "json")
    assert first.code == 1
    today = first.json()
    assert any(f["rows"] for f in today["findings"])

    adopt = run_cli("check", table, *args, "--accept-file", accept, "--accept-current", "--format", "json")
    assert adopt.code == 0 and adopt.json()["findings"] == [] and adopt.json()["accepted"] == len(today["findings"])
    written = json.loads(accept.read_text(encoding="utf-8"))
    assert len(written["findings"]) == len(today["findings"])
    assert all(e["reason"] == DEFAULT_REASON for e in written["findings"])

    written["findings"][0]["reason"] = "dropouts are known; the sensor is being replaced"
    accept.write_text(json.dumps(written, indent=2), encoding="utf-8")
    again = run_cli("check", table, *args, "--accept-file", accept, "--accept-current", "--format", "json")
    assert again.code == 0
    assert json.loads(accept.read_text(encoding="utf-8"))["findings"][0]["reason"] == "dropouts are known; the sensor is being replaced"

    later = run_cli("check", table, *args, "--accept-file", accept)
    assert later.code == 0
    assert "accepted finding(s) not shown" in later.out

    frame = pd.read_csv(table)
    reordered = tmp_path / "march_reordered.csv"
    shuffled = frame.sample(frac=1.0, random_state=3).reset_index(drop=True)
    shuffled[list(reversed(frame.columns))].to_csv(reordered, index=False)
    moved = run_cli("check", reordered, *args, "--accept-file", accept, "--format", "json")
    assert moved.code == 0, moved.out
    assert moved.json()["findings"] == [] and moved.json()["accepted"] == len(today["findings"])

    coded = next(f for f in today["findings"] if f["rule"] == "missingness.disguised-codes")
    label = coded["rows"][0]
    changed = frame.copy()
    column = coded["columns"][0]
    code_rows = changed[column] == changed[column].min()
    position = changed.index[(changed["site_id"] == label) & code_rows][0] if with_id else int(label) - 1
    assert code_rows[position]
    changed.loc[position, column] = float(changed[column].median())
    edited = tmp_path / "march_edited.csv"
    changed.to_csv(edited, index=False)
    fresh = run_cli("check", edited, *args, "--accept-file", accept, "--format", "json")
    assert fresh.code == 1
    assert coded["rule"] in {f["rule"] for f in fresh.json()["findings"]}


def test_api_reads_an_accepted_findings_file(tmp_path: Path) -> None:
    frame = invented(True)
    accept = tmp_path / "accepted.json"
    report = demo_report(frame)
    from prefit.accepted import save_accepted

    save_accepted(AcceptedSet.from_findings(report.findings, report.fingerprints), accept)
    assert len(load_accepted(accept)) == 2
    checked = prefit.check(frame, target="energy_kwh", id="site_day", accept_file=accept)
    assert all(f.rule not in ("demo.hottest", "demo.whole") for f in checked.findings)


@pytest.mark.parametrize(
    "content, problem",
    [
        ("{not json", "is not valid JSON"),
        ('{"prefit_accepted": 99, "findings": []}', "is not a prefit accepted-findings file"),
        ('{"prefit_accepted": 1, "findings": [{"rule": "x.y", "grade": "worse", "columns": [], "rows": null, "reason": "r"}]}', "is not a grade"),
        ('{"prefit_accepted": 1, "findings": [{"rule": "x.y", "grade": "note", "columns": [], "rows": null}]}', "needs a non-empty text 'reason'"),
    ],
)
def test_a_bad_accepted_findings_file_is_one_line_usage_error(tmp_path: Path, content: str, problem: str) -> None:
    accept = tmp_path / "accepted.json"
    accept.write_text(content, encoding="utf-8")
    table = tmp_path / "t.csv"
    invented(False).to_csv(table, index=False)
    run = run_cli("check", table, "--target", "energy_kwh", "--accept-file", accept)
    assert run.code == 2 and problem in run.err and run.err.count("\n") == 1


def test_accept_flags_need_each_other_or_an_existing_file(tmp_path: Path) -> None:
    table = tmp_path / "t.csv"
    invented(False).to_csv(table, index=False)
    alone = run_cli("check", table, "--target", "energy_kwh", "--accept-current")
    assert alone.code == 2 and "--accept-file" in alone.err
    missing = run_cli("check", table, "--target", "energy_kwh", "--accept-file", tmp_path / "none.json")
    assert missing.code == 2 and "--accept-current" in missing.err


@pytest.mark.parametrize(
    "content, problem",
    [
        ('{"prefit_accepted": 1, "findings": [{"rule": "caf\xe9"}]}'.encode("latin-1"), "is not UTF-8 text"),
        (b"[" * 200_000, "nests too deeply"),
        (b'{"prefit_accepted": ' + b"9" * 5000 + b"}", "holds a number too long to read"),
        (b'{"prefit_accepted": true, "findings": []}', "is not a prefit accepted-findings file"),
        (b'{"prefit_accepted": 1.0, "findings": []}', "is not a prefit accepted-findings file"),
        (b'{"schema": 1, "findings": []}', "is not a prefit accepted-findings file"),
        (b'{"prefit_accepted": 1, "findings": [{"rule": "x.y", "grade": "note", "reason": "r", "rows": [1, 2]}]}', "must be a digest text or null"),
    ],
)
def test_a_hostile_or_foreign_accepted_findings_file_is_one_line_usage_error(tmp_path: Path, content: bytes, problem: str) -> None:
    accept = tmp_path / "accepted.json"
    accept.write_bytes(content)
    table = tmp_path / "t.csv"
    invented(False).to_csv(table, index=False)
    run = run_cli("check", table, "--target", "energy_kwh", "--accept-file", accept)
    assert run.code == 2 and problem in run.err and run.err.count("\n") == 1, run.err


def test_a_weaker_grade_of_an_accepted_finding_is_not_new() -> None:
    report = demo_report(invented(True))
    stronger = [replace(f, grade=Grade.BLOCKS) for f in report.findings]
    context = demo_context(invented(True))
    accepted = AcceptedSet.from_findings(stronger, fingerprints(stronger, context))
    after = report.accepting(accepted)
    assert after.findings == () and len(after.accepted) == len(report.findings)
    weaker = [replace(f, grade=Grade.NOTE) for f in report.findings]
    only_notes = AcceptedSet.from_findings(weaker, fingerprints(weaker, context))
    assert report.accepting(only_notes).findings == report.findings


def test_an_edit_to_a_row_no_finding_names_keeps_every_finding_accepted(tmp_path: Path) -> None:
    # Invented site-days with a few planted far rows, so that row-listing findings (robust distances, leverage,
    # Cook's distance, residuals) are present; a small edit to a row that no finding names moves every measured
    # value a little (the fit and the robust centre change) but not which rows are flagged.
    rng = np.random.default_rng(8)
    rows = 400
    outdoor, doors = rng.normal(15, 6, rows), rng.normal(400, 80, rows)
    outdoor[:4] += 40
    doors[4:8] -= 300
    frame = pd.DataFrame({"outdoor_c": outdoor.round(3), "door_openings": doors.round(3)})
    frame["energy_kwh"] = (5000 + 90 * outdoor + 2 * doors + rng.normal(0, 200, rows)).round(1)
    frame.loc[[10, 11], "energy_kwh"] += 5000
    table = tmp_path / "extract.csv"
    frame.to_csv(table, index=False)
    before = run_cli("check", table, "--target", "energy_kwh", "--format", "json").json()["findings"]
    named = {label for f in before for label in f.get("rows", [])}
    assert named, "the table must give findings that list rows"
    accepted = tmp_path / "accepted.json"
    args = ("check", table, "--target", "energy_kwh", "--format", "json", "--accept-file", accepted)
    run_cli(*args, "--accept-current")
    untouched = next(i for i in range(rows) if i + 1 not in named)
    frame.loc[untouched, "door_openings"] += 0.5
    frame.to_csv(table, index=False)
    after = run_cli("check", table, "--target", "energy_kwh", "--format", "json").json()["findings"]
    assert [sorted(f["rows"]) for f in after] == [sorted(f["rows"]) for f in before]
    assert [f["row_values"] for f in after] != [f["row_values"] for f in before], "the edit must move measured values"
    again = run_cli(*args)
    assert again.json()["findings"] == [], [f["rule"] for f in again.json()["findings"]]


def test_row_texts_are_the_json_modules_texts_of_the_rows() -> None:
    import datetime

    from prefit.accepted import _canonical, row_texts

    # The row digest hashes each listed row as Python's json module writes it (sorted keys, canonical values);
    # the column-by-column build must give the same text for every kind of cell.
    table = pa.table(
        {
            "z_text": ['say "hi"\\n', "ümlaut ☃", None, "", "\x00\x1f"],
            "a_float": [0.1, float("nan"), None, -1e300, float("inf")],
            "m_int": [1, None, -(2**62), 0, 7],
            "b_flag": [True, False, None, True, False],
            "d_day": [datetime.date(2024, 1, 2), None, datetime.date(1999, 12, 31), datetime.date(2000, 2, 29), None],
            'q"uoted ☃': [1.5, 2.5, None, 3.0, 5e-324],
            "{braces} {0}": [1.5, -0.0, 1e22, 3.0, 5e-324],
            "ints_as_floats": [1.0, 2.0, 3.0, 4.0, 1e16],
        }
    )
    picked = table.to_pydict()
    columns = sorted(table.column_names)
    expected = [
        json.dumps({c: _canonical(picked[c][i]) for c in columns}, sort_keys=True, ensure_ascii=False) for i in range(table.num_rows)
    ]
    assert row_texts(picked, columns, table.num_rows) == expected
    assert row_texts({}, [], 2) == [json.dumps({})] * 2

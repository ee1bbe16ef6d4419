"""Report formats: SARIF against the official schema, JUnit and Markdown through independent parsers, HTML safety.

Every format is produced for every sample table (reports computed once per
session in ``sample_reports``); the checks read the documents with tools
outside prefit: the OASIS SARIF 2.1.0 JSON schema through ``jsonschema``,
the standard library's XML and HTML parsers, and ``markdown-it-py``.
"""

from __future__ import annotations

import csv
import functools
import io
import json
import xml.etree.ElementTree as ET
from collections import Counter
from html.parser import HTMLParser
from pathlib import Path
from typing import Any, Iterator

import jsonschema
import numpy as np
import pandas as pd
import pytest
from conftest import REFERENCE, ROOT, run_cli
from markdown_it import MarkdownIt
from sample_reports import NAMES, command_args, sample_html, sample_report

import prefit
from prefit.api import run_check
from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.options import CheckOptions
from prefit.reading import TableInfo
from prefit.registry import Registry, discover
from prefit.report import (
    FORMATS,
    ReportWriter,
    RunFacts,
    WriterSettings,
    register_format,
    render,
)
from prefit.report.base import folded
from prefit.rule import Rule, RuleSettings

SARIF_SCHEMA = json.loads((REFERENCE / "sarif-2.1.0" / "sarif-schema-2.1.0.json").read_text(encoding="utf-8"))
SARIF_LEVEL = {"blocks": "error", "misleads": "error", "weakens": "warning", "note": "note"}
HOSTILE = "<script>alert(1)</script> | *x* _y_ `z` [a](b) & \\"


def sarif_errors(document: dict[str, Any]) -> list[str]:
    """Schema violations of a SARIF document."""
    # reference: OASIS SARIF 2.1.0 JSON schema (tests/reference/sarif-2.1.0), draft-04 validator
    validator = jsonschema.Draft4Validator(SARIF_SCHEMA)
    return [f"{list(e.absolute_path)}: {e.message}" for e in validator.iter_errors(document)]


def _loud_rule(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    positions = np.arange(min(3, ctx.table.num_rows))
    rows, values, total = ctx.listed_rows(positions, np.arange(positions.size, dtype=float) + 1.0)
    yield settings.finding(Grade.MISLEADS, "every table has rows worth a look", columns=ctx.model_columns[-1:], rows=rows, row_values=values, row_count=total)


def _raising_rule(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    raise RuntimeError("a plugin bug")


PLUGIN_RULES = (
    Rule(id="demo.loud", summary="Flags the first rows of any table.", why="It shows that new rules reach every report.", remedy="nothing to do", check=_loud_rule, grades=(Grade.MISLEADS,)),
    Rule(id="demo.broken", summary="Always fails.", why="It shows how a failed rule is reported.", remedy="fix the plugin", check=_raising_rule),
)


def plugin_registry() -> Registry:
    """Every installed rule plus two plugin rules that the reporters have never heard of."""
    registry = discover()
    for rule in PLUGIN_RULES:
        registry.add(rule, "tests (plugin rules)")
    return registry


def invented_frame(rows: int = 60) -> pd.DataFrame:
    """An invented warehouse table with a hostile column name (demo data, not evidence)."""
    rng = np.random.default_rng(7)
    frame = pd.DataFrame(
        {
            "site_id": [f"CS-{i:03d}" for i in range(rows)],
            "outdoor_c": rng.uniform(-5, 30, rows).round(1),
            HOSTILE: rng.uniform(50, 800, rows).round(0),
        }
    )
    frame["energy_kwh"] = (4000 + 120 * frame["outdoor_c"] + 3 * frame[HOSTILE] + rng.normal(0, 300, rows)).round(1)
    return frame


def plugin_report() -> prefit.Report:
    frame = invented_frame()
    import pyarrow as pa

    table = pa.Table.from_pandas(frame, preserve_index=False)
    info = TableInfo(path="invented <warehouse>.csv", format="csv", rows=table.num_rows, columns=table.num_columns, sha256=None)
    return run_check(table, info, CheckOptions(target="energy_kwh", id="site_id"), registry=plugin_registry())


# SARIF


@pytest.mark.parametrize("name", NAMES)
def test_sarif_of_every_sample_table_is_valid_and_complete(name: str) -> None:
    report = sample_report(name)
    document = json.loads(report.to_sarif())
    assert sarif_errors(document) == []
    run = document["runs"][0]
    descriptors = run["tool"]["driver"]["rules"]
    assert {d["id"] for d in descriptors} >= {r.id for r in discover()}
    assert len(run["results"]) == len(report.findings)
    for result, finding in zip(run["results"], report.findings):
        assert result["ruleId"] == finding.rule
        assert descriptors[result["ruleIndex"]]["id"] == finding.rule
        assert result["level"] == SARIF_LEVEL[finding.grade.word]
        assert result["message"]["text"].startswith(finding.message)
        logical = [loc["name"] for loc in result["locations"][0].get("logicalLocations", [])]
        assert logical == list(finding.columns)
    assert run["artifacts"][0]["hashes"]["sha-256"] == report.info.sha256


def test_sarif_regions_point_at_the_csv_lines_of_the_named_rows() -> None:
    checked = 0
    for name in NAMES:
        report = sample_report(name)
        if report.info.format != "csv" or not any(f.rows for f in report.findings):
            continue
        id_column = report.design.id
        lines = (ROOT / report.info.path).read_text(encoding="utf-8").split("\n")
        header = next(csv.reader([lines[0]]))
        run = json.loads(report.to_sarif())["runs"][0]
        # reference: the CSV file itself, read with the standard library's csv module
        records = [dict(zip(header, fields)) for fields in csv.reader(lines[1:]) if fields]
        carrying = Counter(record[id_column] for record in records) if id_column is not None else Counter()
        for result, finding in zip(run["results"], report.findings):
            for location, label in zip([result["locations"][0], *result.get("relatedLocations", [])], finding.rows):
                region = location["physicalLocation"].get("region")
                if id_column is not None and carrying[str(label)] != 1:
                    assert region is None, (name, label)
                    continue
                line = region["startLine"]
                record = dict(zip(header, next(csv.reader([lines[line - 1]]))))
                if id_column is None:
                    assert line == int(label) + 1
                else:
                    assert record[id_column] == str(label)
                checked += 1
    if checked == 0:
        pytest.skip("no sample CSV table has a finding that names rows")


def test_sarif_help_carries_why_and_remedy_and_new_rules_appear() -> None:
    report = plugin_report()
    document = json.loads(report.to_sarif())
    assert sarif_errors(document) == []
    run = document["runs"][0]
    by_id = {d["id"]: d for d in run["tool"]["driver"]["rules"]}
    for rule in PLUGIN_RULES:
        assert rule.why in by_id[rule.id]["help"]["text"]
        assert rule.remedy in by_id[rule.id]["help"]["text"]
    loud = [r for r in run["results"] if r["ruleId"] == "demo.loud"]
    assert len(loud) == 1 and loud[0]["level"] == "error"
    assert run["invocations"][0]["executionSuccessful"] is False
    notes = run["invocations"][0]["toolExecutionNotifications"]
    assert any("demo.broken" in n["message"]["text"] for n in notes)


def test_sarif_is_byte_stable() -> None:
    report = sample_report(NAMES[0])
    assert report.to_sarif() == report.to_sarif()


# JUnit


@pytest.mark.parametrize("name", NAMES)
def test_junit_of_every_sample_table_parses_with_consistent_counts(name: str) -> None:
    report = sample_report(name)
    # reference: the standard library's XML parser
    root = ET.fromstring(report.to_junit())
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert len(suites) == 1
    suite = suites[0]
    cases = suite.findall("testcase")
    assert [c.get("name") for c in cases] == [o.rule for o in report.outcomes]
    assert int(suite.get("tests")) == len(cases) == len(report.outcomes)
    failing = [c for c in cases if c.find("failure") is not None]
    gated_rules = {f.rule for f in report.gated}
    assert {c.get("name") for c in failing} == gated_rules
    assert int(suite.get("failures")) == len(failing) == int(root.get("failures"))
    for case in failing:
        messages = {f.message for f in report.gated if f.rule == case.get("name")}
        assert case.find("failure").get("message") in messages
    not_applicable = [o for o in report.outcomes if o.not_applicable is not None]
    assert int(suite.get("skipped")) == len(report.failed_rules) + len(not_applicable)


def test_junit_skips_a_rule_that_could_not_run_with_its_reason() -> None:
    root = ET.fromstring(plugin_report().to_junit())
    cases = {c.get("name"): c for c in root.iter("testcase")}
    skipped = cases["demo.broken"].find("skipped")
    assert skipped is not None and "a plugin bug" in skipped.get("message")
    assert cases["demo.loud"].find("failure").get("message") == "every table has rows worth a look"
    not_applicable = [c for c in cases.values() if c.find("skipped") is not None and c.find("skipped").get("message").startswith("not applicable")]
    assert int(root.get("skipped")) == 1 + len(not_applicable)


def test_junit_has_one_suite_per_table_on_the_command_line(tmp_path: Path) -> None:
    frame = invented_frame()
    first, second = tmp_path / "march.csv", tmp_path / "april.csv"
    frame.to_csv(first, index=False)
    frame.iloc[::-1].to_csv(second, index=False)
    run = run_cli("check", first, second, "--target", "energy_kwh", "--id", "site_id", "--format", "junit")
    root = ET.fromstring(run.out)
    assert [s.get("name") for s in root.findall("testsuite")] == [str(first), str(second)]
    assert int(root.get("tests")) == sum(int(s.get("tests")) for s in root.findall("testsuite"))
    sarif = json.loads(run_cli("check", first, second, "--target", "energy_kwh", "--id", "site_id", "--format", "sarif").out)
    assert sarif_errors(sarif) == []
    assert len(sarif["runs"]) == 1 and [a["location"]["uri"] for a in sarif["runs"][0]["artifacts"]] == [first.as_uri(), second.as_uri()]
    indices = {r["locations"][0]["physicalLocation"]["artifactLocation"]["index"] for r in sarif["runs"][0]["results"]}
    assert indices <= {0, 1}


# Markdown


class _Tables(HTMLParser):
    """Cell texts of every HTML table, as a browser would show them."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: list[list[list[str]]] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: Any) -> None:
        if tag == "table":
            self.tables.append([])
        elif tag == "tr":
            self.tables[-1].append([])
        elif tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "th") and self._cell is not None:
            self.tables[-1][-1].append("".join(self._cell).strip())
            self._cell = None

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)


def markdown_tables(text: str) -> list[list[list[str]]]:
    # reference: markdown-it-py (CommonMark with the GFM table extension) and the standard library's HTML parser
    html = MarkdownIt("commonmark").enable("table").render(text)
    parser = _Tables()
    parser.feed(html)
    return parser.tables


@pytest.mark.parametrize("name", NAMES)
def test_markdown_of_every_sample_table_renders_its_tables(name: str) -> None:
    report = sample_report(name)
    tables = markdown_tables(report.to_markdown())
    counts = tables[0]
    assert counts[0] == ["blocks", "misleads", "weakens", "note", "accepted"]
    summary = report.to_dict()["summary"]
    assert counts[1] == [str(summary[w]) for w in counts[0][:4]] + [str(len(report.accepted))]
    if report.findings:
        rows = tables[1][1:]
        assert len(rows) == len(report.findings)
        # roots in fix-first order, each followed by the findings it explains (marked with an arrow)
        ordered = [(finding, finding is root) for root, effects in folded(report) for finding in [root, *effects]]
        for cells, (finding, is_root) in zip(rows, ordered):
            assert cells[0] == (finding.grade.word if is_root else f"\u21b3 {finding.grade.word}")
            assert cells[1] == finding.rule
            assert cells[2] == (", ".join(finding.columns) or "-")
            assert cells[3].startswith(finding.message)
    else:
        assert len(tables) == 1


def test_markdown_keeps_hostile_column_names_as_text() -> None:
    report = plugin_report()
    text = report.to_markdown()
    assert "<script>" not in text
    findings_table = markdown_tables(text)[1]
    columns = [row[2] for row in findings_table[1:]]
    assert HOSTILE in columns
    rendered = MarkdownIt("commonmark").enable("table").render(text)
    assert "<script>" not in rendered


# HTML


class _Page(HTMLParser):
    """Tags, attributes and text of a page, for safety checks."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: Any) -> None:
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def parse_page(html: str) -> _Page:
    # reference: the standard library's HTML parser
    page = _Page()
    page.feed(html)
    return page


def assert_self_contained(html: str) -> _Page:
    page = parse_page(html)
    tags = [t for t, _ in page.tags]
    assert "script" not in tags and "link" not in tags and "iframe" not in tags
    for tag, attrs in page.tags:
        for key in ("src", "href", "xlink:href"):
            value = attrs.get(key)
            assert value is None or value.startswith(("#", "data:")), (tag, key, value)
        assert not any(k.startswith("on") for k in attrs), (tag, attrs)
    policy = [a for t, a in page.tags if t == "meta" and a.get("http-equiv") == "Content-Security-Policy"]
    assert policy and "default-src 'none'" in (policy[0]["content"] or "")
    return page


@pytest.mark.parametrize("name", NAMES)
def test_html_of_every_sample_table_is_self_contained_with_plots(name: str) -> None:
    report = sample_report(name)
    html = sample_html(name)
    page = assert_self_contained(html)
    figures = [a.get("id") for t, a in page.tags if t == "figure"]
    svgs = [t for t, _ in page.tags if t == "svg"]
    text = " ".join(page.text)
    assert len(svgs) == len(figures) - ("No missing values" in text)  # a table without holes gets a sentence, not a map
    if report.design.kinds[report.target] in ("numeric", "boolean") and report.complete_cases > report.parameters:
        assert "t1-missingness" in figures and "t1-influence" in figures
    for finding in report.findings:
        assert finding.message in text


def test_html_escapes_every_data_text() -> None:
    report = plugin_report()
    html = report.to_html()
    page = assert_self_contained(html)
    assert "<script>alert(1)</script>" not in html
    text = "".join(page.text)
    assert "invented <warehouse>.csv" in text
    assert HOSTILE in text


def test_html_is_byte_stable_and_plots_can_be_left_out() -> None:
    report = sample_report(NAMES[0])
    assert report.to_html() == sample_html(NAMES[0])
    bare = report.to_html(plots=False)
    assert "<svg" not in bare and "<figure" not in bare


def test_repr_html_is_a_fragment_for_notebooks() -> None:
    fragment = plugin_report()._repr_html_()
    assert fragment.startswith('<div class="prefit-report">') and "<html" not in fragment
    assert "<script>alert(1)</script>" not in fragment


# The writer lifecycle and the command line


class _Recorder(ReportWriter):
    def begin_run(self, run: RunFacts) -> None:
        super().begin_run(run)
        self.calls = [("begin_run", len(run.rules))]

    def begin_table(self, report: prefit.Report) -> None:
        self.calls.append(("begin_table", report.info.path))

    def finding(self, finding: Finding) -> None:
        self.calls.append(("finding", finding.rule))

    def end_table(self, report: prefit.Report) -> None:
        self.calls.append(("end_table", report.info.path))

    def end_run(self) -> str:
        return json.dumps(self.calls)


def test_writers_share_one_lifecycle_and_formats_can_be_registered(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(FORMATS, "calls", lambda settings: _Recorder(settings))
    with pytest.raises(ValueError):
        register_format("calls", lambda settings: _Recorder(settings))
    report = plugin_report()
    calls = json.loads(render("calls", [report, report], WriterSettings()))
    per_table = [["begin_table", report.info.path], *[["finding", f.rule] for f in report.findings], ["end_table", report.info.path]]
    assert calls == [["begin_run", len(plugin_registry())], *per_table, *per_table]


@pytest.mark.parametrize("fmt", ["sarif", "junit", "markdown", "html", "json", "text"])
def test_every_format_is_written_by_the_command_line(fmt: str, tmp_path: Path) -> None:
    table = tmp_path / "invented.csv"
    invented_frame().to_csv(table, index=False)
    out = tmp_path / f"report.{fmt}"
    run = run_cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--format", fmt, "--output", out)
    assert run.code in (0, 1) and run.err == ""
    assert out.read_text(encoding="utf-8") == prefit.check(str(table), target="energy_kwh", id="site_id").render(fmt)


def test_an_unknown_format_is_a_usage_error(tmp_path: Path) -> None:
    table = tmp_path / "invented.csv"
    invented_frame().to_csv(table, index=False)
    run = run_cli("check", table, "--target", "energy_kwh", "--format", "pdf")
    assert run.code == 2
    assert "sarif" in run.err and run.err.count("\n") == 1


def test_sample_table_formats_through_the_command_line_match_the_api(monkeypatch: pytest.MonkeyPatch) -> None:
    name = NAMES[0]
    monkeypatch.chdir(ROOT)
    run = run_cli(*command_args(name), "--format", "sarif")
    assert run.out == sample_report(name).to_sarif()


# Progress


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_bar_draws_on_a_terminal_and_stays_silent_otherwise(tmp_path: Path) -> None:
    from prefit.progress import progress_for

    assert progress_for(io.StringIO()) is None
    stream = _Terminal()
    bar = progress_for(stream)
    assert bar is not None
    frame = invented_frame()
    import pyarrow as pa

    table = pa.Table.from_pandas(frame, preserve_index=False)
    info = TableInfo(path="invented.csv", format="csv", rows=table.num_rows, columns=table.num_columns, sha256=None)
    run_check(table, info, CheckOptions(target="energy_kwh", id="site_id"), progress=bar)
    assert "invented.csv" in stream.getvalue()
    path = tmp_path / "invented.csv"
    frame.to_csv(path, index=False)
    run = run_cli("check", path, "--target", "energy_kwh", "--id", "site_id")
    assert run.err == ""


# The pre-commit hook


def test_pre_commit_hook_runs_the_console_script_on_data_files() -> None:
    import re
    import tomllib

    text = (ROOT / ".pre-commit-hooks.yaml").read_text(encoding="utf-8")
    fields = dict(re.findall(r"^\s*-?\s*(id|entry|language|files|require_serial): (.+)$", text, flags=re.M))
    assert fields["id"] == "prefit-check" and fields["language"] == "python"
    scripts = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]["scripts"]
    assert fields["entry"].split()[0] in scripts and fields["entry"].split()[1] == "check"
    pattern = re.compile(fields["files"].strip("'"))
    from sample_reports import RECIPES, generate

    for found in RECIPES:
        assert pattern.search(f"extracts/{generate.file_name(found)}")
    for name in ("extracts/march.csv.gz", "data/april.parquet", "x.feather", "y.jsonl.zst"):
        assert pattern.search(name), name
    for name in ("README.md", "notes.txt", "analysis.py", "report.html"):
        assert not pattern.search(name), name


# Edge cases: every format is written for tables that leave little to fit


def _edge_tables() -> dict[str, pd.DataFrame]:
    rng = np.random.default_rng(3)
    noise = rng.normal(size=20)
    return {
        "one row": pd.DataFrame({"outdoor_c": [1.0], "energy_kwh": [2.0]}),
        "all-missing predictor": pd.DataFrame({"outdoor_c": [np.nan] * 20, "door_openings": rng.normal(size=20), "energy_kwh": noise}),
        "text target": pd.DataFrame({"outdoor_c": np.arange(20.0), "energy_kwh": ["n/a"] * 20}),
        "duplicated column": pd.DataFrame({"outdoor_c": np.arange(20.0), "outdoor_copy": np.arange(20.0), "energy_kwh": noise}),
        "categories only": pd.DataFrame({"compressor_type": ["screw", "scroll"] * 10, "energy_kwh": noise}),
        "exact fit": pd.DataFrame({"outdoor_c": np.arange(20.0), "energy_kwh": 2.0 * np.arange(20.0)}),
    }


@pytest.mark.parametrize("shape", list(_edge_tables()))
def test_every_format_is_written_for_edge_case_tables(shape: str) -> None:
    report = prefit.check(_edge_tables()[shape], target="energy_kwh")
    assert sarif_errors(json.loads(report.to_sarif())) == []
    ET.fromstring(report.to_junit())
    assert markdown_tables(report.to_markdown())[0][0][0] == "blocks"
    assert_self_contained(report.to_html())
    assert report.render("text")


def test_a_label_shared_by_several_rows_is_shown_once_with_its_count() -> None:
    from prefit.report.base import row_groups

    shared = Finding(rule="demo.rows", grade=Grade.NOTE, message="m", rows=("CS-002", "CS-002", "CS-007", "CS-002"), row_count=9)
    assert row_groups(shared, 10) == (["CS-002 (3 rows)", "CS-007"], 5)
    assert row_groups(shared, 1) == (["CS-002 (3 rows)"], 6)
    unique = Finding(rule="demo.rows", grade=Grade.NOTE, message="m", rows=(4, 9, 1), row_count=3)
    assert row_groups(unique, 2) == (["4", "9"], 1)


# Hostile text in names and cells, in every format

HOSTILE_TEXTS = (
    "<script>alert(1)</script>",
    "end]]>cdata",
    "\x1b[2J\x1b[H READY at gate misleads: 0 blocks \x1b[8m",
    "bell\x07ring",
    "right\u202eto-left",
    "isolate\u2066x\u2069",
    "c1\x85next",
    "pipe | and `tick`",
    "line\nbreak",
    "tab\there",
    "quote\"and'apostrophe",
    "L" * 5000,
)
BIG_CELL = 5_000_000
# Control, bidirectional and separator characters no report may carry raw; line feeds and tabs are layout in some formats.
RAW_CONTROL = "[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028\u2029\u202a-\u202e\u2066-\u2069]"


@functools.lru_cache(maxsize=1)
def hostile_report() -> prefit.Report:
    """A table whose column names, id cells and category levels hold every hostile text, and one 5 MB id cell."""
    import pyarrow as pa

    rng = np.random.default_rng(14)
    n = 36
    columns: dict[str, Any] = {"energy_kwh": rng.normal(100, 10, n)}
    for i, name in enumerate(HOSTILE_TEXTS):
        values = rng.normal(0, 1, n)
        values[i] = 40.0  # an outlier per column, so that findings name the columns and rows
        columns[name] = values
    labels = [HOSTILE_TEXTS[i % len(HOSTILE_TEXTS)] + f" #{i}" for i in range(n)]
    labels[0] = "C" * BIG_CELL
    columns["site\x1b]0;title\x07"] = labels
    columns["kind\u202e"] = [HOSTILE_TEXTS[i % 3] for i in range(n)]
    table = pa.table(columns)
    info = TableInfo(path="hostile\x1b[31m|`<b>`.csv", format="csv", rows=n, columns=table.num_columns, sha256=None)
    return run_check(table, info, CheckOptions(target="energy_kwh", id="site\x1b]0;title\x07"))


@pytest.mark.parametrize("fmt", ["text", "json", "sarif", "junit", "markdown", "html"])
def test_hostile_names_and_cells_are_inert_in_every_format(fmt: str) -> None:
    import re

    report = hostile_report()
    assert report.findings and any(f.rows for f in report.findings)
    text = report.render(fmt, colour=False)
    assert not re.search(RAW_CONTROL, text), repr(re.search(RAW_CONTROL, text))
    assert len(text) < BIG_CELL // 5 and "C" * 200 not in text and "L" * 200 not in text
    assert "(5,000,000 characters)" in text or fmt == "junit" and report.findings[0].rows == ()
    if fmt in ("json", "sarif"):
        document = json.loads(text)
        if fmt == "sarif":
            assert sarif_errors(document) == []
        else:
            assert "line\nbreak" in document["design"]["kinds"]  # JSON escapes by its own syntax: the name reads back whole
    if fmt == "junit":
        ET.fromstring(text.encode("utf-8"))  # well-formed XML, ]]> and all
    if fmt == "html":
        assert "<script" not in text.lower().replace("&lt;script", "")
    if fmt == "markdown":
        rows = markdown_tables(text)[1][1:]
        assert len(rows) == len(report.findings) and all(len(cells) == 4 for cells in rows)
        assert "<script>" not in MarkdownIt("commonmark").enable("table").render(text)
    if fmt in ("text", "markdown", "html"):
        shown = MarkdownIt("commonmark").enable("table").render(text) if fmt == "markdown" else text
        assert "line\\nbreak" in shown and "\\x1b[2J" in shown and "right\\u202eto-left" in shown


@pytest.mark.parametrize("purpose", ["explain", "predict"])
def test_every_format_states_the_purpose(purpose: str) -> None:
    report = prefit.check(invented_frame(), target="energy_kwh", id="site_id", purpose=purpose)
    # JSON: validated against the shipped schema with jsonschema
    document = json.loads(report.to_json())
    jsonschema.validate(document, json.loads((ROOT / "linter" / "report" / "report.schema.json").read_text(encoding="utf-8")))
    assert document["purpose"] == purpose
    # SARIF: the run's table properties, the whole log valid against the OASIS schema
    sarif = json.loads(report.to_sarif())
    assert sarif_errors(sarif) == []
    assert sarif["runs"][0]["properties"]["tables"][0]["purpose"] == purpose
    # JUnit: a suite property, read back with the standard library's XML parser
    suite = ET.fromstring(report.to_junit()).find("testsuite")
    assert suite is not None
    assert {p.get("name"): p.get("value") for p in suite.iter("property")}["purpose"] == purpose
    assert f"purpose {purpose}" in report.render("text")
    assert f"purpose {purpose}" in report.to_markdown()
    assert f"<dt>purpose</dt><dd>{purpose}</dd>" in report.to_html(plots=False)


def test_report_formats_come_through_the_entry_point_group() -> None:
    import importlib.metadata

    from prefit.report import formats

    points = {ep.name for ep in importlib.metadata.entry_points(group="prefit.formats")}
    assert {"text", "json", "sarif", "junit", "markdown", "html"} <= points
    assert points <= set(formats())

"""One run, several reports; the schema command; `prefit init` proposing a configuration; config keys that match flags."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ElementTree
from importlib import resources
from pathlib import Path
from typing import Any

import jsonschema
import numpy as np
from conftest import run_cli

SAMPLES = Path(__file__).resolve().parents[1] / "sample_tables"
CLEAN = SAMPLES / "warehouse_clean.csv"
ARGS = ("--target", "energy_kwh", "--id", "site_id", "--exclude", "day")
SCHEMA = json.loads(resources.files("prefit").joinpath("report/report.schema.json").read_text())


def test_several_outputs_from_one_run_each_in_the_format_of_its_extension(tmp_path: Path) -> None:
    outputs = {name: tmp_path / name for name in ("r.json", "r.sarif", "r.xml", "r.md", "r.html", "r.txt")}
    run = run_cli("check", CLEAN, *ARGS, *[a for path in outputs.values() for a in ("--output", path)])
    assert run.code == 0 and run.out == "", run.err
    jsonschema.validate(json.loads(outputs["r.json"].read_text()), SCHEMA)
    assert json.loads(outputs["r.sarif"].read_text())["version"] == "2.1.0"
    assert ElementTree.fromstring(outputs["r.xml"].read_text()).tag == "testsuites"
    assert outputs["r.html"].read_text().lstrip().lower().startswith("<!doctype html")
    assert outputs["r.md"].read_text().startswith("#") and "READY" in outputs["r.txt"].read_text()


def test_a_single_output_takes_the_format_from_its_extension_unless_format_says(tmp_path: Path) -> None:
    report = tmp_path / "report.json"
    assert run_cli("check", CLEAN, *ARGS, "--output", report).code == 0
    assert json.loads(report.read_text())["findings"] is not None
    plain = tmp_path / "report.log"
    assert run_cli("check", CLEAN, *ARGS, "--format", "markdown", "--output", plain).code == 0
    assert plain.read_text().startswith("#")


def test_contradicting_output_options_are_usage_errors(tmp_path: Path) -> None:
    twice = run_cli("check", CLEAN, *ARGS, "--format", "json", "--format", "sarif")
    assert twice.code == 2 and "--format" in twice.err and twice.err.count("\n") == 1
    unknown = run_cli("check", CLEAN, *ARGS, "--output", tmp_path / "a.json", "--output", tmp_path / "b.log")
    assert unknown.code == 2 and "b.log" in unknown.err
    same = run_cli("check", CLEAN, *ARGS, "--output", tmp_path / "a.json", "--output", tmp_path / "a.json")
    assert same.code == 2


def test_the_schema_command_prints_the_report_schema() -> None:
    run = run_cli("schema")
    assert run.code == 0 and json.loads(run.out) == SCHEMA


def test_usage_errors_name_the_command_once() -> None:
    run = run_cli("check")
    assert run.code == 2 and run.err.startswith("prefit: check: ") and "prefit: prefit" not in run.err


def test_init_proposes_a_configuration_that_checks_the_table(tmp_path: Path) -> None:
    table = SAMPLES / "warehouse_humidity_codes.csv"
    run = run_cli("init", table, "--target", "energy_kwh")
    assert run.code == 0, run.err
    text = (tmp_path / "prefit.toml").read_text()
    assert 'target = "energy_kwh"' in text and 'id = "site_id"' in text and 'order = "day"' in text
    assert "humidity_pct = [-999]" in text
    check = run_cli("check", table, "--format", "json")
    assert check.code in (0, 1), check.err
    assert "missingness.disguised-codes" not in check.rules()  # the proposed codes are declared, so no longer stand-ins
    again = run_cli("init", table, "--target", "energy_kwh")
    assert again.code == 2 and "--force" in again.err
    assert run_cli("init", table, "--target", "energy_kwh", "--force").code == 0


def test_config_keys_match_the_flags_and_the_older_spellings_still_work(tmp_path: Path) -> None:
    (tmp_path / "prefit.toml").write_text('target = "energy_kwh"\nid = "site_id"\nexclude = ["day"]\nfail-at = "weakens"\nskip = ["outliers"]\n')
    new = run_cli("check", CLEAN, "--format", "json")
    assert new.json()["gate"] == "weakens" and not [r for r in new.rules() if r.startswith("outliers.")]
    (tmp_path / "prefit.toml").write_text('target = "energy_kwh"\nid = "site_id"\nexclude = ["day"]\ngate = "weakens"\nskip-rules = ["outliers"]\n')
    old = run_cli("check", CLEAN, "--format", "json")
    assert old.json()["gate"] == "weakens" and old.rules() == new.rules()
    (tmp_path / "prefit.toml").write_text('target = "energy_kwh"\ngate = "weakens"\nfail-at = "note"\n')
    both = run_cli("check", CLEAN)
    assert both.code == 2 and "fail-at" in both.err


def _duplicated(distinct: int) -> Any:
    import pandas as pd

    rng = np.random.default_rng(21)
    outdoor = rng.uniform(-5, 35, distinct).round(3)
    energy = (6_000 + 110 * outdoor + rng.normal(0, 500, distinct)).round(3)
    return pd.DataFrame({"outdoor_c": np.tile(outdoor, 2), "energy_kwh": np.tile(energy, 2)})  # every row exported twice


OTHER_FAMILIES = ["assumptions", "collinearity", "design", "drift", "grouping", "influence", "missingness", "outliers", "range", "sample-size", "target"]


def _exact_repeats(report: Any) -> list[dict[str, Any]]:
    findings = json.loads(report.to_json())["findings"]
    return [f for f in findings if f["rule"] == "hygiene.duplicate-rows" and "exactly in every column" in f["message"]]


def test_the_json_report_lists_every_flagged_row_up_to_its_documented_cap() -> None:
    import prefit
    from prefit.findings import MAX_LISTED_ROWS

    report = prefit.check(_duplicated(600), target="energy_kwh", skip_rules=OTHER_FAMILIES)
    (repeats,) = _exact_repeats(report)
    assert repeats["row_count"] == 600 and len(repeats["rows"]) == 600 and repeats["rows_capped"] is False  # not the first 50
    assert "10,000" in SCHEMA["$defs"]["finding"]["properties"]["rows_capped"]["description"] and MAX_LISTED_ROWS == 10_000
    many = prefit.check(_duplicated(MAX_LISTED_ROWS + 250), target="energy_kwh", skip_rules=OTHER_FAMILIES)
    (capped,) = _exact_repeats(many)
    assert capped["row_count"] == MAX_LISTED_ROWS + 250 and len(capped["rows"]) == MAX_LISTED_ROWS and capped["rows_capped"] is True

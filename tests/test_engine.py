"""The engine: rule discovery through entry points, configured settings, failures contained as engine.rule-error."""

from __future__ import annotations

import importlib.metadata
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from conftest import run_cli

from prefit.api import options_from, run_check
from prefit.errors import PluginProblem
from prefit.findings import Finding, Grade
from prefit.reading import TableInfo
from prefit.registry import Registry, check_rule, discover
from prefit.rule import Rule, RuleSettings, Threshold

BUILT_IN_FAMILIES = {"assumptions", "collinearity", "design", "hygiene", "influence", "missingness", "outliers", "range", "sample-size", "target"}
PLUGIN = Path(__file__).resolve().parent / "plugin_example"


def _table() -> pa.Table:
    rng = np.random.default_rng(11)
    x = rng.normal(size=200)
    return pa.table({"energy_kwh": 3 * x + rng.normal(size=200), "outdoor_c": x})


def _info(table: pa.Table) -> TableInfo:
    return TableInfo("<test>", "memory", table.num_rows, table.num_columns, None)


def _explodes(ctx: object, settings: RuleSettings) -> list[Finding]:
    raise ZeroDivisionError("boom")


def _always(ctx: object, settings: RuleSettings) -> list[Finding]:
    return [settings.finding(Grade.WEAKENS, "always", value=1.0, threshold=settings.threshold("weakens"))]


EXPLODES = Rule(id="test.explodes", summary="raises", why="to test containment", remedy="none", check=_explodes)
ALWAYS = Rule(
    id="test.always",
    summary="always weakens",
    why="to test grading",
    remedy="none",
    check=_always,
    thresholds=(Threshold("weakens", 0.5, "common practice", Grade.WEAKENS),),
)


def _registry(*rules: Rule) -> Registry:
    registry = Registry()
    for rule in rules:
        registry.add(rule, "test")
    return registry


def test_built_in_families_come_through_entry_points(registry: Registry) -> None:
    points = {ep.name: ep for ep in importlib.metadata.entry_points(group="prefit.rules")}
    assert BUILT_IN_FAMILIES <= set(points)
    assert all(points[family].dist is not None and points[family].dist.name == "prefit" for family in BUILT_IN_FAMILIES)
    assert {"collinearity", "design", "hygiene", "missingness", "sample-size", "target"} <= set(registry.families())
    assert all(registry.origins[rule_id].startswith("plugin prefit (") for rule_id in registry.rules if not rule_id.startswith("example."))


def test_a_failing_rule_is_reported_and_the_others_still_run() -> None:
    table = _table()
    report = run_check(table, _info(table), options_from(target="energy_kwh"), registry=_registry(EXPLODES, ALWAYS))
    assert report.exit_code == 3
    assert report.failed_rules == ("test.explodes",)
    errors = [f for f in report.findings if f.rule == "engine.rule-error"]
    assert len(errors) == 1 and "ZeroDivisionError: boom" in errors[0].message and "test.explodes" in errors[0].message
    assert any(f.rule == "test.always" for f in report.findings)
    assert report.to_dict()["complete"] is False


def test_gate_and_grade_override() -> None:
    table = _table()
    registry = _registry(ALWAYS)
    assert run_check(table, _info(table), options_from(target="energy_kwh"), registry=registry).exit_code == 0
    assert run_check(table, _info(table), options_from(target="energy_kwh", fail_at="weakens"), registry=registry).exit_code == 1
    overridden = run_check(table, _info(table), options_from(target="energy_kwh", fail_at="weakens", rule={"test.always": {"grade": "note"}}), registry=registry)
    assert overridden.exit_code == 0 and overridden.findings[0].grade is Grade.NOTE
    raised = run_check(table, _info(table), options_from(target="energy_kwh", rule={"test.always": {"thresholds": {"weakens": 2.0}}}), registry=registry)
    assert raised.findings[0].threshold == 2.0 and raised.findings[0].source == "configured"


def test_unknown_threshold_name_is_a_usage_error() -> None:
    from prefit.errors import UsageProblem

    table = _table()
    with pytest.raises(UsageProblem, match="has no threshold 'weaken'"):
        run_check(table, _info(table), options_from(target="energy_kwh", rule={"test.always": {"thresholds": {"weaken": 2}}}), registry=_registry(ALWAYS))


def test_contract_checks() -> None:
    with pytest.raises(PluginProblem, match="family.name"):
        check_rule(Rule(id="NoFamily", summary="s", why="w", remedy="r", check=_always), "test")
    with pytest.raises(PluginProblem, match="has no source"):
        check_rule(Rule(id="a.b", summary="s", why="w", remedy="r", check=_always, thresholds=(Threshold("x", 1, ""),)), "test")
    with pytest.raises(PluginProblem, match="not a rule"):
        check_rule(object(), "test")
    registry = _registry(ALWAYS)
    with pytest.raises(PluginProblem, match="already registered"):
        registry.add(ALWAYS, "again")


def test_registries_are_fresh_objects() -> None:
    assert discover() is not discover()
    assert discover().rules.keys() == discover().rules.keys()


def _pip_install_target(tmp_path: Path) -> Path:
    """Install the example plugin with pip into a folder of its own (a copy, so the source tree stays clean)."""
    source = tmp_path / "plugin_source"
    shutil.copytree(PLUGIN, source)
    target = tmp_path / "site"
    command = [sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--target", str(target), str(source)]
    subprocess.run(command, check=True, capture_output=True, text=True)
    return target


def test_a_third_party_plugin_is_installed_and_discovered_end_to_end(tmp_path: Path) -> None:
    site = _pip_install_target(tmp_path)
    table = tmp_path / "t.csv"
    rng = np.random.default_rng(12)
    outdoor = rng.uniform(-5, 35, 400).round(1)
    pd.DataFrame({"energy": (2 * outdoor + rng.normal(0, 15, 400)).round(1), "outdoor_c": outdoor}).to_csv(table, index=False)
    env = {**os.environ, "PYTHONPATH": str(site)}
    listing = subprocess.run([sys.executable, "-m", "prefit", "rules", "--format", "json"], capture_output=True, text=True, env=env, check=True)
    rules = {r["id"]: r for r in json.loads(listing.stdout)["rules"]}
    assert "example.target-unit" in rules and "prefit-example-rules" in rules["example.target-unit"]["origin"]
    checked = subprocess.run([sys.executable, "-m", "prefit", "check", str(table), "--target", "energy", "--format", "json"], capture_output=True, text=True, env=env)
    assert checked.returncode == 0, checked.stderr
    assert "example.target-unit" in [f["rule"] for f in json.loads(checked.stdout)["findings"]]


def test_a_plugin_that_fails_to_load_names_its_distribution(tmp_path: Path) -> None:
    dist = tmp_path / "broken_rules-0.1.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: broken-rules\nVersion: 0.1\n")
    (dist / "entry_points.txt").write_text("[prefit.rules]\nbroken = no_such_module_anywhere:RULES\n")
    env = {**os.environ, "PYTHONPATH": str(tmp_path)}
    run = subprocess.run([sys.executable, "-m", "prefit", "rules"], capture_output=True, text=True, env=env)
    assert run.returncode == 2
    assert "broken-rules" in run.stderr and "broken = no_such_module_anywhere:RULES" in run.stderr
    assert len(run.stderr.strip().splitlines()) == 1


def test_skip_by_family_and_by_id(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    pd.DataFrame({"y": [1.0, 2.0, 3.0], "x": [1.0, 2.0, 3.5], "z": [2.0, 4.0, 7.0]}).to_csv(path, index=False)
    full = run_cli("check", path, "--target", "y", "--format", "json").json()
    assert "sample-size" in {r.split(".")[0] for r in full["rules_run"]}
    skipped = run_cli("check", path, "--target", "y", "--skip", "sample-size,design.excluded-column", "--format", "json").json()
    assert not any(r.startswith("sample-size.") for r in skipped["rules_run"]) and "design.excluded-column" not in skipped["rules_run"]


def test_rules_without_anything_to_check_are_not_applicable_and_skipped_in_junit(tmp_path: Path) -> None:
    import xml.etree.ElementTree as ET

    path = tmp_path / "t.csv"
    rng = np.random.default_rng(21)
    outdoor = rng.uniform(-5, 35, 400).round(1)
    pd.DataFrame({"energy_kwh": (2 * outdoor + rng.normal(0, 15, 400)).round(1), "outdoor_c": outdoor}).to_csv(path, index=False)
    report = run_cli("check", path, "--target", "energy_kwh", "--format", "json").json()
    reasons = report["rules_not_applicable"]
    assert "--score" in reasons["range.extrapolation"] and "--order" in reasons["assumptions.autocorrelation"]
    suite = ET.fromstring(run_cli("check", path, "--target", "energy_kwh", "--format", "junit").out).find("testsuite")
    skipped = {case.get("name"): case.find("skipped").get("message") for case in suite.iter("testcase") if case.find("skipped") is not None}
    assert skipped["range.extrapolation"].startswith("not applicable: no scoring table")
    assert int(suite.get("skipped")) == len(skipped) == len(reasons)


def test_per_row_diagnostics_are_not_applicable_without_a_fit(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    pd.DataFrame({"y": [1.0, 2.0, 3.5], "a": [1.0, 2.0, 4.0], "b": [3.0, 1.0, 2.0]}).to_csv(path, index=False)
    report = run_cli("check", path, "--target", "y", "--format", "json").json()
    reasons = report["rules_not_applicable"]
    assert "influence.cooks-distance" in reasons and "no residual degrees of freedom" in reasons["influence.cooks-distance"]

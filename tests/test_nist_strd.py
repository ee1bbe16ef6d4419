"""The preliminary fit against NIST StRD certified values, and honest accuracy on the high-difficulty designs."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from nist_strd import Certified, certified_rounding, load
from numpy.testing import assert_allclose

from prefit.api import check, context_for

LOWER_AND_AVERAGE = ["Norris", "Pontius", "NoInt1", "NoInt2", "Longley"]
HIGH_DIFFICULTY = ["Filip", "Wampler1", "Wampler2", "Wampler3", "Wampler4", "Wampler5"]
SEVEN_DIGITS = 5e-8


def _findings(data: Certified, rule: str) -> list:
    report = check(data.table, target=data.target, intercept=data.intercept)
    return [f for f in report.findings if f.rule == rule]


@pytest.mark.parametrize("name", LOWER_AND_AVERAGE)
def test_fit_reproduces_certified_values_to_seven_digits(name: str) -> None:
    data = load(name)
    fit = context_for(data.table, data.target, intercept=data.intercept).fit
    # reference: NIST StRD certified values (coefficients, their standard deviations, residual SD, R-squared)
    assert_allclose(fit.coef, data.estimates, rtol=SEVEN_DIGITS, atol=0)
    assert_allclose(fit.se, data.standard_errors, rtol=SEVEN_DIGITS, atol=0)
    assert_allclose(fit.sigma, data.residual_sd, rtol=SEVEN_DIGITS)
    assert_allclose(fit.r_squared, data.r_squared, rtol=SEVEN_DIGITS)


@pytest.mark.parametrize("name", LOWER_AND_AVERAGE + HIGH_DIFFICULTY)
def test_fit_matches_certified_values_to_the_digits_it_claims(name: str) -> None:
    data = load(name)
    fit = context_for(data.table, data.target, intercept=data.intercept).fit
    # reference: NIST StRD certified values; allowance = claimed digits plus the certificate's own last-digit rounding
    for ours, certified, claimed, texts in (
        (fit.coef, data.estimates, fit.coef_digits, data.estimate_texts),
        (fit.se, data.standard_errors, fit.se_digits, data.sd_texts),
    ):
        vouched = claimed > 0
        allowed = 10.0 ** (-claimed) * np.abs(certified) + certified_rounding(texts)
        assert np.all(np.abs(ours - certified)[vouched] <= allowed[vouched]), (name, ours, certified, claimed)


def test_claims_are_not_empty_where_the_fit_is_accurate() -> None:
    # reference: NIST StRD certified values; Longley is matched to about 11 digits, so a claim of 7 or more is earned
    longley = load("Longley")
    fit = context_for(longley.table, longley.target, intercept=longley.intercept).fit
    assert fit.digits is not None
    assert np.min(fit.coef_digits) >= 7 and np.min(fit.se_digits) >= 7


def test_filip_is_full_rank_and_not_reported_as_an_exact_dependency() -> None:
    data = load("Filip")
    ctx = context_for(data.table, data.target, intercept=data.intercept)
    # reference: NIST StRD certifies a unique solution for all 11 Filip parameters
    assert ctx.factor.rank == 11
    assert _findings(data, "collinearity.exact") == []


@pytest.mark.parametrize("name", HIGH_DIFFICULTY)
def test_precision_rule_fires_on_the_high_difficulty_designs(name: str) -> None:
    data = load(name)
    (finding,) = _findings(data, "collinearity.precision")
    design = np.column_stack([np.ones(len(data.table)), data.table.drop(columns=[data.target]).to_numpy()])
    # reference: numpy 2-norm condition number of the raw design (columns as given); the smallest singular value
    # of a design this ill-conditioned is itself known only to a few digits, hence 1% and 0.01 digit
    kappa = np.linalg.cond(design)
    assert_allclose(finding.value, kappa, rtol=1e-2)
    assert_allclose(finding.details["digits_lost"], np.log10(kappa), atol=1e-2)
    expected = "misleads" if kappa >= 1e12 else "weakens" if kappa >= 1e8 else "note"
    assert finding.grade.word == expected


def test_filip_precision_finding_is_misleads_and_names_the_powers() -> None:
    (finding,) = _findings(load("Filip"), "collinearity.precision")
    # reference: NIST StRD grades Filip "higher difficulty"; its raw condition number exceeds 1e15 (numpy SVD)
    assert finding.grade.word == "misleads"
    assert finding.details["digits_lost"] > 15
    assert set(finding.columns) <= {"x", *(f"x{k}" for k in range(2, 11))} and finding.columns


def test_exact_fit_says_it_cannot_vouch_for_its_standard_errors() -> None:
    data = load("Wampler1")
    fit = context_for(data.table, data.target, intercept=data.intercept).fit
    # reference: NIST StRD certifies Wampler1 as an exact fit: residual SD and every standard deviation are 0
    assert data.residual_sd == 0 and np.all(data.standard_errors == 0)
    assert np.all(fit.se_digits == 0)
    (finding,) = _findings(data, "collinearity.precision")
    assert "cannot vouch for a single digit of its standard errors" in finding.message


def test_well_conditioned_designs_do_not_trigger_the_precision_rule() -> None:
    for name in ("Norris", "NoInt1", "NoInt2"):
        data = load(name)
        # reference: NIST StRD grades these "lower" or "average" difficulty; raw condition numbers below 1e3 (numpy SVD)
        assert _findings(data, "collinearity.precision") == []


def test_loader_reads_the_certified_table_shape() -> None:
    data = load("Longley")
    # reference: NIST StRD Longley header: 16 observations, 6 predictors, 7 parameters
    assert data.table.shape == (16, 7)
    assert isinstance(data.table, pd.DataFrame) and data.estimates.size == 7

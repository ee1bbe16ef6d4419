"""Target rules: a response that is missing, not numeric, or constant makes the fit impossible."""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import Finding, Grade, counted
from prefit.roles import Kind
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold, fmt
from prefit.stats.mergeable import Moments


def _missing_values(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    target = ctx.roles.target
    if ctx.roles.kinds[target] not in (Kind.NUMERIC, Kind.BOOLEAN):
        return
    tally = ctx.tally(target)
    lost = tally.missing + tally.nonfinite
    if lost == 0:
        return
    usable = tally.rows - lost
    limit = settings.threshold("blocks")
    if usable < limit.value:
        yield settings.finding(
            Grade.BLOCKS,
            f"{target} has {counted(usable, 'usable value')} in {tally.rows:,} rows ({tally.missing:,} missing, {tally.nonfinite:,} not finite): nothing to fit",
            columns=[target],
            value=usable,
            threshold=limit,
            remedy="check the export of the target column (wrong column, wrong delimiter, values coded as text)",
        )
        return
    rows, _, total = ctx.listed_rows(np.flatnonzero(~np.isfinite(ctx.values(target))))
    yield settings.finding(
        Grade.NOTE,
        f"{target} is missing or not finite in {lost:,} of {tally.rows:,} rows ({lost / tally.rows:.1%}); those rows cannot enter the fit",
        columns=[target],
        rows=rows,
        row_count=total,
        value=lost,
        threshold=0,
        source=COMMON_PRACTICE,
    )


def _not_numeric(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    target = ctx.roles.target
    kind = ctx.roles.kinds[target]
    if kind is Kind.NUMERIC:
        return
    if kind is Kind.BOOLEAN:
        yield settings.finding(
            Grade.NOTE,
            f"{target} is true/false: a least-squares fit of it is a linear probability model whose fitted values can leave [0, 1]",
            columns=[target],
            remedy="consider logistic regression; if you keep least squares, use heteroscedasticity-consistent standard errors",
            source=COMMON_PRACTICE,
        )
        return
    summary = ctx.summary(target)
    example = f" (e.g. {summary.mode!r})" if summary.mode is not None else ""
    yield settings.finding(
        Grade.BLOCKS,
        f"{target} is {kind} with {summary.distinct:,} distinct values{example}, not a number: least squares needs a numeric response",
        columns=[target],
        value=summary.distinct,
        source="definition of least squares",
        remedy="re-export the column as numbers (no thousands separators, units or text codes) or declare text codes with --missing-codes",
    )


def _constant(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    target = ctx.roles.target
    if ctx.roles.kinds[target] not in (Kind.NUMERIC, Kind.BOOLEAN):
        return
    y = ctx.design.y
    if y.size < 2:
        return
    spread = float(y.max() - y.min())
    if spread == 0.0:
        yield settings.finding(
            Grade.BLOCKS,
            f"{target} takes the single value {y[0]:g} in all {y.size:,} complete cases: there is nothing for the predictors to explain",
            columns=[target],
            value=spread,
            threshold=0,
            source="definition of R-squared (total sum of squares is zero)",
        )


def _central_skewness(values: np.ndarray, share: float, all_finite: bool = False) -> float:
    """Moment skewness of the values between the ``share`` and ``1 - share`` quantiles; ``all_finite`` skips the filter."""
    finite = values if all_finite else values[np.isfinite(values)]
    low, high = np.quantile(finite, [share, 1.0 - share])
    return float(Moments.of(finite[(finite >= low) & (finite <= high)]).skewness)


def _skewed(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    target = ctx.roles.target
    if ctx.roles.kinds[target] is not Kind.NUMERIC:
        return
    tally = ctx.tally(target)
    moments = tally.moments
    if moments.count < 3 or moments.minimum <= 0:
        return
    skewness, spread = moments.skewness, moments.maximum / moments.minimum
    if not (settings.threshold("skewness").crossed(skewness) and settings.threshold("max-min-ratio").crossed(spread)):
        return
    central = _central_skewness(ctx.values(target), settings.limit("trim-share"), tally.missing + tally.nonfinite == 0)
    if not settings.threshold("central-skewness").crossed(central):
        return
    yield settings.finding(
        Grade.NOTE,
        f"{target} is strictly positive and right-skewed (skewness {fmt(skewness, 2)}, largest value {fmt(spread)} times the smallest): "
        "on its own scale effects are likely multiplicative and the residual spread likely grows with the level",
        columns=[target],
        value=skewness,
        threshold=settings.threshold("skewness"),
        remedy=f"consider fitting log({target}): slopes then read as relative changes (100*b % per unit), and the spread is often steadier",
        details={"skewness": skewness, "central_skewness": central, "max_min_ratio": spread, "minimum": moments.minimum, "maximum": moments.maximum},
    )


RULES = [
    Rule(
        id="target.missing-values",
        summary="Rows without a usable target value; with fewer than two the fit is impossible.",
        why="Rows with no response are dropped by every least-squares routine. With fewer than two usable values "
        "no line can be estimated; otherwise each missing target shrinks the sample, and if the values are missing "
        "for a reason (a meter offline on hot days) the remaining rows no longer represent the process.",
        remedy="recover the missing target values from the source system; never impute the response just to keep rows",
        check=_missing_values,
        thresholds=(Threshold("blocks", 2, "definition: a mean and a slope need at least two values", Grade.BLOCKS, "<"),),
    ),
    Rule(
        id="target.not-numeric",
        summary="The target is not numeric (text, dates) or is true/false.",
        why="Least squares minimises squared differences between numbers. A text response (often numbers exported "
        "with thousands separators or units) cannot be fitted at all; a 0/1 response fitted by least squares gives "
        "predictions outside [0, 1] and non-constant error variance.",
        remedy="re-export the target as plain numbers, or choose a model made for the response's type",
        check=_not_numeric,
        grades=(Grade.BLOCKS, Grade.NOTE),
    ),
    Rule(
        id="target.constant",
        summary="The target takes one value in every complete case.",
        why="With a constant response the total sum of squares is zero: R-squared is undefined, every slope is "
        "zero and standard errors are meaningless. It usually means the wrong column or a filtered extract.",
        remedy="check that the target column and the row filter are the ones intended",
        check=_constant,
        thresholds=(Threshold("blocks", 0, "definition of R-squared (total sum of squares is zero)", Grade.BLOCKS, "<="),),
    ),
    Rule(
        id="target.skewed",
        summary="A strictly positive, strongly right-skewed target spanning an order of magnitude: a log scale may suit it.",
        why="Energy, costs and counts often grow by proportions: a big site uses more per extra pallet than a small "
        "one. Fitted on the raw scale, such a response gives one slope where the effect is a percentage, residual "
        "spread that grows with the level, and a few large values that dominate the fit.",
        remedy="fit the logarithm of the target and read slopes as relative changes; check the residual spread again",
        check=_skewed,
        thresholds=(
            Threshold("skewness", 1.0, "common practice: skewness above 1 is strong skew (Bulmer 1979, Principles of Statistics, p. 63, as quoted in secondary sources)", compare=">"),
            Threshold("max-min-ratio", 10, "common practice: a positive quantity spanning an order of magnitude is a candidate for a log scale", compare=">"),
            Threshold(
                "central-skewness",
                0.5,
                "common practice: the middle values must be skewed too (moderate skew from 0.5), so that a few wrong readings alone do not decide",
                compare=">",
            ),
            Threshold("trim-share", 0.01, "common practice: the central 98% of values"),
        ),
        grades=(Grade.NOTE,),
    ),
]

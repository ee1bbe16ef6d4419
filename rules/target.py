"""Target rules: a response that is missing, not numeric, or constant makes the fit impossible; a skewed or censored one bends it."""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import Finding, Grade, counted
from prefit.roles import Kind
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold, fmt, meaningful_ratio
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


NEAR_ZERO_SHARE = 0.01


def _span(smallest: float, largest: float, sd: float) -> str:
    """``largest value 20 times the smallest``, or the two values when the smallest is about 0 (within 1% of an SD)."""
    ratio = meaningful_ratio(largest, smallest, NEAR_ZERO_SHARE * sd)
    if ratio is None:
        return f"values from about 0 ({fmt(smallest)}) to {fmt(largest)}"
    return f"largest value {fmt(ratio)} times the smallest"


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
        f"{target} is strictly positive and right-skewed (skewness {fmt(skewness, 2)}, {_span(moments.minimum, moments.maximum, moments.std)}): "
        "on its own scale effects are likely multiplicative and the residual spread likely grows with the level",
        columns=[target],
        value=skewness,
        threshold=settings.threshold("skewness"),
        remedy=f"consider fitting log({target}): slopes then read as relative changes (100*b % per unit), and the spread is often steadier",
        details={"skewness": skewness, "central_skewness": central, "max_min_ratio": spread, "minimum": moments.minimum, "maximum": moments.maximum},
    )


CENSORING_SOURCE = (
    "common practice: a slope about 2% (weakens) or 10% (misleads) too flat; least squares on a censored normal "
    "response multiplies every slope by about the share of rows not at the limit (Greene 1981, Econometrica 49(2), "
    "505-513); model: Tobin (1958), Econometrica 26(1), 24-36; Amemiya (1984), Journal of Econometrics 24, 3-61"
)


def _censored(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    target = ctx.roles.target
    if ctx.roles.kinds[target] is not Kind.NUMERIC:
        return
    y = ctx.design.y
    least = settings.limit("min-rows")
    ends = [(name, value, int(np.count_nonzero(y == value))) for name, value in (("maximum", float(y.max(initial=-np.inf))), ("minimum", float(y.min(initial=np.inf))))]
    ends = [end for end in ends if end[2] >= least]
    if y.size < 3 or not ends:
        return
    values, counts = np.unique(y, return_counts=True)
    if values.size < 3:
        return
    inside = int(counts[1:-1].max())
    integers = bool(np.all(values == np.round(values)))
    count_like = integers and values.size <= settings.limit("count-levels")
    for end, value, at_limit in ends:
        ratio = at_limit / inside
        if not settings.threshold("pile-ratio").crossed(ratio):
            continue
        share = at_limit / y.size
        graded = settings.grade_of(share)
        grade, limit = graded if graded is not None else (Grade.NOTE, settings.threshold("weakens"))
        rows, _, total = ctx.listed_rows(np.flatnonzero(y == value))
        details = {
            "end": end,
            "limit_value": value,
            "rows_at_limit": at_limit,
            "share": share,
            "most_rows_at_an_inner_value": inside,
            "pile_ratio": ratio,
            "count_like": count_like,
        }
        pile = (
            f"{target} has {at_limit:,} of {y.size:,} complete rows ({share:.1%}) at its {end} {value:g}, "
            f"against at most {inside:,} at any value inside its range"
        )
        if count_like and end == "minimum" and value == 0:
            grade, source = Grade.NOTE, COMMON_PRACTICE
            message = (
                f"{pile}: a count (or score) with a mass at zero. Least squares treats the zeros like any other value; "
                "if zero means 'none happened', a count model fits it; if it means 'at or below a limit', it is censoring"
            )
            remedy = (
                f"consider a Poisson or negative binomial model, or a two-part (hurdle) model, for {target}; "
                "a censored-regression (Tobit) model if zero stands for values below a limit"
            )
        else:
            source = limit.source
            coding = "top-coded (censored from above)" if end == "maximum" else "bottom-coded (censored from below)"
            message = (
                f"{pile}: {target} looks {coding} at {value:g}. Least squares takes the limit for the true value and "
                "flattens the slopes towards zero, by roughly the share at the limit when the predictors are near normal"
            )
            remedy = (
                f"fit a censored-regression (Tobit) model with {target} censored at {value:g}, or recover the true values "
                "from the source; dropping the limit rows instead truncates the sample and also flattens the slopes, "
                "unless a truncated-regression model is fitted"
            )
        yield settings.finding(
            grade,
            message,
            columns=[target],
            rows=rows,
            row_count=total,
            value=share,
            threshold=limit,
            source=source,
            remedy=remedy,
            details=details,
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
    Rule(
        id="target.censored",
        summary="A response piled up at its largest or smallest value (top- or bottom-coding, censoring), beyond what "
        "ties of a continuous response would give.",
        why="A meter that saturates, a register that stops at its largest reading, an export that writes '20,000 or "
        "more' as 20,000: the rows at the limit carry the limit, not the truth. Least squares reads them as exact, so "
        "the line is pulled flat where the true values lie beyond the limit: slopes shrink towards zero (by about the "
        "censored share for normal predictors), and the residuals are neither normal nor of constant spread. Tobin's "
        "censored-regression model uses the limit rows as 'at least' (or 'at most') values instead.",
        remedy="fit a censored-regression (Tobit) model, or recover the true values; drop the limit rows only with a "
        "truncated-regression model",
        check=_censored,
        thresholds=(
            Threshold("misleads", 0.10, CENSORING_SOURCE, Grade.MISLEADS, ">="),
            Threshold("weakens", 0.02, CENSORING_SOURCE, Grade.WEAKENS, ">="),
            Threshold(
                "pile-ratio",
                3,
                "common practice: the limit holds at least 3 times as many rows as the most frequent value inside the "
                "range; the tail of a continuous response holds fewer ties than its middle",
                compare=">=",
            ),
            Threshold("min-rows", 3, "common practice: at least 3 rows share the limit value", compare=">="),
            Threshold(
                "count-levels",
                50,
                "common practice: an integer response with at most 50 distinct values is read as a count or a score, "
                "whose zeros are a mass of the distribution rather than a limit",
                compare="<=",
            ),
        ),
        grades=(Grade.NOTE,),
    ),
]

"""Range rules: predictors that barely move, spreads too narrow for a slope, and predictions outside the data."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.design import Term
from prefit.findings import Finding, Grade
from prefit.roles import Kind
from prefit.rule import COMMON_PRACTICE, NotApplicable, Rule, RuleSettings, Threshold, fmt, top_rows
from prefit.scoring import ScoredRows
from prefit.stats.spot import evenly_spaced

SE_SOURCE = "Var(b) = sigma^2 / (s_x^2 (n - 1)) for a slope (Montgomery, Peck & Vining 2012, Introduction to Linear Regression Analysis, 5th ed., sec. 2.3)"
LEVERAGE_SOURCE = (
    "hidden extrapolation: h_new = x_new'(X'X)^-1 x_new above the largest h_ii of the data "
    "(Montgomery, Peck & Vining 2012, Introduction to Linear Regression Analysis, 5th ed., sec. 3.8)"
)
SIGNIFICANT_DIGITS = 12
ROUNDING_ALLOWANCE = 1e-9


@dataclass(frozen=True)
class ModeCount:
    """How a design term's values spread over the complete cases: distinct values and the most frequent one."""

    distinct: int
    mode: str
    mode_rows: int
    rows: int

    @property
    def off_mode(self) -> int:
        """Rows whose value differs from the most frequent one: the rows that carry the information."""
        return self.rows - self.mode_rows

    @property
    def share(self) -> float:
        """Share of the complete cases holding the most frequent value."""
        return self.mode_rows / self.rows if self.rows else float("nan")


def _mode_count(ctx: RunContext, term: Term) -> ModeCount | None:
    design = ctx.design
    if design.n == 0 or (not term.columns and term.reference is None):
        return None
    if term.reference is not None:
        if not term.columns:
            return ModeCount(1, term.reference, design.n, design.n)
        off_reference = ctx.design_column(term.columns[0]) != 0
        for name in term.columns[1:]:
            off_reference |= ctx.design_column(name) != 0
        off = int(np.count_nonzero(off_reference))
        return ModeCount(len(term.columns) + 1, term.reference, design.n - off, design.n)
    column = ctx.design_column(term.columns[0])
    values, counts = np.unique(column, return_counts=True)
    best = int(np.argmax(counts))
    return ModeCount(int(values.size), f"{values[best]:g}", int(counts[best]), design.n)


def _is_indicator(ctx: RunContext, term: Term) -> bool:
    column = ctx.design_column(term.columns[0])
    return bool(np.all((column == 0.0) | (column == 1.0)))


def _plainly_varied(column: np.ndarray, share_limit: Threshold, min_distinct: float) -> bool:
    """Whether a column shows ``min_distinct`` values in evenly spaced rows and provably no value filling ``share_limit`` of it.

    Any value misses every row on one side of a pivot, so the rows on the
    smaller side bound from below the rows that differ from the most frequent
    value, without counting values.
    """
    spot = evenly_spaced(column)
    if np.unique(spot).size < min_distinct:
        return False
    pivot = np.sort(spot)[spot.size // 2]
    below = np.count_nonzero(column < pivot)
    above = np.count_nonzero(column > pivot)
    return not share_limit.crossed((column.size - min(below, above)) / column.size)


def _near_constant(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    share_limit = settings.threshold("weakens")
    few_rows = settings.threshold("misleads")
    min_distinct = settings.limit("min-distinct")
    for term in ctx.design.terms:
        if term.kind is None:
            continue
        if term.reference is None and term.columns and _plainly_varied(ctx.design_column(term.columns[0]), share_limit, min_distinct):
            continue
        counted = _mode_count(ctx, term)
        if counted is None or counted.distinct < 2:
            continue
        numeric = term.kind in (Kind.NUMERIC, Kind.DATETIME) and term.reference is None
        dominated = share_limit.crossed(counted.share)
        too_few_values = numeric and counted.distinct < min_distinct and not _is_indicator(ctx, term)
        if not (dominated or too_few_values):
            continue
        carried = f"only {counted.off_mode:,} of {counted.rows:,} complete cases differ from {counted.mode}"
        if few_rows.crossed(counted.off_mode):
            grade, limit, value = Grade.MISLEADS, few_rows, float(counted.off_mode)
            reason = f"{term.source}: {carried} ({counted.share:.1%} hold {counted.mode}); its coefficient rests on those rows alone"
        elif dominated:
            grade, limit, value = Grade.WEAKENS, share_limit, counted.share
            reason = f"{term.source}: {counted.share:.1%} of complete cases hold {counted.mode}; {carried}, and its coefficient rests on them"
        else:
            grade, limit, value = Grade.WEAKENS, settings.threshold("min-distinct"), float(counted.distinct)
            reason = (
                f"{term.source} takes only {counted.distinct} distinct values; its slope is the difference between two group means "
                f"and cannot show whether the response is straight in between ({counted.off_mode:,} of {counted.rows:,} rows differ from {counted.mode})"
            )
        yield settings.finding(
            grade,
            reason,
            columns=[term.source],
            value=value,
            threshold=limit,
            remedy=f"collect rows where {term.source} takes other values, or drop it and say that its effect is not estimated"
            + (f"; if its two values are codes, declare them with --categorical {term.source}" if too_few_values else ""),
            details={
                "rows_differing_from_mode": counted.off_mode,
                "mode": counted.mode,
                "mode_share": counted.share,
                "distinct_values": counted.distinct,
                "complete_cases": counted.rows,
            },
        )


def coverage_of(observed: tuple[float, float], intended: tuple[float, float]) -> float:
    """Share of the intended range [low, high] that the observed range covers."""
    low, high = intended
    covered = min(observed[1], high) - max(observed[0], low)
    return max(covered, 0.0) / (high - low)


def se_shrink_factor(spread: float, intended: tuple[float, float]) -> float:
    """Factor by which a slope's standard error would shrink if the same rows spread evenly over the intended range.

    SE(b) is proportional to 1 / (s_x sqrt(n - 1)); a uniform spread over
    [low, high] has s_x = (high - low) / sqrt(12).
    """
    return (intended[1] - intended[0]) / math.sqrt(12.0) / spread


def resolution_of(values: np.ndarray) -> float:
    """The recording step of a column: the smallest gap between its distinct values (rounded to 12 digits)."""
    scale = float(np.max(np.abs(values))) if values.size else 0.0
    if scale == 0.0:
        return float("nan")
    decimals = SIGNIFICANT_DIGITS - 1 - int(math.floor(math.log10(scale)))
    distinct = np.unique(np.round(values, decimals))
    if distinct.size < 2:
        return float("nan")
    return float(np.round(np.min(np.diff(distinct)), decimals))


def _narrow(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design = ctx.design
    if design.n < 2:
        return
    declared = ctx.options.ranges
    for term in design.terms:
        if term.kind is not Kind.NUMERIC or term.reference is not None:
            continue
        column = ctx.design_column(term.source)
        spread = float(np.std(column, ddof=1))
        if not spread > 0.0:
            continue
        if term.source in declared:
            yield from _against_intended(settings, term.source, column, spread, declared[term.source])
        else:
            yield from _against_resolution(settings, term.source, column, spread)


def _against_intended(settings: RuleSettings, name: str, column: np.ndarray, spread: float, intended: tuple[float, float]) -> Iterator[Finding]:
    observed = (float(column.min()), float(column.max()))
    coverage = coverage_of(observed, intended)
    graded = settings.grade_of(coverage)
    if graded is None:
        return
    grade, limit = graded
    shrink = se_shrink_factor(spread, intended)
    shrink_text = (
        f"; spread evenly over it, the same rows would shrink the slope's standard error {fmt(shrink)}-fold"
        if shrink > 1.0
        else ""
    )
    yield settings.finding(
        grade,
        f"{name} covers {coverage:.1%} of its intended range {fmt(intended[0])} to {fmt(intended[1])} "
        f"(observed {fmt(observed[0])} to {fmt(observed[1])}){shrink_text}",
        columns=[name],
        value=coverage,
        threshold=limit,
        source=f"{limit.source}; {SE_SOURCE}",
        remedy=f"collect rows across the whole intended range of {name}, or narrow the claim: "
        f"use the model only for {name} between {fmt(observed[0])} and {fmt(observed[1])}",
        details={
            "intended": list(intended),
            "observed": list(observed),
            "coverage": coverage,
            "se_shrink_factor": shrink,
            "sd_observed": spread,
            "sd_uniform_over_intended": (intended[1] - intended[0]) / math.sqrt(12.0),
        },
    )


def _against_resolution(settings: RuleSettings, name: str, column: np.ndarray, spread: float) -> Iterator[Finding]:
    low, high = float(column.min()), float(column.max())
    min_steps = settings.threshold("min-steps")
    min_cv = settings.threshold("min-cv")
    tight = low > 0.0 and min_cv.crossed(spread / float(np.mean(column)))
    if not tight and not _may_span_few_steps(column, low, high, min_steps):
        return
    distinct = int(np.unique(column).size)
    step = resolution_of(column)
    steps = (high - low) / step if step > 0 else float("inf")
    details = {"observed": [low, high], "resolution": step, "steps": steps, "sd": spread, "distinct_values": distinct}
    if distinct >= 3 and min_steps.crossed(steps) and _is_reading(column, step, settings.limit("max-step-share")):
        yield settings.finding(
            Grade.WEAKENS,
            f"{name} spans {fmt(high - low)} (from {fmt(low)} to {fmt(high)}) in only {fmt(steps)} steps of its recording "
            f"resolution {fmt(step)}: the slope is estimated from differences barely larger than the rounding",
            columns=[name],
            value=steps,
            threshold=min_steps,
            remedy=f"record {name} with a finer resolution, or collect rows over a wider range of it",
            details=details,
        )
        return
    if low > 0.0 and not _looks_like_years(column):
        cv = spread / float(np.mean(column))
        if min_cv.crossed(cv):
            yield settings.finding(
                Grade.WEAKENS,
                f"{name} varies by {cv:.2%} of its mean (SD {fmt(spread)} around {fmt(float(np.mean(column)))}): "
                "a spread this small against the quantity's size is within the accuracy of most instruments, so "
                "measurement error is a large part of what varies (biasing the slope toward zero), and the intercept "
                "is a far extrapolation to zero",
                columns=[name],
                value=cv,
                threshold=min_cv,
                remedy=f"collect rows over a wider range of {name}; centre it before fitting so the intercept stays interpretable",
                details={**details, "coefficient_of_variation": cv},
            )


def _may_span_few_steps(column: np.ndarray, low: float, high: float, min_steps: Threshold) -> bool:
    """False when evenly spaced rows already prove the span holds at least ``min_steps`` steps of :func:`resolution_of`.

    The smallest gap between distinct values of all rows is at most the
    smallest gap between those of some rows; the bound allows for the
    rounding of the subtraction.
    """
    scale = max(abs(low), abs(high))
    if not 0.0 < scale < np.inf:
        return True
    decimals = SIGNIFICANT_DIGITS - 1 - math.floor(math.log10(scale))
    spot = np.unique(np.round(evenly_spaced(column), decimals))
    if spot.size < 2:
        return True
    widest_step = float(np.round(np.min(np.diff(spot)) * (1.0 + ROUNDING_ALLOWANCE), decimals))
    return not widest_step > 0.0 or min_steps.crossed((high - low) / widest_step)


def _is_reading(column: np.ndarray, step: float, max_share: float) -> bool:
    """Whether the recording step is small against the values' size: readings of a quantity, not a few design levels."""
    return bool(step <= max_share * float(np.max(np.abs(column))))


def _looks_like_years(column: np.ndarray) -> bool:
    """Whole numbers between 1000 and 2999: calendar years, which have no true zero (not a ratio scale)."""
    return bool(np.all(column == np.round(column)) and column.min() >= 1000 and column.max() <= 2999)


def _extrapolation(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if ctx.options.score is None:
        raise NotApplicable("no scoring table: give the rows to be predicted with --score")
    if ctx.design.n == 0:
        return
    scored = ctx.scoring
    if scored is None:
        return
    complete = int(scored.complete.sum())
    skipped = scored.rows - complete
    if complete == 0:
        return
    outside = scored.outside_any
    hidden = scored.hidden
    flagged = outside | hidden
    count = int(flagged.sum())
    if count == 0:
        return
    share = count / complete
    graded = settings.grade_of(share)
    grade, limit = graded if graded is not None else (Grade.NOTE, None)
    positions = scored.positions
    by_column = {c: int(m[scored.complete].sum()) for c, m in scored.outside.items() if m[scored.complete].any()}
    named = [c for c in ctx.roles.predictors if c in by_column]
    ratio = scored.leverage / scored.largest_leverage if scored.largest_leverage > 0 else scored.leverage
    chosen, values = top_rows(positions[flagged], ratio[flagged])
    parts = []
    if by_column:
        listing = ", ".join(f"{c} {by_column[c]:,}{_beyond(ctx, scored, c)}" for c in named)
        parts.append(f"{int(outside.sum()):,} outside the observed range of a predictor ({listing})")
    if hidden.any():
        parts.append(
            f"{int(hidden.sum()):,} inside every range but off the data's joint cloud (leverage above the data's largest, {fmt(scored.largest_leverage)})"
        )
    skipped_text = f"; {skipped:,} {'row lacks' if skipped == 1 else 'rows lack'} a predictor and {'was' if skipped == 1 else 'were'} not scored" if skipped else ""
    details = {
        "scoring_table": scored.info.path,
        "rows_scored": complete,
        "rows_not_scored": skipped,
        "outside_range": int(outside.sum()),
        "outside_by_column": {c: by_column[c] for c in named},
        "observed_ranges": {c: list(scored.observed[c]) for c in named if c in scored.observed},
        "unseen_levels": {c: list(v) for c, v in sorted(scored.unseen_levels.items())},
        "hidden_extrapolation": int(hidden.sum()),
        "largest_data_leverage": scored.largest_leverage,
        "largest_new_leverage": float(scored.leverage.max()),
    }
    yield settings.finding(
        grade,
        f"{count:,} of {complete:,} rows of the scoring table {scored.info.path} ({share:.1%}) ask the model to extrapolate: "
        + "; ".join(parts)
        + skipped_text,
        columns=named,
        rows=[scored.labels[int(p)] for p in chosen],
        row_values=values,
        row_count=count,
        value=share,
        threshold=limit,
        source=f"{limit.source if limit is not None else COMMON_PRACTICE}; {LEVERAGE_SOURCE}",
        remedy="collect data that covers the conditions to be predicted"
        + (f" ({', '.join(named)} beyond the observed range)" if named else "")
        + ", or refuse those predictions; if they must be made, report wide prediction intervals and check the model's shape at the edge",
        details=details,
    )


def _beyond(ctx: RunContext, scored: ScoredRows, column: str) -> str:
    """E.g. `` (observed 1.7 to 34.0, new up to 39.9)`` for a numeric predictor; unseen levels for a category."""
    if column in scored.unseen_levels:
        return f" (levels never seen: {', '.join(scored.unseen_levels[column])})"
    if column not in scored.observed:
        return ""
    low, high = scored.observed[column]
    new = scored.X[:, ctx.design.column_index[column]]
    ends = []
    if new.min() < low:
        ends.append(f"down to {fmt(float(new.min()))}")
    if new.max() > high:
        ends.append(f"up to {fmt(float(new.max()))}")
    return f" (observed {fmt(low)} to {fmt(high)}, new {' and '.join(ends)})"


RULES = [
    Rule(
        id="range.near-constant",
        summary="A predictor whose most frequent value fills nearly every complete case, or a numeric predictor with two values.",
        why="A coefficient is learned from the rows where its predictor differs from the rest. When 95% or more of the rows "
        "hold one value, the slope rests on the handful of other rows: one unusual row among them moves it, its standard "
        "error is large, and it is easily confounded with whatever else happened on those days. A numeric predictor with "
        "only two values (other than a 0/1 indicator) gives a slope that is just the difference of two group means, with no "
        "way to see whether the response is straight between them.",
        remedy="collect rows where the predictor takes other values, or drop it",
        check=_near_constant,
        thresholds=(
            Threshold("misleads", 10, COMMON_PRACTICE, Grade.MISLEADS, "<"),
            Threshold("weakens", 0.95, COMMON_PRACTICE, Grade.WEAKENS, ">="),
            Threshold("min-distinct", 3, COMMON_PRACTICE),
        ),
    ),
    Rule(
        id="range.narrow",
        summary="A numeric predictor whose observed spread is too small for a useful slope: against a declared intended range, "
        "against its recording resolution (readings spanning fewer than 5 recording steps, where the step is at most 5% of the "
        "values' size, unlike a few design levels), or relative to its mean (all-positive quantities other than calendar years).",
        why="The standard error of a slope is sigma / (s_x sqrt(n - 1)): halving the spread of a predictor doubles the "
        "uncertainty of its coefficient, and a slope learned over a sliver of the range the model will be used for says "
        "little about the rest. When the spread is only a few recording steps, rounding is a large part of what varies, "
        "which biases the slope toward zero.",
        remedy="collect rows over the whole range the model is meant for, or declare the narrower range as the model's scope",
        check=_narrow,
        thresholds=(
            Threshold("misleads", 0.20, COMMON_PRACTICE, Grade.MISLEADS, "<"),
            Threshold("weakens", 0.50, COMMON_PRACTICE, Grade.WEAKENS, "<"),
            Threshold("min-steps", 5, COMMON_PRACTICE, compare="<"),
            Threshold("max-step-share", 0.05, COMMON_PRACTICE, compare=">"),
            Threshold("min-cv", 0.01, COMMON_PRACTICE, compare="<"),
        ),
    ),
    Rule(
        id="range.extrapolation",
        summary="Rows of the scoring table (--score) outside the observed range of a predictor, or off the data's joint region.",
        why="A linear fit is only checked where the data are. A prediction beyond the observed range of a predictor assumes "
        "the straight line continues, which nothing in the data supports; a row whose values are each in range can still "
        "lie off the cloud the predictors form together (hidden extrapolation), where the prediction's variance, proportional "
        "to its leverage, is larger than anywhere in the data.",
        remedy="collect data covering the conditions to be predicted, or do not predict there",
        check=_extrapolation,
        thresholds=(
            Threshold("misleads", 0.25, COMMON_PRACTICE, Grade.MISLEADS, ">"),
            Threshold("weakens", 0.05, COMMON_PRACTICE, Grade.WEAKENS, ">"),
        ),
        grades=(Grade.NOTE,),
        needs=frozenset({"rows", "fit"}),
    ),
]

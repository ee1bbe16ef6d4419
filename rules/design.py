"""Design rules: the choices made while turning columns into the design, said out loud."""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.roles import Kind
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold, fmt
from prefit.stats.spot import finite_spot


def _excluded(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    labels_offered = False
    for column, reason in sorted(ctx.roles.left_out.items()):
        remedy = f"if {column} should be a predictor, convert it to numbers or name it in --predictors (text becomes a category)"
        unique_text = ctx.roles.kinds[column] is Kind.TEXT and reason.startswith("text with a different value in each")
        if ctx.roles.id is None and unique_text and not labels_offered:
            remedy = f"pass --id {column} to name rows by it in every finding; " + remedy
            labels_offered = True
        yield settings.finding(
            Grade.NOTE,
            f"{column} left out of the design: {reason}",
            columns=[column],
            source="prefit column roles",
            remedy=remedy,
        )


def _possible_code(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    most = settings.limit("max-distinct")
    declared = set(ctx.roles.declared_categorical)
    for column in ctx.roles.predictors:
        if ctx.roles.kinds[column] is not Kind.NUMERIC or column in declared:
            continue
        values = ctx.values(column)
        if _spot_check_fails(values, most):
            if (code_finding := _wide_codes(ctx, settings, column, values)) is not None:
                yield code_finding
            continue
        summary = ctx.summary(column)
        if not 3 <= summary.distinct <= most:
            continue
        finite = values[np.isfinite(values)]
        if not np.all(finite == np.round(finite)):
            continue
        levels = ", ".join(f"{v:g}" for v in np.unique(finite))
        yield settings.finding(
            Grade.NOTE,
            f"{column} holds only the whole numbers {levels}: if these are codes of categories, a single slope across them is meaningless",
            columns=[column],
            value=summary.distinct,
            threshold=settings.threshold("max-distinct"),
            remedy=f"if {column} is a code, declare it with --categorical {column}; if it is a count or a level, keep it numeric",
        )


def _wide_codes(ctx: RunContext, settings: RuleSettings, column: str, values: np.ndarray) -> Finding | None:
    """A finding for whole numbers that look like wide codes (station or occupation codes), else None.

    Codes share one digit width (three or more), repeat on many rows and use a small share of the whole numbers
    between their smallest and largest value; counts and amounts fill their range far more densely.
    """
    finite = values[np.isfinite(values)]
    if finite.size < ctx.table.num_rows or finite.size == 0 or finite.min() < 100 or np.any(finite != np.round(finite)):
        return None
    low, high = float(finite.min()), float(finite.max())
    if len(f"{low:.0f}") != len(f"{high:.0f}"):
        return None
    distinct = np.unique(finite)
    share_of_range = distinct.size / (high - low + 1)
    if distinct.size < 3 or distinct.size * settings.limit("rows-per-code") > finite.size or share_of_range > settings.limit("range-share"):
        return None
    shown = ", ".join(f"{v:.0f}" for v in distinct[:6]) + (f", ... ({distinct.size:,} codes)" if distinct.size > 6 else "")
    return settings.finding(
        Grade.NOTE,
        f"{column} holds {distinct.size:,} whole numbers of one width ({shown}), each on {fmt(finite.size / distinct.size)} rows "
        f"on average and using {share_of_range:.1%} of the numbers between {low:.0f} and {high:.0f}: they look like codes "
        "of categories (stations, occupations, sites), for which a single slope is meaningless",
        columns=[column],
        value=share_of_range,
        threshold=settings.threshold("range-share"),
        remedy=f"if {column} is a code, declare it with --categorical {column} (or leave it out, or use --id for a site code); "
        "if it is a measured amount, keep it numeric",
    )


def _spot_check_fails(values: np.ndarray, most: float) -> bool:
    """Whether evenly spaced rows already show a fraction or more than ``most`` distinct finite values.

    Either rules a column out on its own, so most measured columns are
    dismissed from a few thousand rows without counting distinct values.
    """
    spot = finite_spot(values)
    return bool(np.any(spot != np.round(spot))) or np.unique(spot).size > most


RULES = [
    Rule(
        id="design.excluded-column",
        summary="A column left out of the design because it is free text, an identifier or a date.",
        why="A column with a different text in nearly every row would cost one parameter per row as a category, "
        "and a raw date is not a meaningful number for a slope. prefit leaves such columns out and says so, so "
        "that nobody believes they were in the model.",
        remedy="convert the column to a meaningful number or category, or leave it out",
        check=_excluded,
        grades=(Grade.NOTE,),
    ),
    Rule(
        id="design.possible-code",
        summary="A numeric predictor with only a few distinct whole-number values, which may be category codes.",
        why="Codes such as 1 = screw, 2 = scroll, 3 = reciprocating look numeric, but one slope across them assumes "
        "that the step from 1 to 2 equals the step from 2 to 3, which is meaningless for categories.",
        remedy="declare codes with --categorical so that each level gets its own parameter",
        check=_possible_code,
        thresholds=(
            Threshold("max-distinct", 5, COMMON_PRACTICE),
            Threshold("rows-per-code", 5, COMMON_PRACTICE + ": wider codes count only when each repeats on five or more rows on average"),
            Threshold("range-share", 0.2, COMMON_PRACTICE + ": codes use at most a fifth of the whole numbers in their range; counts fill it"),
        ),
        grades=(Grade.NOTE,),
    ),
]

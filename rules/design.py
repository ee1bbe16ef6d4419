"""Design rules: the choices made while turning columns into the design, said out loud."""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.roles import Kind
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold
from prefit.stats.spot import finite_spot


def _excluded(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    for column, reason in sorted(ctx.roles.left_out.items()):
        yield settings.finding(
            Grade.NOTE,
            f"{column} left out of the design: {reason}",
            columns=[column],
            source="prefit column roles",
            remedy=f"if {column} should be a predictor, convert it to numbers or name it in --predictors (text becomes a category)",
        )


def _possible_code(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    most = settings.limit("max-distinct")
    declared = set(ctx.roles.declared_categorical)
    for column in ctx.roles.predictors:
        if ctx.roles.kinds[column] is not Kind.NUMERIC or column in declared:
            continue
        values = ctx.values(column)
        if _spot_check_fails(values, most):
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
        thresholds=(Threshold("max-distinct", 5, COMMON_PRACTICE),),
        grades=(Grade.NOTE,),
    ),
]

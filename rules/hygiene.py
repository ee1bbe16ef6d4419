"""Table hygiene rules: columns whose values cannot support a coefficient."""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.rule import Rule, RuleSettings


def _constant_predictor(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design = ctx.design
    if design.n == 0:
        return
    grade = Grade.BLOCKS if design.intercept else Grade.NOTE
    for term in design.terms:
        if term.kind is None:
            continue
        if term.reference is not None or term.df == 0:
            if term.df == 0:
                only = term.reference if term.reference is not None else "(none)"
                yield _finding(settings, grade, term.source, f"category {only!r}", design.n)
            continue
        column = design.X[:, design.column_names.index(term.columns[0])]
        if np.ptp(column) == 0:
            yield _finding(settings, grade, term.source, f"{column[0]:g}", design.n)


def _finding(settings: RuleSettings, grade: Grade, column: str, value: str, n: int) -> Finding:
    return settings.finding(
        grade,
        f"{column} takes the single value {value} in all {n:,} complete cases: its coefficient cannot be estimated",
        columns=[column],
        value=0.0,
        threshold=0.0,
        source="definition: a slope needs at least two distinct values of its predictor",
        remedy=f"drop {column} from the predictors, or collect rows where it varies",
    )


RULES = [
    Rule(
        id="hygiene.constant-predictor",
        summary="A predictor with one distinct value among the complete cases.",
        why="A slope measures how the response changes when the predictor changes. A predictor that never changes "
        "carries no information about its slope; with an intercept in the model its column is a multiple of the "
        "intercept column, so the coefficient is not estimable.",
        remedy="drop the column, or collect rows where it varies",
        check=_constant_predictor,
        grades=(Grade.BLOCKS, Grade.NOTE),
    ),
]

"""Missingness rules: what holes in the table cost the fit."""

from __future__ import annotations

from typing import Iterator

from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold, fmt


def _complete_cases(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric:
        return
    design = ctx.design
    total = design.table_rows
    dropped = total - design.n
    if dropped == 0:
        return
    share = dropped / total
    by_column = {c: k for c, k in design.missing_by_column.items() if k}
    worst = max(by_column, key=lambda c: (by_column[c], c)) if by_column else None
    if design.n == 0:
        grade, limit = Grade.BLOCKS, settings.threshold("blocks")
    else:
        graded = settings.grade_of(share)
        grade, limit = graded if graded else (Grade.NOTE, None)
    per_parameter = design.n / design.p if design.p else float("nan")
    message = (
        f"listwise deletion drops {dropped:,} of {total:,} rows ({share:.1%}); {design.n:,} complete cases remain "
        f"({fmt(per_parameter)} per parameter); most rows lost to {worst} ({by_column.get(worst or '', 0):,})"
    )
    yield settings.finding(
        grade,
        message,
        columns=sorted(by_column, key=lambda c: (-by_column[c], c)),
        value=share,
        threshold=limit,
        source=limit.source if limit else COMMON_PRACTICE,
        remedy=f"recover the missing values at the source, starting with {worst}; if they cannot be recovered, "
        "use multiple imputation rather than deleting rows, or drop a predictor that costs many rows and adds little",
        details={"rows_lost_by_column": by_column},
    )


RULES = [
    Rule(
        id="missingness.complete-cases",
        summary="Rows dropped by listwise deletion, and the column responsible for most of them.",
        why="Least-squares software silently drops every row with a hole in the target or any predictor. The fit "
        "then rests on fewer rows than the table suggests, and if the holes are not random (a sensor that fails in "
        "heat, a site that reports late) the remaining rows are a biased sample.",
        remedy="recover missing values at the source, or use multiple imputation instead of deletion",
        check=_complete_cases,
        thresholds=(
            Threshold("blocks", 1.0, "definition: no complete case leaves nothing to fit", Grade.BLOCKS, ">="),
            Threshold("misleads", 0.30, COMMON_PRACTICE, Grade.MISLEADS, ">"),
            Threshold("weakens", 0.10, COMMON_PRACTICE, Grade.WEAKENS, ">"),
        ),
        grades=(Grade.NOTE,),
    ),
]

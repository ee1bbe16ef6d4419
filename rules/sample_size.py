"""Sample-size rules: enough complete cases for the parameters the design estimates."""

from __future__ import annotations

from typing import Iterator

from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.rule import Rule, RuleSettings, Threshold, fmt

PER_PARAMETER_SOURCE = (
    "common practice: 10 to 20 observations per estimated parameter "
    "(Harrell 2015, Regression Modeling Strategies, 2nd ed., sec. 4.4, from memory)"
)


def _per_parameter(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric:
        return
    design = ctx.design
    n, p = design.n, design.p
    if p == 0:
        return
    ratio = n / p
    graded = settings.grade_of(ratio)
    if graded is None:
        return
    grade, limit = graded
    counted = ", ".join(f"{t.source} {t.df}" for t in design.terms if t.df)
    if grade is Grade.BLOCKS:
        message = f"{n:,} complete cases for {p} parameters: least squares needs more rows than parameters (n > p)"
    else:
        message = f"{n:,} complete cases for {p} parameters: {fmt(ratio)} per parameter, below {limit.value:g}"
    yield settings.finding(
        grade,
        message,
        columns=[t.source for t in design.terms if t.df and t.kind is not None],
        value=ratio,
        threshold=limit,
        details={"complete_cases": n, "parameters": p, "parameters_by_term": {t.source: t.df for t in design.terms if t.df}},
        remedy=f"collect more complete rows, or estimate fewer parameters (parameters counted: {counted}): "
        "drop weak predictors, merge rare category levels, fill holes that cost rows",
    )


RULES = [
    Rule(
        id="sample-size.per-parameter",
        summary="Complete-case observations per estimated parameter (intercept and every dummy counted).",
        why="Each parameter spends information. With few rows per parameter the fit chases noise: coefficients "
        "are unstable, R-squared is inflated, and predictions for new rows are worse than the fit suggests. "
        "With no more rows than parameters the fit is not defined at all.",
        remedy="collect more complete rows, or estimate fewer parameters",
        check=_per_parameter,
        thresholds=(
            Threshold("blocks", 1, "definition: least squares needs n > p", Grade.BLOCKS, "<="),
            Threshold("misleads", 10, PER_PARAMETER_SOURCE, Grade.MISLEADS, "<"),
            Threshold("weakens", 20, PER_PARAMETER_SOURCE, Grade.WEAKENS, "<"),
        ),
    ),
]

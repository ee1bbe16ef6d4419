"""Collinearity rules: predictors that are (nearly) linear combinations of each other."""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.design import INTERCEPT, Design
from prefit.findings import Finding, Grade
from prefit.rule import Rule, RuleSettings
from prefit.stats.factor import EPS, DesignFactor, Relation

NEGLIGIBLE = 1e-9


def _coefficient(c: float) -> str:
    magnitude = abs(c)
    return f"{magnitude:.2f}" if 0.01 <= magnitude < 1000 else f"{magnitude:.3g}"


def _balanced(relation: Relation, factor: DesignFactor) -> tuple[int, list[tuple[int, float]]]:
    """Put on the left the column carrying the most weight (a total, not one of its parts); drop negligible terms."""
    vector = {relation.left: 1.0, **{j: -c for j, c in zip(relation.right, relation.coefficients)}}
    weight = {j: abs(v) * factor.scales[j] for j, v in vector.items()}
    top = max(weight.values())
    kept = {j: v for j, v in vector.items() if weight[j] > NEGLIGIBLE * top}
    left = max(kept, key=lambda j: (weight[j], -j))
    right = [(j, -v / kept[left]) for j, v in sorted(kept.items()) if j != left]
    return left, right


def _equation(design: Design, left: int, right: list[tuple[int, float]]) -> str:
    names = design.column_names
    parts: list[str] = []
    for j, c in right:
        term = f"{_coefficient(c)}*{names[j]}"
        if not parts:
            parts.append(f"-{term}" if c < 0 else term)
        else:
            parts.append(f"{'-' if c < 0 else '+'} {term}")
    return f"{names[left]} = " + " ".join(parts)


def _only_constant(design: Design, left: int, right: list[tuple[int, float]]) -> bool:
    """A constant column against the intercept: hygiene.constant-predictor reports that one."""
    names = design.column_names
    involved = [left] + [j for j, _ in right]
    non_intercept = [j for j in involved if names[j] != INTERCEPT]
    return len(involved) == 2 and len(non_intercept) == 1 and np.ptp(design.X[:, non_intercept[0]]) == 0


def _exact(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design, factor = ctx.design, ctx.factor
    if design.n == 0 or design.p == 0:
        return
    relative_tolerance = max(design.n, design.p) * EPS
    top = abs(factor.r[0, 0]) or 1.0
    sources = design.column_sources
    for relation in factor.relations():
        left, right = _balanced(relation, factor)
        if _only_constant(design, left, right):
            continue
        involved = [left] + [j for j, _ in right]
        columns = list(dict.fromkeys(sources[j] for j in sorted(involved) if sources[j] != INTERCEPT))
        equation = _equation(design, left, right)
        yield settings.finding(
            Grade.BLOCKS,
            f"exact linear dependency among the predictors: {equation}",
            columns=columns,
            value=relation.pivot / top,
            threshold=relative_tolerance,
            source="numerical rank from pivoted QR of the unit-length-scaled design, tolerance max(n, p)*eps (Golub & Van Loan 2013, sec. 5.4)",
            remedy=f"drop one of {', '.join(columns) or 'the named columns'} (for a total and its parts keep either the total or the parts), "
            "or for a one-hot set of dummies drop one level",
            details={
                "equation": equation,
                "left": design.column_names[left],
                "right": {design.column_names[j]: c for j, c in right},
                "rank": factor.rank,
                "parameters": design.p,
            },
        )


RULES = [
    Rule(
        id="collinearity.exact",
        summary="Predictors that are exact linear combinations of others (a total and its parts, duplicated columns, the dummy trap).",
        why="When one design column is an exact combination of others, X'X is singular: infinitely many coefficient "
        "vectors give the same fit, so the individual coefficients are not defined. Software then either fails, "
        "silently drops a column of its own choosing, or prints huge, meaningless estimates and standard errors.",
        remedy="drop one of the columns in the relation, or replace a total by its parts (or the reverse)",
        check=_exact,
        grades=(Grade.BLOCKS,),
    ),
]

"""Which findings cause which: each candidate root is fixed hypothetically and the affected rules run again.

A rule declares its findings candidate roots with a ``repair`` hook
(:class:`prefit.rule.Repair`): a disguised missing code set missing, a unit
slip scaled back, a bend given its curve term, too few rows for the
parameters. For each root at ``weakens`` or above, the rules that produced the
other findings run again on the repaired table; a finding that no longer
appears there (same rule, overlapping columns, at least half its listed rows,
at its grade or stronger) is explained by the root. Nothing is guessed from
rule names: a finding the repair leaves standing keeps standing.

Only the rules with findings to re-check run again, each on one rebuilt
context per root (its design, factor and fit built once and shared by those
rules), so the cost is one partial run per candidate root, for at most
``MAX_TABLE_RECHECKS`` roots; a rule declared
``recheck=False`` (a costly estimate resistant to the other problems by
design) is not run again and its findings stand.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, replace
from typing import Mapping, Sequence

import numpy as np

from .context import RunContext
from .findings import Finding, Grade
from .outcome import RULE_ERROR
from .roles import resolve_roles
from .rule import Repair, RuleLike, RuleSettings
from .runner import run_rule
from .stats.blas import one_blas_thread

ROW_OVERLAP = 0.5
MAX_TABLE_RECHECKS = 6
"""At most this many roots are re-checked on a repaired table (the strongest first, in report order).

Each such re-check rebuilds the design, its factor and fit and runs the rules
with findings again: one partial run. A wide table with a code such as -999
in hundreds of columns has a root per column, and re-checking every one would
cost hundreds of runs; past the bound, roots are still listed to fix first but
their effects are not looked for (the findings stand as reported). Judging
repairs (``settles``) cost nothing and are not counted.
"""


@dataclass(frozen=True)
class Causes:
    """For each finding (report order), the positions of the findings judged to cause it, and the roots to fix first."""

    explained_by: tuple[tuple[int, ...], ...]
    fix_first: tuple[int, ...]

    def explains(self, root: int) -> int:
        """How many findings name ``root`` among their causes."""
        return sum(1 for causes in self.explained_by if root in causes)


def repaired_context(context: RunContext, repair: Repair) -> RunContext | None:
    """The run context of the repaired table (same rows, so the same row labels), or None for a judging repair."""
    if repair.table is None:
        return None
    options = repair.options or context.options
    roles = resolve_roles(repair.table, options)
    return replace(context, table=repair.table, options=options, roles=roles, statistics=None, score=None)


def persists(before: Finding, after: Sequence[Finding], added: Sequence[str] = ()) -> bool:
    """Whether ``before`` is still found among ``after``: same rule, at its grade or stronger, same place.

    The same place means overlapping columns (``added`` columns ignored; both
    without columns also counts) and, for a finding that lists rows, at least
    half of them listed again (labels counted with their repeats, as an id
    shared by several rows names each of them).
    """
    ignored = set(added)
    wanted_columns = set(before.columns)
    wanted_rows = Counter(before.rows)
    for other in after:
        if other.rule != before.rule or other.grade < before.grade:
            continue
        columns = set(other.columns) - ignored
        if wanted_columns or columns:
            if not wanted_columns & columns:
                continue
        if wanted_rows and sum((wanted_rows & Counter(other.rows)).values()) < ROW_OVERLAP * len(before.rows):
            continue
        return True
    return False


def _rechecked(
    context: RunContext,
    repair: Repair,
    candidates: Sequence[int],
    findings: Sequence[Finding],
    rules: Mapping[str, tuple[RuleLike, RuleSettings]],
) -> set[int]:
    """The candidates that the repair removes."""
    if repair.settles is not None:
        return {j for j in candidates if repair.settles(findings[j])}
    fixed = repaired_context(context, repair)
    if fixed is None:
        return set()
    after: dict[str, tuple[Finding, ...] | None] = {}
    with one_blas_thread(), np.errstate(all="ignore"):
        for rule_id in dict.fromkeys(findings[j].rule for j in candidates):
            rule, settings = rules[rule_id]
            outcome = run_rule(rule, settings, fixed)
            # Only a clean re-run can explain: a rule that fails or does not apply there keeps its findings.
            after[rule_id] = outcome.findings if outcome.error is None and outcome.not_applicable is None else None
    explained: set[int] = set()
    for j in candidates:
        rerun = after[findings[j].rule]
        if rerun is not None and not persists(findings[j], rerun, repair.added):
            explained.add(j)
    return explained


def _damage(findings: Sequence[Finding], root: int, explained_by: Sequence[Sequence[int]]) -> tuple[int, int]:
    """A root's damage: the strongest grade among it and what it explains, then how many findings it explains."""
    effects = [j for j, causes in enumerate(explained_by) if root in causes]
    strongest = max([int(findings[root].grade)] + [int(findings[j].grade) for j in effects])
    return strongest, len(effects)


def find_causes(
    context: RunContext,
    selected: Sequence[tuple[RuleLike, RuleSettings]],
    findings: Sequence[Finding],
) -> Causes:
    """Judge which findings explain which by re-checking each candidate root's repair.

    A repair hook that fails leaves its finding a root and explains nothing:
    the causes are an aid to reading, never a reason for a run to fail.
    When two findings would explain each other, the one whose fix touches
    fewer rows keeps the role of cause (a few wrong rows can bend a fit; a
    bend does not make a few rows wrong), then the stronger, then the earlier.
    """
    rules = {rule.id: (rule, settings) for rule, settings in selected}
    rechecked = {rule_id for rule_id, (rule, _) in rules.items() if rule.recheck and rule_id != RULE_ERROR}
    causes: list[set[int]] = [set() for _ in findings]
    size: dict[int, int] = {}
    table_rechecks = 0
    for i, root in enumerate(findings):
        chosen = rules.get(root.rule)
        hook = chosen[0].repair if chosen is not None else None
        if hook is None or root.grade < Grade.WEAKENS:
            continue
        try:
            repair = hook(context, root)
            if repair is None:
                continue
            size[i] = repair.rows
            if repair.settles is None and repair.table is not None:
                if table_rechecks >= MAX_TABLE_RECHECKS:
                    continue
                table_rechecks += 1
            candidates = [j for j, f in enumerate(findings) if f.rule != root.rule and f.rule in rechecked]
            explained = _rechecked(context, repair, candidates, findings, rules)
        except Exception:  # noqa: BLE001  (a failed re-check explains nothing; the findings stand as reported)
            continue
        for j in explained:
            causes[j].add(i)
    for j in range(len(findings)):
        for i in sorted(causes[j]):
            if j in causes[i]:
                if (-size[i], findings[i].grade, -i) >= (-size[j], findings[j].grade, -j):
                    causes[i].discard(j)
                else:
                    causes[j].discard(i)
    explained_by = tuple(tuple(sorted(found)) for found in causes)
    roots = [i for i, f in enumerate(findings) if not explained_by[i] and f.grade >= Grade.WEAKENS and f.rule != RULE_ERROR]
    ranked = sorted(roots, key=lambda i: (*(-v for v in _damage(findings, i, explained_by)), i))
    return Causes(explained_by, tuple(ranked))

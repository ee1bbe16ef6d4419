"""The lifecycle every report writer shares: begin the run, then per table and per finding, then end.

A writer never asks which rules exist: it reads them from the run facts
(the rule catalogue of the run) and from each report, so a new rule appears
in every format without touching a writer.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Mapping, Sequence

from .. import __version__
from ..findings import Finding

if TYPE_CHECKING:
    from ..outcome import Report
    from ..rule import RuleLike


@dataclass(frozen=True)
class WriterSettings:
    """Presentation choices a writer may honour: colour for terminals, the why text under each finding."""

    colour: bool = False
    explain: bool = False
    plots: bool = True


@dataclass(frozen=True)
class RunFacts:
    """What holds for a whole run: the tool's version and the rules it knows, by id."""

    version: str
    rules: Mapping[str, "RuleLike"] = field(default_factory=dict)

    @classmethod
    def of(cls, reports: Sequence["Report"]) -> "RunFacts":
        """The facts of a run over ``reports``: every rule any of them knew, in id order."""
        known: dict[str, "RuleLike"] = {}
        for report in reports:
            for rule in report.rules:
                known.setdefault(rule.id, rule)
        return cls(version=__version__, rules={k: known[k] for k in sorted(known)})

    def why(self, rule_id: str) -> str:
        """The rule's why text, or an empty text for a rule the run does not know."""
        rule = self.rules.get(rule_id)
        return rule.why if rule is not None else ""


class ReportWriter:
    """One output format. The driver calls, in order: ``begin_run`` once; for each table
    ``begin_table``, ``finding`` for each of its findings in report order, ``end_table``;
    then ``end_run``, which returns the whole document.
    """

    def __init__(self, settings: WriterSettings = WriterSettings()) -> None:
        self.settings = settings

    def begin_run(self, run: RunFacts) -> None:
        """Start a document."""
        self.run = run

    def begin_table(self, report: "Report") -> None:
        """Start the part of the document about one table."""

    def finding(self, finding: Finding) -> None:
        """Add one finding of the current table."""

    def end_table(self, report: "Report") -> None:
        """Finish the part about one table."""

    def end_run(self) -> str:
        """Finish the document and return it."""
        raise NotImplementedError


def drive(writer: ReportWriter, reports: Sequence["Report"]) -> str:
    """Feed ``reports`` through ``writer``'s lifecycle and return the document."""
    writer.begin_run(RunFacts.of(reports))
    for report in reports:
        writer.begin_table(report)
        for finding in report.findings:
            writer.finding(finding)
        writer.end_table(report)
    return writer.end_run()


def labels_not_unique(report: "Report") -> str | None:
    """``not unique: 6 values for 120 rows`` when the id column has fewer distinct values than the table has rows."""
    values = report.design.id_values
    if values is None or values >= report.info.rows:
        return None
    return f"not unique: {values:,} values for {report.info.rows:,} rows"


def baseline_sentence(report: "Report") -> str | None:
    """``vetted against the baseline base.json (sha256 ...; profile of last.csv, 1,200 rows)``, or None without one."""
    baseline = report.baseline
    if baseline is None:
        return None
    source = f"; profile of {baseline['table']}, {baseline['rows']:,} rows" if baseline["table"] != baseline["path"] else f"; {baseline['rows']:,} rows"
    return f"vetted against the baseline {baseline['path']} (sha256 {baseline['sha256'] or 'unknown'}{source})"


def groups_sentence(report: "Report") -> str | None:
    """``rows grouped by 'site_id' (40 groups of 90 rows; from the repeating --id)``, or None when grouping is off."""
    groups = report.design.groups
    if groups is None:
        return None
    spread = f"{groups.smallest:,}" if groups.smallest == groups.largest else f"{groups.smallest:,} to {groups.largest:,}, median {groups.median:g}"
    return f"rows grouped by {groups.column!r} ({groups.groups:,} groups of {spread} rows; from {groups.origin}; --group none turns this off)"


def row_groups(finding: Finding, limit: int) -> tuple[list[str], int]:
    """The first ``limit`` distinct labels of the rows a finding lists, and how many named rows are not shown.

    A label repeated on several rows (an id shared by several rows) is shown
    once with its count, as ``CS-002 (12 rows)``.
    """
    counts: dict[str, int] = {}
    for label in finding.rows:
        counts[str(label)] = counts.get(str(label), 0) + 1
    shown = list(counts.items())[:limit]
    items = [label if n == 1 else f"{label} ({n} rows)" for label, n in shown]
    return items, finding.row_count - sum(n for _, n in shown)


def folded(report: "Report") -> list[tuple[Finding, list[Finding]]]:
    """Each finding without a cause (the fix-first list first, then report order) with the findings folded under it.

    A finding explained by others folds under the root its first cause leads
    to; one whose causes are not in the report (accepted) stands as a root.
    """
    findings = report.findings
    position = {f.key: i for i, f in enumerate(findings) if f.key}
    causes = [tuple(position[k] for k in f.explained_by if k in position) for f in findings]
    under: dict[int, list[Finding]] = {}
    roots: list[int] = []
    for i in range(len(findings)):
        root = root_of(i, causes)
        if root == i:
            roots.append(i)
        else:
            under.setdefault(root, []).append(findings[i])
    rank = {key: n for n, key in enumerate(report.fix_first)}
    roots.sort(key=lambda i: (rank.get(findings[i].key, len(rank)), i))
    return [(findings[i], under.get(i, [])) for i in roots]


def fix_first(report: "Report") -> list[tuple[Finding, int]]:
    """The roots to fix first (most damaging first), each with the number of findings folded under it."""
    by_key = {root.key: (root, len(effects)) for root, effects in folded(report)}
    return [by_key[key] for key in report.fix_first if key in by_key]


def root_of(position: int, explained_by: Sequence[Sequence[int]]) -> int:
    """The root a finding folds under: follow its first cause until a finding without causes (or a loop)."""
    seen = {position}
    while explained_by[position]:
        position = explained_by[position][0]
        if position in seen:
            break
        seen.add(position)
    return position

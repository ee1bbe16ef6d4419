"""The terminal report, drawn with rich; our own semantic style names map to colours in one Theme."""

from __future__ import annotations

import io
from typing import TYPE_CHECKING

from rich.console import Console, RenderableType
from rich.padding import Padding
from rich.table import Table
from rich.text import Text
from rich.theme import Theme

from ..findings import (
    GRADE_MEANINGS,
    GRADES_STRONGEST_FIRST,
    Finding,
    Grade,
    count_by_grade,
    counted,
)
from ..rule import LISTED_NAMES, capped_names
from ..text import inert
from .base import ReportWriter, RunFacts, baseline_sentence, fix_first, folded, groups_sentence, labels_not_unique, row_groups

if TYPE_CHECKING:
    from ..outcome import Report

THEME = Theme(
    {
        "grade.blocks": "bold white on dark_red",
        "grade.misleads": "bold red1",
        "grade.weakens": "bold dark_orange",
        "grade.note": "bold steel_blue",
        "facts.label": "grey50",
        "facts.value": "bold",
        "finding.rule": "bold",
        "finding.columns": "italic",
        "finding.remedy": "green4",
        "finding.why": "grey62",
        "verdict.pass": "bold green4",
        "verdict.fail": "bold red1",
    }
)
PLAIN_WIDTH = 100
MARKERS = {Grade.BLOCKS: "xx", Grade.MISLEADS: "!!", Grade.WEAKENS: "~~", Grade.NOTE: ".."}


def _facts(report: "Report") -> Text:
    text = Text()
    pairs = [
        ("rows", f"{report.info.rows:,}"),
        ("columns", f"{report.info.columns:,}"),
        ("target", inert(report.target)),
        ("parameters", f"{report.parameters:,}"),
        ("complete cases", f"{report.complete_cases:,}"),
        ("purpose", report.purpose),
    ]
    for i, (label, value) in enumerate(pairs):
        if i:
            text.append("  ")
        text.append(f"{label} ", style="facts.label")
        text.append(value, style="facts.value")
    return text


def _design_line(report: "Report") -> Text:
    terms = report.design.terms
    parts = ["intercept"] if report.design.intercept else []
    numeric = sum(1 for t in terms if t.kind in ("numeric", "datetime"))
    if numeric:
        parts.append(f"{numeric} numeric")
    coded: list[str] = []
    for term in terms:
        if term.reference is not None:
            coded.append(f"{inert(term.column)} ({counted(term.parameters, 'dummy', 'dummies')}, reference {inert(repr(term.reference))})")
        elif term.kind in ("categorical", "boolean"):
            coded.append(f"{inert(term.column)} (no complete rows)")
    shown = coded if len(coded) <= LISTED_NAMES else coded[: LISTED_NAMES - 2] + [f"{len(coded) - LISTED_NAMES + 2:,} more categories"]
    parts += shown
    line = Text()
    line.append("design ", style="facts.label")
    line.append(" + ".join(parts) or "empty")
    left_out = report.design.left_out
    if report.design.id:
        line.append(f"; row labels from {inert(repr(report.design.id))}{_shared_labels(report)}")
    grouping = groups_sentence(report)
    if grouping:
        line.append(f"; {grouping}")
    if left_out:
        line.append("; left out: " + capped_names([inert(name) for name in left_out]))
    return line


def _shared_labels(report: "Report") -> str:
    """Why a label may name several rows: the id column has fewer distinct values than the table has rows."""
    shared = labels_not_unique(report)
    return "" if shared is None else f" ({shared}, so a label names every row carrying it)"


INDENT_HEAD, INDENT_BODY = 2, 5
SHORT_TEXT = 48


def _once(label: str, text: str, told: set[tuple[str, str]]) -> str:
    """``label: text`` the first time a table's report tells it, ``label: as above`` after that (for long texts)."""
    if (label, text) in told and len(text) > SHORT_TEXT:
        return f"{label}: as above"
    told.add((label, text))
    return f"{label}: {text}"


def _finding_lines(finding: Finding, explain: str | None, told: set[tuple[str, str]]) -> list[tuple[int, RenderableType]]:
    finding = finding.shown()
    title = Text(finding.rule, style="finding.rule")
    if finding.columns:
        title.append("  " + capped_names(finding.columns), style="finding.columns")
    head = Table.grid(padding=(0, 1))
    head.add_column(no_wrap=True)
    head.add_column()
    head.add_row(Text(MARKERS[finding.grade], style=f"grade.{finding.grade.word}"), title)
    lines: list[tuple[int, RenderableType]] = [(INDENT_HEAD, head), (INDENT_BODY, Text(finding.message))]
    if finding.rows:
        items, more = row_groups(finding, 10)
        shown = ", ".join(items)
        lines.append((INDENT_BODY, Text(f"rows: {shown}" + (f" and {counted(more, 'more row')}" if more > 0 else ""), style="facts.label")))
    if explain:
        lines.append((INDENT_BODY, Text(_once("why", explain, told), style="finding.why")))
    if finding.remedy:
        lines.append((INDENT_BODY, Text("fix: " + finding.remedy, style="finding.remedy")))
    if finding.source:
        lines.append((INDENT_BODY, Text(_once("threshold source", finding.source, told), style="facts.label")))
    return lines


def render_terminal(report: "Report", colour: bool, width: int | None = None, explain: dict[str, str] | None = None) -> str:
    """The report as terminal text; plain (no colour codes) when ``colour`` is false."""
    buffer = io.StringIO()
    console = Console(
        file=buffer,
        theme=THEME,
        width=width or (None if colour else PLAIN_WIDTH),
        force_terminal=colour,
        color_system="truecolor" if colour else None,
        highlight=False,
        emoji=False,
        soft_wrap=False,
    )
    console.print(Text(f"prefit {inert(report.info.path, None)}", style="bold"))
    console.print(Padding(_facts(report), (0, 0, 0, INDENT_HEAD)))
    console.print(Padding(_design_line(report), (0, 0, 0, INDENT_HEAD)))
    sampled = report.engine.sentence() if report.engine is not None else None
    if sampled is not None:
        console.print(Padding(Text(sampled), (0, 0, 0, INDENT_HEAD)))
    against = baseline_sentence(report)
    if against is not None:
        console.print(Padding(Text(against), (0, 0, 0, INDENT_HEAD)))
    counts = count_by_grade(report.findings)
    told: set[tuple[str, str]] = set()
    first = fix_first(report)
    if first:
        console.print()
        console.print(Text("FIX FIRST", style="bold"))
        for number, (root, explained) in enumerate(first, 1):
            root = root.shown()
            entry = Text(f"{number}. ")
            entry.append(MARKERS[root.grade], style=f"grade.{root.grade.word}")
            entry.append(f" {root.rule}", style="finding.rule")
            if root.columns:
                entry.append("  " + capped_names(root.columns), style="finding.columns")
            if explained:
                entry.append(f"  (explains {explained} finding{'' if explained == 1 else 's'})", style="facts.label")
            console.print(Padding(entry, (0, 0, 0, INDENT_HEAD)))
    roots = folded(report)
    for grade in GRADES_STRONGEST_FIRST:
        group = [(f, effects) for f, effects in roots if f.grade is grade]
        if not group:
            continue
        console.print()
        heading = Table.grid(padding=(0, 1))
        heading.add_column(no_wrap=True)
        heading.add_column()
        heading.add_row(
            Text(f" {grade.word.upper()} ", style=f"grade.{grade.word}"),
            Text(f"{len(group)}  ({GRADE_MEANINGS[grade]})", style="facts.label"),
        )
        console.print(heading)
        for finding, effects in group:
            for indent, line in _finding_lines(finding, (explain or {}).get(finding.rule), told):
                console.print(Padding(line, (0, 0, 0, indent)))
            if effects:
                console.print(Padding(Text("explained by this finding (gone once it is fixed):", style="facts.label"), (0, 0, 0, INDENT_BODY)))
            for effect in (e.shown() for e in effects):
                folded_line = Text(MARKERS[effect.grade] + " ", style=f"grade.{effect.grade.word}")
                folded_line.append(effect.rule, style="finding.rule")
                if effect.columns:
                    folded_line.append("  " + capped_names(effect.columns), style="finding.columns")
                folded_line.append(": " + effect.message)
                if effect.rows:
                    items, more = row_groups(effect, 10)
                    folded_line.append("; rows: " + ", ".join(items) + (f" and {counted(more, 'more row')}" if more > 0 else ""), style="facts.label")
                console.print(Padding(folded_line, (0, 0, 0, INDENT_BODY + 2)))
    console.print()
    summary = ", ".join(f"{n} {word}" for word, n in counts.items())
    if report.failed_rules:
        verdict = Text(f"INCOMPLETE: {len(report.failed_rules)} rule(s) failed ({', '.join(report.failed_rules)}); ", style="verdict.fail")
    elif report.gated:
        verdict = Text(f"NOT READY at gate {report.gate.word}: ", style="verdict.fail")
    else:
        verdict = Text(f"READY at gate {report.gate.word}: ", style="verdict.pass")
    verdict.append(summary or "no findings")
    if report.accepted:
        verdict.append(f"; {len(report.accepted)} accepted finding(s) not shown", style="facts.label")
    console.print(verdict)
    text = buffer.getvalue()
    return text if colour else "\n".join(line.rstrip() for line in text.split("\n"))


class TerminalWriter(ReportWriter):
    """The terminal report of each table, one after another."""

    def begin_run(self, run: RunFacts) -> None:
        super().begin_run(run)
        self.parts: list[str] = []

    def end_table(self, report: "Report") -> None:
        explain = {rule_id: self.run.why(rule_id) for rule_id in self.run.rules} if self.settings.explain else None
        self.parts.append(render_terminal(report, colour=self.settings.colour, explain=explain))

    def end_run(self) -> str:
        return "\n".join(self.parts)

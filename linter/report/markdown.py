"""A compact Markdown summary for a pull-request comment: verdict, counts per grade, findings, remedies.

Text from the data (column names, row labels, messages quoting values) is
made inert (:mod:`prefit.text`: controls and line breaks shown escaped, long
texts cut) and escaped so that it renders as written: the characters that
start emphasis, code, links, strike-through or a table cell get a backslash,
and ``<`` and ``&`` become entities. Other punctuation is only
special at the start of a line, where data text never stands.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from ..findings import GRADES_STRONGEST_FIRST, Finding, count_by_grade, counted
from ..rule import capped_names
from ..text import inert_message
from .base import ReportWriter, RunFacts, baseline_sentence, fix_first, folded, row_groups

if TYPE_CHECKING:
    from ..outcome import Report

_PUNCTUATION = re.compile(r"([\\`*_\[\]|~])")
LISTED_ROWS = 5


def md_text(text: str) -> str:
    """``text`` as literal Markdown inline text, safe in a table cell."""
    flat = inert_message(str(text))
    flat = flat.replace("&", "&amp;").replace("<", "&lt;")
    return _PUNCTUATION.sub(r"\\\1", flat)


def _verdict(report: "Report") -> str:
    if report.failed_rules:
        return f"incomplete: {len(report.failed_rules)} rule(s) failed"
    if report.gated:
        return f"not ready at gate *{report.gate.word}*"
    return f"ready at gate *{report.gate.word}*"


def _rows(finding: Finding) -> str:
    if not finding.rows:
        return ""
    items, more = row_groups(finding, LISTED_ROWS)
    shown = ", ".join(md_text(item) for item in items)
    stop = "" if finding.message.rstrip().endswith((".", ";", ":")) else "."
    return f"{stop} Rows: {shown}" + (f" and {counted(more, 'more row')}" if more > 0 else "") + "."


class MarkdownWriter(ReportWriter):
    """One section per table: heading with the verdict, a count table, a findings table, the remedies."""

    def begin_run(self, run: RunFacts) -> None:
        super().begin_run(run)
        self.parts: list[str] = []

    def begin_table(self, report: "Report") -> None:
        self.findings: list[Finding] = []

    def finding(self, finding: Finding) -> None:
        self.findings.append(finding)

    def end_table(self, report: "Report") -> None:
        lines = [f"### prefit: {md_text(report.info.path)}: {_verdict(report)}", ""]
        lines.append(
            f"{report.info.rows:,} rows, {report.info.columns:,} columns; target {md_text(report.target)}; "
            f"{report.parameters:,} parameters; {report.complete_cases:,} complete cases; purpose {report.purpose}."
        )
        sampled = report.engine.sentence() if report.engine is not None else None
        if sampled is not None:
            lines.append(f"Note: {md_text(sampled)}.")
        against = baseline_sentence(report)
        if against is not None:
            lines.append(f"{md_text(against[0].upper() + against[1:])}.")
        lines.append("")
        counts = count_by_grade(self.findings)
        words = [g.word for g in GRADES_STRONGEST_FIRST]
        lines.append("| " + " | ".join(words + ["accepted"]) + " |")
        lines.append("|" + "---:|" * (len(words) + 1))
        lines.append("| " + " | ".join(str(counts[w]) for w in words) + f" | {len(report.accepted)} |")
        lines.append("")
        first = fix_first(report)
        if first:
            lines += ["**Fix first**", ""]
            for number, (root, explained) in enumerate(first, 1):
                root = root.shown()
                columns = f" ({md_text(capped_names(root.columns))})" if root.columns else ""
                also = f": explains {explained} finding{'' if explained == 1 else 's'}" if explained else ""
                lines.append(f"{number}. {root.grade.word} `{root.rule}`{columns}{also}")
            lines.append("")
        if self.findings:
            lines.append("| grade | rule | columns | finding |")
            lines.append("|---|---|---|---|")
            shown = {f.key for f in self.findings}
            for root, effects in folded(report):
                if root.key not in shown:
                    continue
                for position, f in enumerate(x.shown() for x in [root, *effects]):
                    columns = md_text(capped_names(f.columns)) or "-"
                    grade = f.grade.word if position == 0 else f"&#8627; {f.grade.word}"
                    lines.append(f"| {grade} | `{f.rule}` | {columns} | {md_text(f.message)}{_rows(f)} |")
            lines.append("")
            remedies: list[str] = []
            seen: set[tuple[str, str]] = set()
            for f in self.findings:
                if f.remedy and (f.rule, f.remedy) not in seen:
                    seen.add((f.rule, f.remedy))
                    remedies.append(f"- **{f.rule}**: {md_text(f.remedy)}")
            if remedies:
                lines += ["**Remedies**", "", *remedies, ""]
        else:
            lines += ["No findings.", ""]
        if report.accepted:
            lines += [f"{len(report.accepted)} accepted finding(s) are counted, not listed.", ""]
        self.parts.append("\n".join(lines))

    def end_run(self) -> str:
        return "\n".join(self.parts).rstrip("\n") + "\n"

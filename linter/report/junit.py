"""JUnit XML as CI servers read it: one test suite per table, one test case per rule that ran.

A finding at or above the gate is a failure of its rule's test case (its
message is the strongest finding's message; the body lists every such
finding with its remedy); findings below the gate go to the test case's
output; a rule that raised is skipped with the error as the reason, and so is a rule that did not apply
(no scoring table, no time order, no fit), with why.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from typing import TYPE_CHECKING

from ..findings import Finding
from ..outcome import RULE_ERROR
from ..text import inert_message
from .base import ReportWriter, RunFacts

if TYPE_CHECKING:
    from ..outcome import Report

_NOT_XML = re.compile("[^\u0009\u000a\u000d\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def xml_text(text: str) -> str:
    """``text`` made inert (:func:`prefit.text.inert_message`), with any other character XML 1.0 cannot carry replaced by U+FFFD."""
    return _NOT_XML.sub("\ufffd", inert_message(text))


def _finding_text(finding: Finding) -> str:
    finding = finding.shown()
    columns = f" [{', '.join(finding.columns)}]" if finding.columns else ""
    rows = f" rows: {', '.join(str(r) for r in finding.rows[:10])}" + (f" (+{finding.row_count - 10} more)" if finding.row_count > 10 else "") if finding.rows else ""
    remedy = f"\n  fix: {finding.remedy}" if finding.remedy else ""
    causes = f"\n  explained by: {', '.join(finding.explained_by)}" if finding.explained_by else ""
    return xml_text(f"{finding.grade.word}: {finding.rule}{columns}: {finding.message}{rows}{remedy}{causes}")


class JunitWriter(ReportWriter):
    """A ``testsuites`` document with one ``testsuite`` per table."""

    def begin_run(self, run: RunFacts) -> None:
        super().begin_run(run)
        self.root = ET.Element("testsuites", {"name": "prefit"})
        self.totals = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}

    def begin_table(self, report: "Report") -> None:
        self.by_rule: dict[str, list[Finding]] = {}

    def finding(self, finding: Finding) -> None:
        self.by_rule.setdefault(finding.rule, []).append(finding)

    def end_table(self, report: "Report") -> None:
        suite = ET.SubElement(self.root, "testsuite", {"name": xml_text(report.info.path)})
        properties = ET.SubElement(suite, "properties")
        for name, value in (
            ("target", report.target),
            ("rows", str(report.info.rows)),
            ("complete_cases", str(report.complete_cases)),
            ("parameters", str(report.parameters)),
            ("gate", report.gate.word),
            ("purpose", report.purpose),
            ("accepted", str(len(report.accepted))),
            ("fix_first", " ".join(report.fix_first)),
            *((("baseline", str(report.baseline["path"])), ("baseline_sha256", str(report.baseline["sha256"]))) if report.baseline is not None else ()),
        ):
            ET.SubElement(properties, "property", {"name": name, "value": xml_text(value)})
        counts = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}
        for outcome in report.outcomes:
            counts["tests"] += 1
            case = ET.SubElement(suite, "testcase", {"classname": f"prefit.{outcome.rule.split('.', 1)[0]}", "name": outcome.rule})
            if outcome.error is not None:
                counts["skipped"] += 1
                ET.SubElement(case, "skipped", {"message": xml_text(f"rule could not run: {outcome.error}")})
                continue
            if outcome.not_applicable is not None:
                counts["skipped"] += 1
                ET.SubElement(case, "skipped", {"message": xml_text(f"not applicable: {outcome.not_applicable}")})
                continue
            findings = [f for f in self.by_rule.get(outcome.rule, []) if f.rule != RULE_ERROR]
            gated = [f for f in findings if f.grade >= report.gate]
            if gated:
                counts["failures"] += 1
                failure = ET.SubElement(case, "failure", {"message": xml_text(gated[0].message), "type": gated[0].grade.word})
                failure.text = "\n".join(_finding_text(f) for f in gated)
            below = [f for f in findings if f.grade < report.gate]
            if below:
                ET.SubElement(case, "system-out").text = "\n".join(_finding_text(f) for f in below)
        for key in ("tests", "failures", "errors", "skipped"):
            suite.set(key, str(counts[key]))
            self.totals[key] += counts[key]

    def end_run(self) -> str:
        for key, value in self.totals.items():
            self.root.set(key, str(value))
        ET.indent(self.root, space="  ")
        body = ET.tostring(self.root, encoding="unicode")
        return '<?xml version="1.0" encoding="UTF-8"?>\n' + body + "\n"

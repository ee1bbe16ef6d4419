"""SARIF 2.1.0 (OASIS standard): one run, the rules as reporting descriptors, one result per finding.

Grades map to levels: blocks and misleads are errors, weakens a warning,
note a note. The table is the artifact, its columns are logical locations,
and in text tables (CSV, JSON Lines) the rows a finding names are line
regions: data row k of a CSV with a header is line k + 1, assuming one line
per record. A label that names several rows (an id value repeated on several
rows) gets no region, as no single line stands for it.

References
----------
OASIS, Static Analysis Results Interchange Format (SARIF) Version 2.1.0, 2020,
sections 3.27 (result), 3.49 (reportingDescriptor), 3.33 (logicalLocation), 3.30 (region).
"""

from __future__ import annotations

import json
from pathlib import PurePosixPath, PureWindowsPath
from typing import TYPE_CHECKING, Any
from urllib.parse import quote

from ..findings import Finding, Grade, json_number, plain_json
from ..rule import default_grades
from ..text import cut_texts, inert, inert_message, json_inert
from .base import ReportWriter, RunFacts

if TYPE_CHECKING:
    from ..outcome import Report
    from ..rule import RuleLike

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
FINGERPRINT_NAME = "prefitFinding/v1"
LEVELS = {Grade.BLOCKS: "error", Grade.MISLEADS: "error", Grade.WEAKENS: "warning", Grade.NOTE: "note"}
HEADER_LINES = {"csv": 1, "jsonl": 0}
ENGINE_RULE = {
    "id": "engine.rule-error",
    "shortDescription": {"text": "A rule failed and reported nothing: the check is incomplete."},
    "fullDescription": {"text": "A rule raised an error instead of reporting; its findings are missing from this run."},
    "help": {"text": "Run with --debug for the traceback and report it, or skip the rule."},
    "defaultConfiguration": {"level": "note"},
}


def artifact_uri(path: str) -> str:
    """A URI reference for a table path: relative paths stay relative, absolute ones become file URIs."""
    if PureWindowsPath(path).drive:
        return PureWindowsPath(path).as_uri()
    if path.startswith("/"):
        return PurePosixPath(path).as_uri()
    return quote(path.replace("\\", "/"), safe="/._-~")


def _descriptor(rule: "RuleLike") -> dict[str, Any]:
    grades = default_grades(rule)
    level = LEVELS[grades[0]] if grades else "note"
    thresholds = [
        {"name": t.name, "value": t.value, "compare": t.compare, "grade": t.grade.word if t.grade else None, "source": t.source}
        for t in rule.thresholds
    ]
    return {
        "id": rule.id,
        "name": rule.id.split(".", 1)[1],
        "shortDescription": {"text": rule.summary},
        "fullDescription": {"text": rule.why},
        "help": {"text": f"{rule.why}\n\nRemedy: {rule.remedy}", "markdown": f"{rule.why}\n\n**Remedy:** {rule.remedy}"},
        "defaultConfiguration": {"level": level},
        "properties": {"family": rule.family, "grades": [g.word for g in grades], "thresholds": thresholds},
    }


class SarifWriter(ReportWriter):
    """A SARIF log with one run covering every table of the run."""

    def begin_run(self, run: RunFacts) -> None:
        super().begin_run(run)
        self.descriptors = [_descriptor(rule) for rule in run.rules.values()]
        self.index = {d["id"]: i for i, d in enumerate(self.descriptors)}
        self.artifacts: list[dict[str, Any]] = []
        self.results: list[dict[str, Any]] = []
        self.notifications: list[dict[str, Any]] = []
        self.tables: list[dict[str, Any]] = []

    def _rule_index(self, rule_id: str) -> int:
        if rule_id not in self.index:
            self.descriptors.append(dict(ENGINE_RULE) if rule_id == ENGINE_RULE["id"] else {"id": rule_id})
            self.index[rule_id] = len(self.descriptors) - 1
        return self.index[rule_id]

    def begin_table(self, report: "Report") -> None:
        self.report = report
        self.artifact_index = len(self.artifacts)
        artifact: dict[str, Any] = {"location": {"uri": artifact_uri(report.info.path)}, "properties": {"format": report.info.format, "rows": report.info.rows, "columns": report.info.columns}}
        if report.info.sha256:
            artifact["hashes"] = {"sha-256": report.info.sha256}
        self.artifacts.append(artifact)
        self.keys = dict(zip(map(id, report.findings), report.fingerprints))

    def _line(self, label: Any) -> int | None:
        header = HEADER_LINES.get(self.report.info.format)
        if header is None:
            return None
        if self.report.row_positions:
            position = self.report.row_positions.get(label)
            return position + 1 + header if position is not None else None
        return label + header if isinstance(label, int) and label >= 1 else None

    def _location(self, finding: Finding, label: Any | None, with_columns: bool) -> dict[str, Any]:
        physical: dict[str, Any] = {"artifactLocation": {"uri": self.artifacts[self.artifact_index]["location"]["uri"], "index": self.artifact_index}}
        line = self._line(label) if label is not None else None
        if line is not None:
            physical["region"] = {"startLine": line}
        location: dict[str, Any] = {"physicalLocation": physical}
        if with_columns and finding.columns:
            location["logicalLocations"] = [{"name": inert(c), "fullyQualifiedName": inert(f"{self.report.info.path}::{c}", None), "kind": "variable"} for c in finding.columns]
        if label is not None:
            location["message"] = {"text": f"row {inert(label)}"}
        return location

    def finding(self, finding: Finding) -> None:
        rows = list(finding.rows)
        first = rows[0] if rows else None
        shown = finding.shown()
        result: dict[str, Any] = {
            "ruleId": finding.rule,
            "ruleIndex": self._rule_index(finding.rule),
            "level": LEVELS[finding.grade],
            "message": {"text": shown.message + (f" Remedy: {shown.remedy}" if shown.remedy else "")},
            "locations": [self._location(finding, first, with_columns=True)],
            "partialFingerprints": {FINGERPRINT_NAME: self.keys[id(finding)].digest},
            "properties": {
                "grade": finding.grade.word,
                "columns": list(finding.columns),
                "rows": rows,
                "rowCount": finding.row_count,
                "value": json_number(finding.value),
                "threshold": json_number(finding.threshold),
                "thresholdSource": finding.source,
                "remedy": finding.remedy,
                "explainedBy": list(finding.explained_by),
            },
        }
        related = [dict(self._location(finding, label, with_columns=False), id=i + 1) for i, label in enumerate(rows[1:])]
        if related:
            result["relatedLocations"] = related
        self.results.append(result)

    def end_table(self, report: "Report") -> None:
        for outcome in report.outcomes:
            if outcome.error is not None:
                self.notifications.append(
                    {
                        "level": "error",
                        "message": {"text": inert_message(f"{report.info.path}: rule {outcome.rule} failed: {outcome.error}")},
                        "descriptor": {"id": outcome.rule},
                    }
                )
        self.tables.append(
            {
                "table": report.info.path,
                "target": report.target,
                "parameters": report.parameters,
                "completeCases": report.complete_cases,
                "gate": report.gate.word,
                "purpose": report.purpose,
                "gated": len(report.gated),
                "accepted": len(report.accepted),
                "exitCode": report.exit_code,
                "design": report.design.to_dict(),
                **({"baseline": dict(report.baseline)} if report.baseline is not None else {}),
            }
        )

    def end_run(self) -> str:
        invocation: dict[str, Any] = {"executionSuccessful": not self.notifications}
        if self.notifications:
            invocation["toolExecutionNotifications"] = self.notifications
        log = {
            "$schema": SARIF_SCHEMA,
            "version": SARIF_VERSION,
            "runs": [
                {
                    "tool": {"driver": {"name": "prefit", "version": self.run.version, "semanticVersion": self.run.version, "rules": self.descriptors}},
                    "invocations": [invocation],
                    "artifacts": self.artifacts,
                    "columnKind": "unicodeCodePoints",
                    "results": self.results,
                    "properties": {"tables": self.tables},
                }
            ],
        }
        return json_inert(json.dumps(cut_texts(plain_json(log)), indent=2, ensure_ascii=False, allow_nan=False)) + "\n"

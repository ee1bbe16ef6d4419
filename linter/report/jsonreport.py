"""The JSON report: one table's report as an object, several as a list of them."""

from __future__ import annotations

import json
from typing import TYPE_CHECKING, Any

from ..text import json_inert
from .base import ReportWriter

if TYPE_CHECKING:
    from ..outcome import Report


class JsonWriter(ReportWriter):
    """The documented JSON report (``report.schema.json``), byte-stable."""

    def begin_run(self, run: Any) -> None:
        super().begin_run(run)
        self.tables: list["Report"] = []

    def end_table(self, report: "Report") -> None:
        self.tables.append(report)

    def end_run(self) -> str:
        if len(self.tables) == 1:
            return self.tables[0].to_json()
        documents = [r.to_dict() for r in self.tables]
        return json_inert(json.dumps(documents, indent=2, ensure_ascii=False, allow_nan=False)) + "\n"

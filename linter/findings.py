"""Grades and findings: the one record every rule produces and every reporter reads."""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping, Sequence

from .text import inert, inert_message

JSONScalar = str | int | float | bool | None
RowLabel = str | int

MAX_LISTED_ROWS = 10_000
"""The most row labels one finding lists (the most extreme first); far above what a finding names in typical use.

Text, Markdown and HTML show the first few; JSON, SARIF and fingerprints keep every listed row. A finding that
concerns more rows says so: ``row_count`` is the total and ``rows_capped`` is true in the JSON report.
"""


class Grade(enum.IntEnum):
    """How much a finding damages a least-squares fit; larger is worse.

    Attributes
    ----------
    NOTE : int
        Worth knowing; the fit is not harmed.
    WEAKENS : int
        The fit stands, but its precision or generality suffers.
    MISLEADS : int
        The fit runs, but coefficients, errors or predictions mislead (the default gate).
    BLOCKS : int
        No trustworthy fit can be computed.
    """

    NOTE = 1
    WEAKENS = 2
    MISLEADS = 3
    BLOCKS = 4

    @property
    def word(self) -> str:
        """The grade as printed and written in every report."""
        return self.name.lower()

    def __str__(self) -> str:
        return self.word

    @classmethod
    def parse(cls, word: str) -> "Grade":
        """Read a grade word (``blocks``, ``misleads``, ``weakens``, ``note``)."""
        try:
            return cls[word.strip().upper()]
        except KeyError:
            raise ValueError(
                f"{word!r} is not a grade; use one of {', '.join(g.word for g in GRADES_STRONGEST_FIRST)}"
            ) from None


GRADES_STRONGEST_FIRST: tuple[Grade, ...] = tuple(sorted(Grade, reverse=True))

GRADE_MEANINGS: Mapping[Grade, str] = {
    Grade.BLOCKS: "the model cannot be fitted, or its estimates are undefined",
    Grade.MISLEADS: "the fit runs, but coefficients, standard errors or p-values would be materially wrong or unstable",
    Grade.WEAKENS: "precision, power or generality suffer",
    Grade.NOTE: "worth knowing; no action needed",
}


def counted(count: int, noun: str, plural: str | None = None) -> str:
    """``1 row``, ``12 rows``, ``1,204 dummies`` (``plural`` for nouns that do not just add an s)."""
    return f"{count:,} {noun if count == 1 else (plural or noun + 's')}"


def json_number(value: float | int | None) -> float | int | None:
    """A number as JSON can carry it: NaN and infinities become None."""
    if value is None:
        return None
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, int):
        return value
    value = float(value)
    return value if math.isfinite(value) else None


def plain_json(value: Any) -> Any:
    """Turn numpy scalars, tuples and non-finite floats into plain JSON types."""
    if isinstance(value, Mapping):
        return {str(k): plain_json(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain_json(v) for v in value]
    if isinstance(value, (str, bool)) or value is None:
        return value
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, (int, float)):
        return json_number(value)
    return str(value)


@dataclass(frozen=True)
class Finding:
    """One graded observation about the table, with the numbers behind it.

    Attributes
    ----------
    rule : str
        The id of the rule that found it (``family.name``).
    grade : Grade
        How much it damages the fit.
    message : str
        What was found, with its numbers.
    columns : tuple of str
        The columns concerned.
    rows : tuple of str or int
        At most ``MAX_LISTED_ROWS`` row labels (values of the id column, or 1-based data row numbers).
    row_values : tuple of float or None
        The measured value for each listed row.
    row_count : int
        The total number of rows concerned.
    value, threshold : float or None
        The measured value and the limit it crossed.
    source : str
        Where the limit comes from.
    remedy : str
        What to do about it.
    details : mapping
        Further numbers, as plain JSON types.
    key : str
        The digest of the finding's fingerprint (set by the pipeline).
    explained_by : tuple of str
        The keys of the findings that explain it.
    """

    rule: str
    grade: Grade
    message: str
    columns: tuple[str, ...] = ()
    rows: tuple[RowLabel, ...] = ()
    row_values: tuple[float | None, ...] = ()
    row_count: int = 0
    value: float | None = None
    threshold: float | None = None
    source: str = ""
    remedy: str = ""
    details: Mapping[str, Any] = field(default_factory=dict)
    key: str = ""
    explained_by: tuple[str, ...] = ()

    def sort_key(self) -> tuple[Any, ...]:
        """Strongest grade first, then rule, columns and rows, for a stable report order."""
        return (
            -int(self.grade),
            self.rule,
            self.columns,
            tuple((isinstance(r, str), str(r) if isinstance(r, str) else r) for r in self.rows),
            self.message,
        )

    def shown(self) -> "Finding":
        """This finding with its texts as a report prints them: controls escaped, long names, labels and values cut.

        See :mod:`prefit.text`; the measured numbers and ``details`` are unchanged.
        """
        return replace(
            self,
            message=inert_message(self.message),
            columns=tuple(inert(c) for c in self.columns),
            rows=tuple(inert(r) if isinstance(r, str) else r for r in self.rows),
            remedy=inert_message(self.remedy),
        )

    def to_dict(self) -> dict[str, Any]:
        """The finding as plain JSON types (NaN and infinities as None)."""
        return {
            "rule": self.rule,
            "grade": self.grade.word,
            "columns": list(self.columns),
            "rows": list(self.rows),
            "row_values": [json_number(v) for v in self.row_values],
            "row_count": self.row_count,
            "rows_capped": self.row_count > len(self.rows) > 0,
            "value": json_number(self.value),
            "threshold": json_number(self.threshold),
            "message": self.message,
            "remedy": self.remedy,
            "source": self.source,
            "details": plain_json(self.details),
            "key": self.key,
            "explained_by": list(self.explained_by),
        }


def count_by_grade(findings: Sequence[Finding]) -> dict[str, int]:
    """Number of findings per grade word, strongest grade first."""
    return {g.word: sum(1 for f in findings if f.grade is g) for g in GRADES_STRONGEST_FIRST}

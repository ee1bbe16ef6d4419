"""The rule contract: metadata plus a pure function of the run context that yields findings."""

from __future__ import annotations

import operator
from dataclasses import dataclass, replace
from typing import (
    TYPE_CHECKING,
    Any,
    Callable,
    Collection,
    Iterable,
    Mapping,
    Protocol,
    Sequence,
    runtime_checkable,
)

import numpy as np

from .findings import MAX_LISTED_ROWS, Finding, Grade, RowLabel

if TYPE_CHECKING:
    from .context import RunContext

COMMON_PRACTICE = "common practice"


class NotApplicable(Exception):
    """Raised by a rule's check when the table gives it nothing to check; the message says why.

    The engine records the rule as not applicable (a skipped test case in JUnit), which
    is neither a finding nor a failure.
    """

_COMPARISONS: Mapping[str, Callable[[float, float], bool]] = {
    ">=": operator.ge,
    ">": operator.gt,
    "<=": operator.le,
    "<": operator.lt,
}


@dataclass(frozen=True)
class Threshold:
    """A named limit of a rule.

    ``grade`` is the grade a value earns when ``value <compare> limit`` holds;
    a threshold without a grade is a plain parameter (a cap, a share, a level).
    ``source`` cites where the number comes from, or says ``common practice``.
    """

    name: str
    value: float
    source: str
    grade: Grade | None = None
    compare: str = ">="

    def __post_init__(self) -> None:
        if self.compare not in _COMPARISONS:
            raise ValueError(f"threshold {self.name!r}: compare must be one of {sorted(_COMPARISONS)}")

    def crossed(self, measured: float) -> bool:
        """Whether ``measured`` is on the bad side of this limit."""
        return bool(_COMPARISONS[self.compare](measured, self.value))

    def describe(self) -> str:
        """E.g. ``misleads when value >= 10``, or ``cap = 50`` for a plain parameter."""
        if self.grade is None:
            return f"{self.name} = {self.value:g}"
        return f"{self.grade.word} when value {self.compare} {self.value:g}"


CheckFunction = Callable[["RunContext", "RuleSettings"], Iterable[Finding]]


@runtime_checkable
class RuleLike(Protocol):
    """What the engine needs of a rule, built-in or from a plugin (read-only attributes)."""

    @property
    def id(self) -> str: ...

    @property
    def summary(self) -> str: ...

    @property
    def why(self) -> str: ...

    @property
    def remedy(self) -> str: ...

    @property
    def thresholds(self) -> tuple[Threshold, ...]: ...

    def check(self, context: "RunContext", settings: "RuleSettings") -> Iterable[Finding]: ...


@dataclass(frozen=True)
class Rule:
    """A rule: ``id`` is ``family.name``; ``check`` is a pure function of the run context.

    ``grades`` lists grades the rule gives that no threshold carries.

    ``needs`` names the shared statistics the rule reads (``rows`` when it
    must see every row, ``fit`` when it reads the preliminary fit); the
    engines use it to tell which rules ran on what.

    ``heavy`` marks a rule that takes a large share of a run on a long table
    (auxiliary regressions over every row, an iterative robust estimate):
    heavy rules start first, so that the rule threads finish together.
    """

    id: str
    summary: str
    why: str
    remedy: str
    check: CheckFunction
    thresholds: tuple[Threshold, ...] = ()
    grades: tuple[Grade, ...] = ()
    needs: frozenset[str] = frozenset()
    heavy: bool = False

    @property
    def family(self) -> str:
        """The part of the id before the first dot."""
        return self.id.split(".", 1)[0]


def default_grades(rule: RuleLike) -> tuple[Grade, ...]:
    """The grades a rule can give by default: declared ones and those of its thresholds, strongest first."""
    declared = set(getattr(rule, "grades", ()) or ())
    declared |= {t.grade for t in rule.thresholds if t.grade is not None}
    return tuple(sorted(declared, reverse=True))


def rule_family(rule_id: str) -> str:
    """The family part of a rule id."""
    return rule_id.split(".", 1)[0]


@dataclass(frozen=True)
class RuleSettings:
    """A rule's thresholds after configuration, and helpers to build its findings.

    ``grade_override`` replaces every grade the rule gives (from configuration);
    ``exempt`` names columns whose findings are dropped for this rule.
    """

    rule: RuleLike
    thresholds: tuple[Threshold, ...]
    grade_override: Grade | None = None
    exempt: frozenset[str] = frozenset()

    @classmethod
    def defaults(cls, rule: RuleLike) -> "RuleSettings":
        """Settings with the rule's own default thresholds."""
        return cls(rule=rule, thresholds=tuple(rule.thresholds))

    def with_values(self, values: Mapping[str, float]) -> "RuleSettings":
        """Settings with some thresholds replaced by configured values."""
        known = {t.name for t in self.thresholds}
        unknown = sorted(set(values) - known)
        if unknown:
            raise KeyError(unknown[0])
        updated = tuple(
            replace(t, value=float(values[t.name]), source="configured") if t.name in values else t
            for t in self.thresholds
        )
        return replace(self, thresholds=updated)

    def threshold(self, name: str) -> Threshold:
        """The threshold called ``name``."""
        for t in self.thresholds:
            if t.name == name:
                return t
        raise KeyError(f"rule {self.rule.id} has no threshold {name!r}")

    def limit(self, name: str) -> float:
        """The value of the threshold called ``name``."""
        return self.threshold(name).value

    def grade_of(self, measured: float, among: Collection[str] | None = None) -> tuple[Grade, Threshold] | None:
        """The strongest grade whose threshold ``measured`` crosses, with that threshold.

        ``among``, when given, names the graded thresholds that apply (a rule
        whose limits depend on a setting, such as the model's purpose).
        """
        crossed = [
            t for t in self.thresholds if t.grade is not None and (among is None or t.name in among) and t.crossed(measured)
        ]
        if not crossed:
            return None
        worst = max(crossed, key=lambda t: int(t.grade or 0))
        assert worst.grade is not None
        return worst.grade, worst

    def finding(
        self,
        grade: Grade,
        message: str,
        *,
        columns: Sequence[str] = (),
        rows: Sequence[RowLabel] = (),
        row_values: Sequence[float | None] | np.ndarray = (),
        row_count: int | None = None,
        value: float | None = None,
        threshold: Threshold | float | None = None,
        source: str | None = None,
        remedy: str | None = None,
        details: Mapping[str, Any] | None = None,
    ) -> Finding:
        """Build a finding of this rule; the threshold's source and the rule's remedy are the defaults."""
        limit = threshold.value if isinstance(threshold, Threshold) else threshold
        if source is None:
            source = threshold.source if isinstance(threshold, Threshold) else ""
        return Finding(
            rule=self.rule.id,
            grade=self.grade_override or grade,
            message=message,
            columns=tuple(columns),
            rows=tuple(rows),
            row_values=tuple(None if v is None else float(v) for v in row_values),
            row_count=len(rows) if row_count is None else int(row_count),
            value=None if value is None else float(value),
            threshold=None if limit is None else float(limit),
            source=source,
            remedy=self.rule.remedy if remedy is None else remedy,
            details=dict(details or {}),
        )


def top_rows(
    positions: np.ndarray, measures: np.ndarray, limit: int = MAX_LISTED_ROWS
) -> tuple[np.ndarray, np.ndarray]:
    """The ``limit`` most extreme rows by ``|measure|`` (ties by position), most extreme first."""
    positions = np.asarray(positions)
    measures = np.asarray(measures, dtype=float)
    order = np.lexsort((positions, -np.abs(np.nan_to_num(measures, nan=-np.inf))))[:limit]
    return positions[order], measures[order]


def fmt(value: float, digits: int = 3) -> str:
    """A number for a message: ``digits`` significant digits, no exponent for ordinary sizes."""
    if value is None or not np.isfinite(value):
        return str(value)
    if value == 0:
        return "0"
    magnitude = abs(value)
    if 1e-3 <= magnitude < 1e6:
        decimals = max(0, digits - 1 - int(np.floor(np.log10(magnitude))))
        return f"{value:,.{decimals}f}"
    return f"{value:.{digits - 1}e}"


LISTED_NAMES = 10


def capped_names(names: Sequence[str], limit: int = LISTED_NAMES) -> str:
    """Names for a message or a text report: all of them up to ``limit``, else the first few and a count of the rest.

    ``x1, x2, x3`` for three names; ``x0001, x0002, ..., x0008 and 992 more``
    beyond the limit, so a wide table's report stays readable (the JSON
    report's ``columns`` keep the complete list).
    """
    if len(names) <= limit:
        return ", ".join(names)
    shown = max(limit - 2, 1)
    return ", ".join(names[:shown]) + f", ... and {len(names) - shown:,} more"


def meaningful_ratio(value: float, reference: float, scale: float) -> float | None:
    """``value / reference``, or None when the ratio would mislead a reader.

    A ratio to a reference within ``scale`` (a spread of the same column) of
    zero is large only because the reference is about 0, and a negative or
    undefined ratio reads as nonsense; messages then say the reference is about 0.
    """
    if reference == 0 or abs(reference) < scale:
        return None
    ratio = value / reference
    return ratio if np.isfinite(ratio) and ratio > 0 else None

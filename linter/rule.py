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
    import pyarrow as pa

    from .context import RunContext
    from .options import CheckOptions
    from .teaching.base import Demonstration

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


@dataclass(frozen=True)
class Repair:
    """A root finding fixed hypothetically, so that the findings it causes can be re-checked.

    Either ``table`` (with ``options``, when the repair changes them) is the
    table as it would be once the problem is fixed, with the same rows in the
    same order, and the affected rules run again on it; ``added`` names
    columns the repair adds (a curve term), which are ignored when findings
    are compared. Or ``settles`` judges a finding directly, for a root whose
    fix cannot be written as a table (more rows): it says whether the root
    alone accounts for the finding. ``rows`` is how many rows the fix
    touches: when two roots would explain each other, the smaller fix is
    taken for the cause.
    """

    description: str
    rows: int
    table: "pa.Table | None" = None
    options: "CheckOptions | None" = None
    added: tuple[str, ...] = ()
    settles: Callable[[Finding], bool] | None = None


RepairHook = Callable[["RunContext", Finding], "Repair | None"]


SCREEN_MEASURES = (
    "leverage",
    "studentized_residual",
    "cooks_distance",
    "dffits",
    "dfbetas",
    "robust_distance",
    "robust_residual",
    "fence_score",
)
"""The per-row measures pass 2 of the stream and Dask engines can screen every row of a table by, in report order."""


@dataclass(frozen=True)
class ScreenScale:
    """What a screen's cutoffs scale with: the whole table's fit (complete rows, rank, residual degrees of freedom)
    and the number of columns of the sample's robust centre.

    Without a least-squares fit (a target that is not numeric) ``rank`` and
    ``df_resid`` are 0 and only screens that need no fit (``fence_score``) run.
    """

    rows: int
    rank: int
    df_resid: int
    robust_columns: int = 0
    robust_bulk: "tuple[float, float] | None" = None
    """In many columns, the centre and spread of the cube-rooted squared robust distances the sample's own bulk shows
    (:attr:`prefit.stats.robust.RobustDistances.bulk`); cutoffs then come from it instead of the chi-square."""


Cutoffs = tuple[tuple[str, float], ...]


@dataclass(frozen=True)
class RowScreen:
    """A rule's pass-2 screen: the per-row measure it reads and how to scale its cutoffs from its configured thresholds.

    Beyond the row budget the rules run on a sample; pass 2 then counts every
    complete row of the whole table beyond each cutoff ``cutoffs(scale, settings)``
    returns (named, e.g. ``("3p/n", 0.012)``), and keeps the most extreme rows.
    ``measure`` is one of :data:`SCREEN_MEASURES`.
    """

    measure: str
    cutoffs: Callable[[ScreenScale, "RuleSettings"], Cutoffs]

    def __post_init__(self) -> None:
        if self.measure not in SCREEN_MEASURES:
            raise ValueError(f"screen measure {self.measure!r} is not one of {', '.join(SCREEN_MEASURES)}")


@runtime_checkable
class RuleLike(Protocol):
    """Everything the engine, the cause finder, the catalogue and the writers read of a rule, built-in or from a plugin.

    Every member is read directly (never with a default), so an object that
    is not a :class:`Rule` must define them all; :class:`Rule` gives the
    optional ones their defaults. All are read-only.
    """

    @property
    def id(self) -> str:
        """``family.name``: lower case, digits and hyphens; new across every installed rule."""

    @property
    def family(self) -> str:
        """The part of the id before the first dot (:func:`rule_family`): what ``--skip`` and configuration may name."""

    @property
    def summary(self) -> str:
        """One line saying what the rule flags."""

    @property
    def why(self) -> str:
        """Why it matters for a linear fit (``prefit why`` and ``--explain`` print it)."""

    @property
    def remedy(self) -> str:
        """What to do about a finding, unless the finding says otherwise."""

    @property
    def thresholds(self) -> tuple[Threshold, ...]:
        """The rule's limits, each with its source; configuration overrides their values by name."""

    @property
    def grades(self) -> tuple[Grade, ...]:
        """Grades the rule gives that no threshold carries (for ``prefit rules`` and the SARIF rule descriptors)."""

    @property
    def needs(self) -> frozenset[str]:
        """Shared statistics the rule reads: ``rows`` when it must see every row, ``fit`` when it reads the least-squares fit.

        A rule needing both stands aside (not applicable) when there is no fit to diagnose.
        """

    @property
    def heavy(self) -> bool:
        """Whether the rule takes a large share of a run on a long table; heavy rules start first."""

    @property
    def repair(self) -> "RepairHook | None":
        """Given one of the rule's findings, the :class:`Repair` that would fix it (or None): the finding is a candidate root cause."""

    @property
    def recheck(self) -> bool:
        """Whether the cause finder runs the rule again on repaired tables (False: its findings stand as reported)."""

    @property
    def screen(self) -> RowScreen | None:
        """The rule's pass-2 screen of every row beyond the row budget, or None when it has none."""

    @property
    def demonstration(self) -> "Callable[[], Demonstration] | None":
        """A function of no arguments returning the rule's :class:`~prefit.teaching.Demonstration` (``prefit why``), or None."""

    def check(self, context: "RunContext", settings: "RuleSettings") -> Iterable[Finding]:
        """Yield the rule's findings on ``context`` with the configured ``settings``; raise :class:`NotApplicable` when there is nothing to check."""


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

    ``repair`` declares the rule's findings candidate roots: given one of its
    findings, it returns the :class:`Repair` that would fix it (or None), and
    :mod:`prefit.causes` re-checks which other findings that repair removes.
    ``recheck=False`` keeps the rule out of those re-checks (its findings
    stand as reported): for a rule whose estimate is resistant to the other
    problems by design and too costly to repeat for every candidate root.

    ``screen`` declares the rule's pass-2 screen (:class:`RowScreen`): the
    per-row measure the stream and Dask engines count over every row of a
    table beyond the row budget, with cutoffs from the rule's configured
    thresholds. ``demonstration`` returns the rule's teaching demonstration.
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
    repair: RepairHook | None = None
    recheck: bool = True
    screen: RowScreen | None = None
    demonstration: "Callable[[], Demonstration] | None" = None

    @property
    def family(self) -> str:
        """The part of the id before the first dot."""
        return rule_family(self.id)


def default_grades(rule: RuleLike) -> tuple[Grade, ...]:
    """The grades a rule can give by default: declared ones and those of its thresholds, strongest first."""
    declared = set(rule.grades)
    declared |= {t.grade for t in rule.thresholds if t.grade is not None}
    return tuple(sorted(declared, reverse=True))


def rule_family(rule_id: str) -> str:
    """The family part of a rule id: the one place a family is derived (``Rule.family`` and the registry use it)."""
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

"""The report model: what one check found and did, which every report writer reads.

:class:`Report` holds the table facts, the design as built, the rule outcomes,
the findings in report order with their fingerprints, and the engine's run facts
(:class:`EngineRun`).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import TYPE_CHECKING, Any, Callable, Mapping

from . import __version__
from .accepted import AcceptedSet, Fingerprint, fingerprint
from .figures import FigureData
from .findings import Finding, Grade, RowLabel, count_by_grade
from .reading import TableInfo
from .report import WriterSettings, render
from .report.html import html_fragment
from .stats.screens import FENCE_CONFIDENCE, ColumnFences, MeasureScreen
from .text import cut_texts, json_inert

if TYPE_CHECKING:
    from .baseline import BaselineProfile
    from .rule import RuleLike

RULE_ERROR = "engine.rule-error"


@dataclass(frozen=True)
class RuleOutcome:
    """What one rule did: its findings, the error that stopped it, or why it did not apply."""

    rule: str
    findings: tuple[Finding, ...]
    error: str | None = None
    not_applicable: str | None = None


@dataclass(frozen=True)
class EngineRun:
    """What the engine did, for the report: its name, and the sample the rules ran on when the table was beyond the row budget."""

    name: str
    table_rows: int
    rules_rows: int
    complete_rows: int | None = None
    screens: tuple[MeasureScreen, ...] = field(default=(), repr=False)
    on_sample: tuple[str, ...] = ()
    screened: tuple[str, ...] = ()
    fences: ColumnFences | None = field(default=None, repr=False)

    @property
    def sampled(self) -> bool:
        """Whether the rules saw a sample rather than every row."""
        return self.rules_rows < self.table_rows

    def sentence(self) -> str | None:
        """What the rules saw, in words, when it was a sample; None when they saw every row."""
        if not self.sampled:
            return None
        text = (
            f"the rules ran on a sample of {self.rules_rows:,} of {self.table_rows:,} rows "
            f"({self.name} engine; rows chosen by a seeded hash of their position; raise --row-budget to see more)"
        )
        beyond = [f"{c.beyond:,} beyond {s.measure.replace('_', ' ')} {c.name}" for s in self.screens if s.column is None for c in s.cutoffs[-1:]]
        if beyond:
            text += f"; all {self.complete_rows:,} complete rows were screened against the whole table's fit: " + ", ".join(beyond)
        fenced = [s for s in self.screens if s.measure == "fence_score"]
        if fenced and self.fences is not None:
            values = sum(s.cutoffs[-1].beyond for s in fenced)
            worst = max(self.fences.rank_error(s.column) for s in fenced if s.column is not None)
            text += (
                f"; every value of {len(fenced)} numeric column{'' if len(fenced) == 1 else 's'} was screened against the sample's adjusted boxplot: "
                f"{values:,} beyond its fences (the sample's quartiles are within {worst:.2g} in rank of the whole "
                f"table's with probability {FENCE_CONFIDENCE:g}, Dvoretzky-Kiefer-Wolfowitz)"
            )
        return text

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types."""
        out: dict[str, Any] = {"name": self.name, "rules_ran_on_rows": self.rules_rows, "table_rows": self.table_rows}
        if self.sampled:
            out["sample"] = {
                "rows": self.rules_rows,
                "of": self.table_rows,
                "how": "rows with the smallest seeded hash of their position (uniform, the same for any batching)",
            }
            out["complete_rows"] = self.complete_rows
            out["rules_on_sample"] = list(self.on_sample)
            out["rules_with_every_row_screened"] = list(self.screened)
            out["row_screens"] = {s.key: s.to_dict() for s in self.screens}
            if self.fences is not None:
                out["fences"] = self.fences.to_dict()
        return out


@dataclass(frozen=True)
class DesignTerm:
    """One term of the design as built: its column, kind and parameters; a category's reference and coded levels."""

    column: str
    kind: str
    parameters: int
    reference: str | None = None
    levels: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types, as the report schema names them."""
        coded = {"reference": self.reference, "levels": list(self.levels)} if self.reference is not None else {}
        return {"column": self.column, "kind": self.kind, "parameters": self.parameters, **coded}


@dataclass(frozen=True)
class Grouping:
    """How the complete cases are grouped: the column, where the grouping came from, the groups and their sizes."""

    column: str
    origin: str | None
    groups: int
    smallest: int
    median: float
    largest: int

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types, as the report schema names them."""
        return {"column": self.column, "from": self.origin, "groups": self.groups, "sizes": {"min": self.smallest, "median": self.median, "max": self.largest}}


@dataclass(frozen=True)
class DesignDescription:
    """The hidden choices of the design, said out loud for every report.

    Attributes
    ----------
    intercept : bool
        Whether the design has an intercept column.
    coding : str
        How categories are coded, in words.
    terms : tuple of DesignTerm
        The design's terms in column order.
    rows_dropped : int
        Rows left out as incomplete.
    kinds : mapping of str to str
        Each column's kind as resolved.
    left_out : mapping of str to str
        Columns left out of the design, with why.
    id : str or None
        The column whose values label rows, if any.
    id_values : int or None
        How many distinct labels the id column has (None without one).
    groups : Grouping or None
        The grouping of the complete cases (None when grouping is off).
    missing_codes_applied : mapping of str to int or None
        Per column, how many declared missing codes were replaced (None when none were).
    """

    intercept: bool
    coding: str
    terms: tuple[DesignTerm, ...]
    rows_dropped: int
    kinds: Mapping[str, str] = field(default_factory=dict)
    left_out: Mapping[str, str] = field(default_factory=dict)
    id: str | None = None
    id_values: int | None = None
    groups: Grouping | None = None
    missing_codes_applied: Mapping[str, int] | None = None

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types, in the order and with the names of the report schema."""
        out: dict[str, Any] = {
            "intercept": self.intercept,
            "coding": self.coding,
            "terms": [t.to_dict() for t in self.terms],
            "rows_dropped": self.rows_dropped,
            "kinds": dict(self.kinds),
            "left_out": dict(self.left_out),
            "id": self.id,
        }
        if self.id_values is not None:
            out["id_values"] = self.id_values
        out["groups"] = self.groups.to_dict() if self.groups is not None else None
        if self.missing_codes_applied:
            out["missing_codes_applied"] = dict(self.missing_codes_applied)
        return out


TOOL_NAME = "prefit"
REPORT_SCHEMA_VERSION = 1


@dataclass(frozen=True)
class Report:
    """The outcome of one check: table facts, the design as built, and the findings in report order.

    Each finding carries its ``key`` (the digest of its fingerprint, computed
    once by the pipeline and kept in ``keyed``) and the keys of the findings
    that explain it.

    Attributes
    ----------
    info : TableInfo
        The table's path, format, size and SHA-256.
    target : str
        The response column.
    parameters, complete_cases : int
        Columns of the design and rows with every model column present.
    design : DesignDescription
        The design as built, typed.
    findings : tuple of Finding
        The findings in report order.
    outcomes : tuple of RuleOutcome
        What each selected rule did, in id order.
    gate : Grade
        Findings at or above this grade make the table not ready.
    purpose : str
        ``explain`` or ``predict``.
    accepted : tuple of Finding
        Findings matched by an accepted-findings file: counted, never gated.
    engine : EngineRun or None
        What the engine did (the sample the rules ran on, pass-2 screens).
    fix_first : tuple of str
        Keys of the root findings at ``weakens`` or above, most damaging first (:mod:`prefit.causes`).
    keyed : mapping of str to Fingerprint
        Each finding's fingerprint by its key.
    row_positions : mapping of row label to int
        The 0-based table row each listed row label names, for labels that name one row (SARIF's line numbers).
    baseline : mapping or None
        The baseline the table was vetted against.
    rules : tuple of RuleLike
        The rules the run knew (not part of the JSON report).
    figure_source : callable or None
        Gathers the plots' data (:class:`~prefit.figures.FigureData`) for given findings; set by the pipeline,
        called once through :attr:`figures`, so that a check that draws no plot gathers nothing.
    profile_source : callable or None
        Profiles the checked table for ``--save-baseline``; set by the pipeline, called once through :attr:`profile`.

    The report holds no run context: writers and callers read the report model, and the two sources
    above are the only way back to the run's statistics (:func:`prefit.pipeline.checked_context`
    gives a caller both the report and the context).
    """

    info: TableInfo
    target: str
    parameters: int
    complete_cases: int
    design: DesignDescription
    findings: tuple[Finding, ...]
    outcomes: tuple[RuleOutcome, ...]
    gate: Grade
    purpose: str = "explain"
    accepted: tuple[Finding, ...] = ()
    engine: EngineRun | None = None
    fix_first: tuple[str, ...] = ()
    keyed: Mapping[str, Fingerprint] = field(default_factory=dict, compare=False, repr=False)
    row_positions: Mapping[RowLabel, int] = field(default_factory=dict, compare=False, repr=False)
    baseline: Mapping[str, Any] | None = None
    rules: tuple[RuleLike, ...] = field(default=(), compare=False, repr=False)
    figure_source: Callable[[tuple[Finding, ...]], FigureData] | None = field(default=None, compare=False, repr=False)
    profile_source: Callable[[], BaselineProfile] | None = field(default=None, compare=False, repr=False)

    @cached_property
    def figures(self) -> FigureData | None:
        """What the HTML plots draw for this report's findings, gathered on first use; None for a report built without a run."""
        return self.figure_source(self.findings) if self.figure_source is not None else None

    @cached_property
    def profile(self) -> BaselineProfile | None:
        """The checked table's baseline profile (:func:`prefit.baseline.profile_of`), made on first use; None for a report built without a run."""
        return self.profile_source() if self.profile_source is not None else None

    @property
    def failed_rules(self) -> tuple[str, ...]:
        """Rules that raised instead of reporting: the check is incomplete when any did."""
        return tuple(o.rule for o in self.outcomes if o.error is not None)

    @property
    def worst_grade(self) -> Grade | None:
        """The strongest grade among the findings, or None when there are none."""
        return max((f.grade for f in self.findings), default=None)

    @property
    def gated(self) -> tuple[Finding, ...]:
        """Findings at or above the gate."""
        return tuple(f for f in self.findings if f.grade >= self.gate and f.rule != RULE_ERROR)

    @property
    def exit_code(self) -> int:
        """3 when a rule failed, else 1 when a finding reaches the gate, else 0."""
        if self.failed_rules:
            return 3
        return 1 if self.gated else 0

    @cached_property
    def fingerprints(self) -> tuple[Fingerprint, ...]:
        """The fingerprint of each finding, in report order (rule, grade, columns, digest of the flagged rows).

        Computed once by the pipeline; a finding it did not key (a report built
        by hand) is fingerprinted without row digests.
        """
        return tuple(self.keyed[f.key] if f.key in self.keyed else fingerprint(f, None) for f in self.findings)

    def accepting(self, accepted: AcceptedSet) -> "Report":
        """This report with the findings ``accepted`` matches moved out of ``findings`` into ``accepted``."""
        keys = self.fingerprints
        kept = tuple(f for f, k in zip(self.findings, keys) if k not in accepted or f.rule == RULE_ERROR)
        matched = tuple(f for f, k in zip(self.findings, keys) if k in accepted and f.rule != RULE_ERROR)
        left = {f.key for f in kept}
        return replace(self, findings=kept, accepted=self.accepted + matched, fix_first=tuple(k for k in self.fix_first if k in left))

    def to_dict(self) -> dict[str, Any]:
        """The report as plain JSON types, in the documented schema; long texts cut (:func:`prefit.text.cut_texts`)."""
        document: dict[str, Any] = cut_texts({
            "schema": REPORT_SCHEMA_VERSION,
            "tool": {"name": TOOL_NAME, "version": __version__},
            "table": {"path": self.info.path, "format": self.info.format, "rows": self.info.rows, "columns": self.info.columns, "sha256": self.info.sha256},
            "target": self.target,
            "parameters": self.parameters,
            "complete_cases": self.complete_cases,
            "design": self.design.to_dict(),
            "gate": self.gate.word,
            "purpose": self.purpose,
            "complete": not self.failed_rules,
            "rules_run": [o.rule for o in self.outcomes],
            "rules_not_applicable": {o.rule: o.not_applicable for o in self.outcomes if o.not_applicable is not None},
            "findings": [f.to_dict() for f in self.findings],
            "fix_first": list(self.fix_first),
            "summary": count_by_grade(self.findings),
            "accepted": len(self.accepted),
            **({"engine": self.engine.to_dict()} if self.engine is not None else {}),
            **({"baseline": dict(self.baseline)} if self.baseline is not None else {}),
        })
        return document

    def to_json(self) -> str:
        """The JSON report: sorted findings, NaN and infinities as null, stable bytes.

        Returns
        -------
        str
            The document of :meth:`to_dict`, indented, ending in a newline.
        """
        return json_inert(json.dumps(self.to_dict(), indent=2, ensure_ascii=False, allow_nan=False)) + "\n"

    def render(self, format: str, **settings: Any) -> str:
        """The report in any registered format.

        Parameters
        ----------
        format : str
            A format name: ``text``, ``json``, ``sarif``, ``junit``, ``markdown``,
            ``html``, or one a plugin adds through the ``prefit.formats`` entry points.
        **settings
            :class:`~prefit.report.WriterSettings` fields: ``colour``, ``explain``, ``plots``.

        Returns
        -------
        str
            The whole document.
        """
        return render(format, [self], WriterSettings(**settings))

    def to_sarif(self) -> str:
        """The report as a SARIF 2.1.0 log (one run)."""
        return self.render("sarif")

    def to_junit(self) -> str:
        """The report as JUnit XML: one test suite, one test case per rule that ran."""
        return self.render("junit")

    def to_markdown(self) -> str:
        """A compact Markdown summary for a pull-request comment."""
        return self.render("markdown")

    def to_html(self, plots: bool = True) -> str:
        """One self-contained HTML page: facts, findings with why and remedy, and (with ``plots``) SVG plots.

        Parameters
        ----------
        plots : bool, default True
            Draw the SVG plots (needs matplotlib; they draw the report's figure data, gathered from the run on first use).

        Returns
        -------
        str
            The page.
        """
        return self.render("html", plots=plots)

    def _repr_html_(self) -> str:
        return html_fragment(self)

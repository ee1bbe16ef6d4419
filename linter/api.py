"""The Python API: ``check`` a table and get a :class:`Report`. The command line is built on it."""

from __future__ import annotations

import json
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, fields, replace
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping, Sequence

import numpy as np
import pyarrow as pa

from . import __version__
from .accepted import (
    AcceptedSet,
    Fingerprint,
    fingerprints,
    load_accepted,
    save_accepted,
)
from .baseline import BaselineProfile, load_baseline, profile_of, save_profile
from .causes import find_causes
from .context import RunContext
from .engines.passes import SCREENED_RULES
from .engines.scaled import EngineRun
from .errors import UsageProblem
from .findings import GRADES_STRONGEST_FIRST, Finding, Grade, count_by_grade
from .options import SETTINGS_BY_KEY, CheckOptions, parse_settings
from .preload import imports_ready, warm_imports
from .progress import RunProgress
from .reading import ReadOptions, TableInfo, decode_dictionaries, read_table
from .registry import Registry, discover
from .roles import apply_missing_codes, distinct_labels, resolve_roles
from .rule import RuleLike, RuleSettings
from .runner import RuleOutcome, error_finding, run_rule, select_rules
from .scoring import check_declared_ranges, read_score_table
from .stats.blas import one_blas_thread
from .text import cut_texts, json_inert

if TYPE_CHECKING:
    import pandas as pd

TOOL_NAME = "prefit"
RULE_THREADS = 2
REPORT_SCHEMA_VERSION = 1


@dataclass(frozen=True)
class Report:
    """The outcome of one check: table facts, the design as built, and the findings in report order.

    ``accepted`` holds findings matched by an accepted-findings file: they are
    reported as a count and never reach the gate. ``rules`` are the rules the
    run knew and ``context`` the run's statistics (for plots and fingerprints);
    neither is part of the JSON report. Each finding carries its ``key`` (the
    digest of its fingerprint, computed once here) and the keys of the
    findings that explain it; ``fix_first`` lists the keys of the root
    findings at ``weakens`` or above, most damaging first (:mod:`prefit.causes`).
    """

    info: TableInfo
    target: str
    parameters: int
    complete_cases: int
    design: Mapping[str, Any]
    findings: tuple[Finding, ...]
    outcomes: tuple[RuleOutcome, ...]
    gate: Grade
    purpose: str = "explain"
    accepted: tuple[Finding, ...] = ()
    engine: EngineRun | None = None
    fix_first: tuple[str, ...] = ()
    keyed: Mapping[str, Fingerprint] = field(default_factory=dict, compare=False, repr=False)
    baseline: Mapping[str, Any] | None = None
    rules: tuple[RuleLike, ...] = field(default=(), compare=False, repr=False)
    context: RunContext | None = field(default=None, compare=False, repr=False)

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
        return tuple(f for f in self.findings if f.grade >= self.gate and f.rule != "engine.rule-error")

    @property
    def exit_code(self) -> int:
        """3 when a rule failed, else 1 when a finding reaches the gate, else 0."""
        if self.failed_rules:
            return 3
        return 1 if self.gated else 0

    @cached_property
    def fingerprints(self) -> tuple[Fingerprint, ...]:
        """The fingerprint of each finding, in report order (rule, grade, columns, digest of the flagged rows)."""
        if all(f.key in self.keyed for f in self.findings):
            return tuple(self.keyed[f.key] for f in self.findings)
        return fingerprints(self.findings, self.context)

    def accepting(self, accepted: AcceptedSet) -> "Report":
        """This report with the findings ``accepted`` matches moved out of ``findings`` into ``accepted``."""
        keys = self.fingerprints
        kept = tuple(f for f, k in zip(self.findings, keys) if k not in accepted or f.rule == "engine.rule-error")
        matched = tuple(f for f, k in zip(self.findings, keys) if k in accepted and f.rule != "engine.rule-error")
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
            "design": dict(self.design),
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
        """The JSON report: sorted findings, NaN and infinities as null, stable bytes."""
        return json_inert(json.dumps(self.to_dict(), indent=2, ensure_ascii=False, allow_nan=False)) + "\n"

    def render(self, format: str, **settings: Any) -> str:
        """The report in any registered format (``text``, ``json``, ``sarif``, ``junit``, ``markdown``, ``html``)."""
        from .report import WriterSettings, render

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
        """One self-contained HTML page: facts, findings with why and remedy, and (with ``plots``) SVG plots."""
        return self.render("html", plots=plots)

    def _repr_html_(self) -> str:
        from .report.html import html_fragment

        return html_fragment(self)


def build_context(table: pa.Table, info: TableInfo, options: CheckOptions) -> RunContext:
    """Apply declared missing codes, resolve roles and ranges, read any scoring table: the context rules read."""
    table, replaced = apply_missing_codes(table, options.missing_codes)
    roles = resolve_roles(table, options)
    check_declared_ranges(roles, options.ranges)
    score = read_score_table(options, roles)
    baseline = load_baseline(options.baseline, options) if options.baseline is not None else None
    return RunContext(table=table, info=info, roles=roles, options=options, replaced_codes=replaced, score=score, baseline=baseline)


def context_for(table: "pa.Table | pd.DataFrame", target: str, **options: Any) -> RunContext:
    """The run context of an in-memory table, for notebooks and tests that read the shared statistics directly."""
    data, info = _as_table(table, ReadOptions())
    return build_context(data, info, options_from(target=target, **options))


def run_check(
    table: pa.Table,
    info: TableInfo,
    options: CheckOptions,
    registry: Registry | None = None,
    debug: bool = False,
    progress: RunProgress | None = None,
) -> Report:
    """Resolve roles, build the context of an in-memory table, run the selected rules and assemble the report.

    ``progress``, when given, is told the number of rules, each rule before it runs, and the end.
    """
    registry = registry if registry is not None else discover()
    selected = select_rules(registry, options)
    context = build_context(table, info, options)
    return report_for(context, registry, selected, EngineRun("memory", info.rows, info.rows), debug, progress)


def check_file(
    path: str,
    options: CheckOptions,
    engine: str = "auto",
    scheduler: str | None = None,
    debug: bool = False,
    progress: RunProgress | None = None,
    row_budget: int | None = None,
    profile: bool = False,
) -> Report:
    """Check a table file with the chosen engine (``auto``, ``memory``, ``stream`` or ``dask``).

    ``auto`` streams files larger than :data:`prefit.engines.batches.AUTO_STREAM_BYTES`;
    ``scheduler`` is the address of an existing Dask scheduler (default: a
    local cluster); ``row_budget`` caps the rows the stream and Dask engines
    keep in memory for the rules; ``profile`` has their pass 1 tally every
    column of the whole table for a baseline profile.
    """
    from .engines.batches import choose_engine

    read = ReadOptions(sep=options.sep, encoding=options.encoding)
    chosen = choose_engine(engine, path)
    try:
        return _check_with(chosen, path, read, options, scheduler, debug, progress, row_budget, profile)
    except MemoryError:
        if chosen == "memory" or path == "-":
            raise UsageProblem(path, "does not fit in this process's memory", "rerun with --engine stream, which reads the table in row batches") from None
        raise UsageProblem(path, "the rows kept for the rules do not fit in this process's memory", "lower --row-budget, e.g. --row-budget 100000") from None


def _check_with(
    chosen: str,
    path: str,
    read: ReadOptions,
    options: CheckOptions,
    scheduler: str | None,
    debug: bool,
    progress: RunProgress | None,
    row_budget: int | None,
    profile: bool,
) -> Report:
    """:func:`check_file` with the engine chosen."""
    from .engines.scaled import StreamRunner, scaled_context

    if chosen == "memory" or path == "-":
        table, info = read_table(path, read)
        # Started after the read: the reader already keeps both cores busy.
        warm_imports()
        return run_check(table, info, options, debug=debug, progress=progress)
    warm_imports()
    registry = discover()
    selected = select_rules(registry, options)
    if chosen == "stream":
        from .engines.batches import open_batches
        from .progress import pass_bars

        context, run = scaled_context(StreamRunner(open_batches(path, read), pass_bars()), options, row_budget, profile)
    else:
        from .engines.dask import DaskRunner
        from .progress import pass_bars

        with DaskRunner(path, read, scheduler, pass_bars()) as runner:
            context, run = scaled_context(runner, options, row_budget, profile)
    return report_for(context, registry, selected, run, debug, progress)


def report_for(
    context: RunContext,
    registry: Registry,
    selected: Sequence[tuple[RuleLike, RuleSettings]],
    engine: EngineRun,
    debug: bool = False,
    progress: RunProgress | None = None,
) -> Report:
    """Run the selected rules on a built context and assemble the report."""
    info, roles, replaced = context.info, context.roles, context.replaced_codes
    outcomes = []
    if progress is not None:
        progress.start(info.path, len(selected))
    try:
        # Rules run on two threads (numpy releases the interpreter lock in its loops) with BLAS on one thread,
        # so that every product sums in the same order on every run and every machine.
        with one_blas_thread(), np.errstate(all="ignore"):
            _shared_core(context)
        imports_ready()
        with one_blas_thread(), ThreadPoolExecutor(max_workers=RULE_THREADS, thread_name_prefix="prefit-rule") as pool:
            submitted = {rule.id: pool.submit(run_rule, rule, settings, context, debug) for rule, settings in heavy_first(selected)}
            for rule, _ in selected:
                future = submitted[rule.id]
                if progress is not None:
                    progress.advance(rule.id)
                outcomes.append(future.result())
    finally:
        if progress is not None:
            progress.finish()
    findings = [f for o in outcomes for f in o.findings] + [error_finding(o) for o in outcomes if o.error]
    if engine.sampled:
        measured = {SCREENED_RULES[screen.measure] for screen in engine.screens}
        screened = tuple(rule.id for rule, _ in selected if rule.id in measured)
        engine = replace(engine, on_sample=tuple(o.rule for o in outcomes), screened=screened)
    design = context.design
    ordered = sorted(findings, key=Finding.sort_key)
    prints = fingerprints(ordered, context)
    keys = [p.digest for p in prints]
    causes = find_causes(context, selected, ordered)
    linked = tuple(replace(f, key=key, explained_by=tuple(keys[i] for i in causes.explained_by[j])) for j, (f, key) in enumerate(zip(ordered, keys)))
    description = design.describe()
    description["kinds"] = {name: str(kind) for name, kind in roles.kinds.items()}
    description["left_out"] = dict(roles.left_out)
    description["id"] = roles.id
    if roles.id is not None:
        description["id_values"] = distinct_labels(context.table.column(roles.id))
    description["groups"] = group_description(context)
    if replaced:
        description["missing_codes_applied"] = dict(replaced)
    return Report(
        info=info,
        target=roles.target,
        parameters=design.p,
        complete_cases=design.n,
        design=description,
        findings=linked,
        outcomes=tuple(outcomes),
        gate=context.options.gate,
        purpose=context.options.purpose,
        engine=engine,
        fix_first=tuple(keys[i] for i in causes.fix_first),
        keyed=dict(zip(keys, prints)),
        baseline=context.baseline.describe() if context.baseline is not None else None,
        rules=tuple(registry),
        context=context,
    )


def write_baseline(report: Report, path: str | Path) -> BaselineProfile:
    """Write the baseline profile of a checked table (``--save-baseline``) and return it."""
    if report.context is None:
        raise UsageProblem("--save-baseline", "needs the statistics of a check run in this process", "run the check and save in one call")
    profile = profile_of(report.context)
    save_profile(profile, path)
    return profile


def group_description(context: RunContext) -> dict[str, Any] | None:
    """The grouping of the complete cases, said out loud: column, where it came from, groups and their sizes (None: off)."""
    roles = context.roles
    if roles.group is None:
        return None
    try:
        factors = context.group_factors
    except Exception:  # noqa: BLE001  (the design failed; every rule that reads it reports why)
        factors = None
    sizes = factors.counts if factors is not None else np.zeros(0, dtype=np.int64)
    return {
        "column": roles.group,
        "from": roles.group_origin,
        "groups": int(sizes.size),
        "sizes": {
            "min": int(sizes.min()) if sizes.size else 0,
            "median": float(np.median(sizes)) if sizes.size else 0.0,
            "max": int(sizes.max()) if sizes.size else 0,
        },
    }


def heavy_first(selected: Sequence[tuple[RuleLike, RuleSettings]]) -> list[tuple[RuleLike, RuleSettings]]:
    """The rules in the order they start: heavy rules first, each group in report order (a stable sort)."""
    return sorted(selected, key=lambda chosen: not getattr(chosen[0], "heavy", False))


def _shared_core(context: RunContext) -> None:
    """Build the design and the fit before the rules run side by side, so that no two threads build them twice.

    A failure here is left for the rules: each that needs the design meets it
    again and reports it as its own error.
    """
    try:
        context.design
        if context.target_is_numeric:
            context.fit
    except Exception:  # noqa: BLE001  (reported by every rule that reads the design)
        return


def _as_table(source: "pa.Table | pd.DataFrame | str | Path", read: ReadOptions) -> tuple[pa.Table, TableInfo]:
    if isinstance(source, (str, Path)):
        return read_table(str(source), read)
    if isinstance(source, pa.Table):
        table = decode_dictionaries(source)
    else:
        table = decode_dictionaries(pa.Table.from_pandas(source, preserve_index=False))
    if table.num_rows == 0:
        raise UsageProblem("table", "has no data rows", "give a table with at least one row")
    name = "<table>" if isinstance(source, pa.Table) else "<DataFrame>"
    return table, TableInfo(path=name, format="memory", rows=table.num_rows, columns=table.num_columns, sha256=None)


def options_from(**settings: Any) -> CheckOptions:
    """CheckOptions from keyword settings (config keys with ``_`` for ``-``, or field names)."""
    raw: dict[str, Any] = {}
    for key, value in settings.items():
        if value is None:
            continue
        config_key = key.replace("_", "-")
        if key == "fail_at":
            config_key = "gate"
        if config_key not in SETTINGS_BY_KEY and key in {f.name for f in fields(CheckOptions)}:
            config_key = next(s.key for s in SETTINGS_BY_KEY.values() if s.field == key)
        raw[config_key] = value
    return replace(CheckOptions(), **parse_settings(raw, "prefit.check"))


def apply_accepted(reports: Sequence[Report], accept_file: str | Path | None, accept_current: bool = False) -> list[Report]:
    """Move accepted findings out of the gate.

    With ``accept_current`` every current finding of ``reports`` is written to
    ``accept_file`` first (keeping the reasons of entries already there), so
    that this run and later ones gate only on new findings.
    """
    if accept_file is None:
        if accept_current:
            raise UsageProblem("--accept-current", "needs a file to write", "add --accept-file FILE")
        return list(reports)
    if accept_current:
        previous = load_accepted(accept_file) if Path(accept_file).is_file() else None
        findings = [f for r in reports for f in r.findings]
        keys = [k for r in reports for k in r.fingerprints]
        accepted = AcceptedSet.from_findings(findings, keys, previous)
        save_accepted(accepted, accept_file)
    else:
        accepted = load_accepted(accept_file)
    return [r.accepting(accepted) for r in reports]


def check(
    table: "pa.Table | pd.DataFrame | str | Path",
    target: str | None = None,
    *,
    accept_file: str | Path | None = None,
    accept_current: bool = False,
    save_baseline: str | Path | None = None,
    **options: Any,
) -> Report:
    """Vet ``table`` (a DataFrame, a pyarrow Table or a path) before fitting ``target`` on it.

    Keyword options are the configuration keys (``id``, ``exclude``,
    ``predictors``, ``categorical``, ``intercept``, ``fail_at``,
    ``skip_rules``, ``rule``, ``missing_codes``, ``sep``, ``encoding``,
    ``ranges``, ``anticipated_r2``, ``score``, ``order``, ``purpose``, ``baseline``: a
    profile written by ``save_baseline`` or the accepted table itself, to vet this table against).


    ``ranges``, ``anticipated_r2``, ``score``, ``order``, ``purpose``, ``group``).
    ``accept_file`` names an accepted-findings file: findings it lists are
    counted, not gated; with ``accept_current`` today's findings are written to it.
    ``save_baseline`` writes this table's baseline profile to that path.
    """
    opts = options_from(target=target, **options)
    if accept_file is not None and not accept_current:
        load_accepted(accept_file)
    data, info = _as_table(table, ReadOptions(sep=opts.sep, encoding=opts.encoding))
    report = run_check(data, info, opts)
    if save_baseline is not None:
        write_baseline(report, save_baseline)
    return apply_accepted([report], accept_file, accept_current)[0]


class NotReady(AssertionError):
    """Raised by :func:`require_ready` when a table has findings at or above the gate."""

    def __init__(self, report: Report) -> None:
        self.report = report
        lines = [f"{f.grade.word}: {f.rule}: {f.message}" for f in report.gated]
        if report.failed_rules:
            lines.append(f"check incomplete: rules failed: {', '.join(report.failed_rules)}")
        super().__init__("table is not ready for a linear fit:\n" + "\n".join(lines))


def require_ready(table: "pa.Table | pd.DataFrame | str | Path", target: str | None = None, fail_at: str = "misleads", **options: Any) -> Report:
    """Check ``table`` and raise :class:`NotReady` listing the findings at or above ``fail_at``."""
    report = check(table, target=target, fail_at=fail_at, **options)
    if report.exit_code != 0:
        raise NotReady(report)
    return report


GRADE_WORDS = tuple(g.word for g in GRADES_STRONGEST_FIRST)

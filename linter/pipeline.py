"""The check pipeline: read or take a table, run it through the chosen engine, run the selected rules, assemble the report."""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .accepted import RowDigester, fingerprint
from .baseline import profile_of
from .causes import find_causes
from .context import RunContext
from .design import INTERCEPT
from .engines.batches import choose_engine, open_batches
from .engines.dask import DaskRunner
from .engines.memory import build_context, memory_context
from .engines.scaled import scaled_context
from .engines.stream import StreamRunner
from .errors import UsageProblem
from .figures import (
    COOK_CONTOURS,
    MAX_LABELS,
    MAX_MAP_COLUMNS,
    MAX_MAP_ROWS,
    MAX_MATRIX_COLUMNS,
    ROBUST_RULE,
    ROW_FAMILIES,
    CollinearityView,
    FigureData,
    InfluencePoints,
    MissingMap,
    RangeBar,
    RobustPoints,
    evenly,
    frozen_view,
)
from .findings import Finding, RowLabel
from .options import CheckOptions, options_from
from .outcome import DesignDescription, DesignTerm, EngineRun, Grouping, Report, RuleOutcome
from .preload import imports_ready, warm_imports
from .progress import RunProgress, pass_bars
from .reading import ReadOptions, TableInfo, decode_dictionaries, read_table
from .registry import Registry, discover
from .roles import distinct_labels
from .rule import RuleLike, RuleSettings, rule_family
from .runner import error_finding, run_rule, select_rules
from .stats.blas import one_blas_thread
from .stats.resistant import RowClass, classify, distance_cutoff

if TYPE_CHECKING:
    import pandas as pd

RULE_THREADS = 2


@dataclass(frozen=True)
class CheckRequest:
    """One check to run: the table (a file, or a table already in memory), the options, and how to run it.

    Attributes
    ----------
    options : CheckOptions
        Everything that steers the check (target, roles, rules, gate, ...).
    path : str or None
        A table file to read (``-`` for standard input); None when ``table`` is given.
    table : pyarrow.Table or None
        A table already in memory, with its ``info``; the memory engine checks it.
    info : TableInfo or None
        The facts of ``table`` (path, format, size, digest).
    engine : str, default "auto"
        ``auto``, ``memory``, ``stream`` or ``dask`` for a file; ``auto`` streams
        files larger than :data:`prefit.engines.batches.AUTO_STREAM_BYTES`.
    scheduler : str or None
        The address of an existing Dask scheduler (default: a local cluster).
    row_budget : int or None
        The rows the stream and Dask engines keep in memory for the rules.
    profile : bool, default False
        Have pass 1 of the stream and Dask engines tally every column of the
        whole table, for a baseline profile.
    debug : bool, default False
        Print rule tracebacks and floating-point warnings.
    registry : Registry or None
        The rules to choose from (default: every installed rule).
    progress : RunProgress or None
        Told the number of rules, each rule before it runs, and the end.
    """

    options: CheckOptions
    path: str | None = None
    table: pa.Table | None = field(default=None, compare=False, repr=False)
    info: TableInfo | None = None
    engine: str = "auto"
    scheduler: str | None = None
    row_budget: int | None = None
    profile: bool = False
    debug: bool = False
    registry: Registry | None = field(default=None, compare=False, repr=False)
    progress: RunProgress | None = field(default=None, compare=False, repr=False)

    def __post_init__(self) -> None:
        if (self.path is None) == (self.table is None):
            raise ValueError("a check request names either a table file (path) or an in-memory table, not both or neither")
        if self.table is not None and self.info is None:
            raise ValueError("an in-memory table needs its TableInfo")


def run(request: CheckRequest) -> Report:
    """Run one check: read the table with the chosen engine, run the selected rules, assemble the report.

    Parameters
    ----------
    request : CheckRequest
        The table, the options and how to run them.

    Returns
    -------
    Report
        The report of the table.

    Raises
    ------
    UsageProblem
        When the table, the options or the engine cannot be used as given, or
        the rows do not fit in memory (the message says which option helps).
    """
    if request.table is not None:
        assert request.info is not None
        registry, selected = _rules(request)
        context, engine = memory_context(request.table, request.info, request.options)
        return report_for(context, registry, selected, engine, request.debug, request.progress)
    assert request.path is not None
    chosen = choose_engine(request.engine, request.path)
    read = ReadOptions(sep=request.options.sep, encoding=request.options.encoding)
    try:
        if chosen == "memory" or request.path == "-":
            table, info = read_table(request.path, read)
            # Started after the read: the reader already keeps both cores busy.
            warm_imports(table.num_columns)
            registry, selected = _rules(request)
            context, engine = memory_context(table, info, request.options)
        else:
            warm_imports()
            registry, selected = _rules(request)
            context, engine = _scaled_context(request, chosen, read, selected)
        return report_for(context, registry, selected, engine, request.debug, request.progress)
    except MemoryError:
        if chosen == "memory" or request.path == "-":
            raise UsageProblem(request.path, "does not fit in this process's memory", "rerun with --engine stream, which reads the table in row batches") from None
        raise UsageProblem(request.path, "the rows kept for the rules do not fit in this process's memory", "lower --row-budget, e.g. --row-budget 100000") from None


def _rules(request: CheckRequest) -> tuple[Registry, list[tuple[RuleLike, RuleSettings]]]:
    """The registry of the run and the rules the options select from it, each with its settings."""
    registry = request.registry if request.registry is not None else discover()
    return registry, select_rules(registry, request.options)


def _scaled_context(
    request: CheckRequest, chosen: str, read: ReadOptions, selected: Sequence[tuple[RuleLike, RuleSettings]]
) -> tuple[RunContext, EngineRun]:
    """The context and run facts of the stream or Dask engine (``chosen``) over the request's file."""
    assert request.path is not None
    if chosen == "stream":
        return scaled_context(StreamRunner(open_batches(request.path, read), pass_bars()), request.options, request.row_budget, request.profile, selected)
    with DaskRunner(request.path, read, request.scheduler, pass_bars()) as runner:
        return scaled_context(runner, request.options, request.row_budget, request.profile, selected)


def context_for(table: "pa.Table | pd.DataFrame", target: str, **options: Any) -> RunContext:
    """The run context of an in-memory table, for notebooks and tests that read the shared statistics directly."""
    data, info = as_table(table, ReadOptions())
    return build_context(data, info, options_from(target=target, **options))


def checked_context(table: "pa.Table | pd.DataFrame", target: str, **options: Any) -> tuple[Report, RunContext]:
    """The report of an in-memory table (every installed rule the options select) with the run context it was read from.

    For notebooks and tests that read the shared statistics behind a report: the report itself holds no context.
    """
    data, info = as_table(table, ReadOptions())
    request = CheckRequest(options_from(target=target, **options), table=data, info=info)
    registry, selected = _rules(request)
    context, engine = memory_context(data, info, request.options)
    return report_for(context, registry, selected, engine), context


def report_for(
    context: RunContext,
    registry: Registry,
    selected: Sequence[tuple[RuleLike, RuleSettings]],
    engine: EngineRun,
    debug: bool = False,
    progress: RunProgress | None = None,
) -> Report:
    """Run the selected rules on a built context and assemble the report."""
    info, roles = context.info, context.roles
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
        engine = replace(engine, on_sample=tuple(o.rule for o in outcomes))
    design = context.design
    ordered = sorted(findings, key=Finding.sort_key)
    digester = RowDigester(context)
    prints = [fingerprint(f, digester) for f in ordered]
    keys = [p.digest for p in prints]
    causes = find_causes(context, selected, ordered)
    linked = tuple(replace(f, key=key, explained_by=tuple(keys[i] for i in causes.explained_by[j])) for j, (f, key) in enumerate(zip(ordered, keys)))
    return Report(
        info=info,
        target=roles.target,
        parameters=design.p,
        complete_cases=design.n,
        design=design_description(context),
        findings=linked,
        outcomes=tuple(outcomes),
        gate=context.options.gate,
        purpose=context.options.purpose,
        engine=engine,
        fix_first=tuple(keys[i] for i in causes.fix_first),
        keyed=dict(zip(keys, prints)),
        row_positions=row_positions(ordered, digester),
        baseline=context.baseline.describe() if context.baseline is not None else None,
        rules=tuple(registry),
        figure_source=partial(figure_data, context, rules=tuple(registry), outcomes=tuple(outcomes), digester=digester),
        profile_source=partial(profile_of, context),
    )


def row_positions(findings: Sequence[Finding], digester: RowDigester) -> dict[RowLabel, int]:
    """The 0-based table row of each row label the findings list, for labels that name exactly one row."""
    found: dict[RowLabel, int] = {}
    for label in {label for f in findings for label in f.rows}:
        positions = digester.positions([label])
        if len(positions) == 1:
            found[label] = positions[0]
    return found


def design_description(context: RunContext) -> DesignDescription:
    """The design as built and the roles behind it, typed for the report."""
    roles, design = context.roles, context.design
    terms = tuple(
        DesignTerm(t.source, str(t.kind) if t.kind else "intercept", t.df, t.reference, tuple(t.levels) if t.reference is not None else ())
        for t in design.terms
    )
    return DesignDescription(
        intercept=design.intercept,
        coding=str(design.describe()["coding"]),
        terms=terms,
        rows_dropped=design.table_rows - design.n,
        kinds={name: str(kind) for name, kind in roles.kinds.items()},
        left_out=dict(roles.left_out),
        id=roles.id,
        id_values=distinct_labels(context.table.column(roles.id)) if roles.id is not None else None,
        groups=group_description(context),
        missing_codes_applied=dict(context.replaced_codes) if context.replaced_codes else None,
    )


def group_description(context: RunContext) -> Grouping | None:
    """The grouping of the complete cases, said out loud: column, where it came from, groups and their sizes (None: off)."""
    roles = context.roles
    if roles.group is None:
        return None
    try:
        factors = context.group_factors
    except Exception:  # noqa: BLE001  (the design failed; every rule that reads it reports why)
        factors = None
    sizes = factors.counts if factors is not None else np.zeros(0, dtype=np.int64)
    return Grouping(
        column=roles.group,
        origin=roles.group_origin,
        groups=int(sizes.size),
        smallest=int(sizes.min()) if sizes.size else 0,
        median=float(np.median(sizes)) if sizes.size else 0.0,
        largest=int(sizes.max()) if sizes.size else 0,
    )


def heavy_first(selected: Sequence[tuple[RuleLike, RuleSettings]]) -> list[tuple[RuleLike, RuleSettings]]:
    """The rules in the order they start: heavy rules first, each group in report order (a stable sort)."""
    return sorted(selected, key=lambda chosen: not chosen[0].heavy)


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


def as_table(source: "pa.Table | pd.DataFrame | str | Path", read: ReadOptions) -> tuple[pa.Table, TableInfo]:
    """An Arrow table and its facts from a DataFrame, an Arrow table or a path (read with ``read``)."""
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


def figure_data(
    context: RunContext, findings: Sequence[Finding], rules: Sequence[RuleLike], outcomes: Sequence[RuleOutcome], digester: RowDigester
) -> FigureData:
    """What the HTML report's plots draw, gathered from the run's shared statistics (never refitted here).

    Called only when a page with plots is written (:attr:`Report.figures`), so a
    check that writes no HTML computes none of it; statistics the rules already
    read are reused from the context's caches.
    """
    with one_blas_thread():
        return FigureData(
            influence=influence_points(context, findings, rules, digester),
            robust=robust_points(context, outcomes),
            missing=missing_map(context),
            collinearity=collinearity_view(context),
            ranges=range_bars(context),
        )


def cook_levels(rules: Sequence[RuleLike], n: int, rank: int, df_resid: int) -> tuple[tuple[float, str], ...]:
    """The Cook's distance levels the rule grades at, weakest first, each with its grade; fixed levels otherwise.

    The rule's ``weakens`` threshold is the numerator of a size-scaled cut-off (4/n) and its ``misleads``
    threshold a quantile of F(p, n - p) (the median); a plugin rule with other thresholds gets the fixed levels.
    """
    for rule in rules:
        if rule.id != "influence.cooks-distance":
            continue
        limits = {t.name: t.value for t in rule.thresholds if t.grade is not None}
        if {"weakens", "misleads"} <= set(limits):
            import scipy.stats

            return ((limits["weakens"] / n, "weakens"), (float(scipy.stats.f.ppf(limits["misleads"], rank, df_resid)), "misleads"))
    return tuple((level, "reference") for level in COOK_CONTOURS)


def influence_points(context: RunContext, findings: Sequence[Finding], rules: Sequence[RuleLike], digester: RowDigester) -> InfluencePoints | None:
    """Leverage, studentized residuals and Cook's distances of the complete cases, the rows to mark and their labels.

    None without a numeric target, a fit of at least one parameter and two residual degrees of freedom, or a finite row.
    """
    if not context.target_is_numeric:
        return None
    fit = context.fit
    rank, df_resid = fit.rank, fit.df_resid
    if rank == 0 or df_resid <= 1:
        return None
    shared = context.influence
    hat, studentized, cook = np.clip(shared.hat, 0.0, 1.0), shared.studentized, shared.cooks
    n = hat.size
    finite = np.flatnonzero(np.isfinite(studentized) & np.isfinite(cook))
    if finite.size == 0:
        return None
    labels = [label for f in findings if rule_family(f.rule) in ROW_FAMILIES for label in f.rows]
    named = np.asarray(digester.positions(labels), dtype=np.int64)
    rows = context.design.positions
    in_design = np.minimum(np.searchsorted(rows, named), n - 1)
    marked = np.intersect1d(in_design[rows[in_design] == named], finite)
    levels = cook_levels(rules, n, rank, df_resid)
    if marked.size == 0:
        marked = finite[cook[finite] >= levels[0][0]]
    labelled: dict[str, int] = {}
    for i in marked[np.argsort(-cook[marked], kind="stable")]:
        label = str(context.row_label(int(rows[i])))
        if label not in labelled and len(labelled) < MAX_LABELS:
            labelled[label] = int(i)
    return InfluencePoints(
        hat=frozen_view(hat),
        studentized=frozen_view(studentized),
        cooks=frozen_view(cook),
        rank=rank,
        df_resid=df_resid,
        levels=levels,
        marked=frozen_view(marked),
        labelled=tuple(labelled.items()),
    )


def robust_points(context: RunContext, outcomes: Sequence[RuleOutcome]) -> RobustPoints | None:
    """Robust distances, robust residuals and row classes, when the robust-distortion rule ran and both estimates exist."""
    if not any(o.rule == ROBUST_RULE and o.error is None and o.not_applicable is None for o in outcomes):
        return None
    resistant, robust = context.resistant, context.robust
    if resistant is None or robust is None:
        return None
    cutoff = distance_cutoff(len(robust.columns))
    distance, residual = np.sqrt(robust.squared), resistant.residual
    classes = classify(residual, robust.squared, cutoff)
    finite = np.flatnonzero(np.isfinite(distance) & np.isfinite(residual))
    if finite.size == 0:
        return None
    unusual = finite[classes[finite] != RowClass.REGULAR]
    extreme = unusual[np.argsort(-np.abs(residual[unusual]), kind="stable")][:MAX_LABELS]
    return RobustPoints(
        distance=frozen_view(distance),
        residual=frozen_view(residual),
        classes=frozen_view(classes),
        cutoff=cutoff,
        predictors=len(robust.columns),
        labelled=tuple((int(i), context.row_label(int(context.design.positions[i]))) for i in extreme),
    )


def _missing_mask(column: pa.ChunkedArray) -> np.ndarray:
    """True where a column's value is null, or NaN in a floating-point column."""
    mask = np.asarray(column.is_null().to_numpy(zero_copy_only=False), dtype=bool)
    if pa.types.is_floating(column.type):
        mask |= np.asarray(pc.fill_null(pc.is_nan(column), False).to_numpy(zero_copy_only=False), dtype=bool)
    return mask


def missing_map(context: RunContext) -> MissingMap:
    """Missing values per column over every row, and their map on evenly spaced rows (model columns first)."""
    table = context.table
    model = list(context.model_columns)
    columns = (model + [c for c in table.column_names if c not in model])[:MAX_MAP_COLUMNS]
    picked = evenly(np.arange(table.num_rows), MAX_MAP_ROWS)
    masks = [_missing_mask(table.column(c)) for c in columns]
    return MissingMap(
        columns=tuple(columns),
        counts=tuple(int(m.sum()) for m in masks),
        rows=frozen_view(picked),
        mask=frozen_view(np.column_stack([m[picked] for m in masks])),
        table_rows=table.num_rows,
        table_columns=table.num_columns,
        complete_cases=context.design.n,
    )


def collinearity_view(context: RunContext) -> CollinearityView | None:
    """Correlations of the design's predictor columns and each term's inflation; None below 3 complete cases or 2 columns."""
    if context.design.n < 3:
        return None
    shared = context.collinearity
    kept = list(shared.predictor_names())
    exact = [shared.design_names[j] for j in shared.left_out if shared.design_names[j] != INTERCEPT]
    shown = min(len(kept), MAX_MATRIX_COLUMNS)
    names = kept[:shown] + exact[: MAX_MATRIX_COLUMNS - shown]
    if len(names) < 2:
        return None
    graded = {term.term: term.vif_scale for term in shared.terms}
    left_out = {shared.design_names[j] for j in shared.left_out}
    terms: list[str] = []
    inflation: list[float] = []
    for term in context.design.terms:
        if term.source == INTERCEPT or not term.columns:
            continue
        if term.source in graded:
            terms.append(term.source)
            inflation.append(graded[term.source])
        elif left_out.intersection(term.columns):
            terms.append(term.source)
            inflation.append(np.inf)
    return CollinearityView(
        names=tuple(names),
        shown=shown,
        correlation=frozen_view(shared.correlation[:shown, :shown]),
        columns=len(kept) + len(exact),
        terms=tuple(terms[:MAX_MATRIX_COLUMNS]),
        inflation=frozen_view(np.asarray(inflation[:MAX_MATRIX_COLUMNS], dtype=float)),
    )


def range_bars(context: RunContext) -> tuple[RangeBar, ...]:
    """Observed ends and 5th to 95th percentiles of the first numeric predictors, beside their declared intended ranges."""
    bars = []
    for name in list(context.numeric_predictors)[:MAX_MATRIX_COLUMNS]:
        values = context.values(name)
        values = values[np.isfinite(values)]
        observed = None
        if values.size:
            inner = np.percentile(values, [5, 95])
            observed = (float(values.min()), float(values.max()), float(inner[0]), float(inner[1]))
        bars.append(RangeBar(name, observed, context.options.ranges.get(name)))
    return tuple(bars)

"""The check pipeline: read or take a table, run it through the chosen engine, run the selected rules, assemble the report."""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np
import pyarrow as pa

from .accepted import fingerprints
from .causes import find_causes
from .context import RunContext
from .engines.batches import choose_engine, open_batches
from .engines.dask import DaskRunner
from .engines.memory import build_context, memory_context
from .engines.scaled import scaled_context
from .engines.stream import StreamRunner
from .errors import UsageProblem
from .findings import Finding
from .options import CheckOptions, options_from
from .outcome import EngineRun, Report
from .preload import imports_ready, warm_imports
from .progress import RunProgress, pass_bars
from .reading import ReadOptions, TableInfo, decode_dictionaries, read_table
from .registry import Registry, discover
from .roles import distinct_labels
from .rule import RuleLike, RuleSettings
from .runner import error_finding, run_rule, select_rules
from .stats.blas import one_blas_thread

if TYPE_CHECKING:
    import pandas as pd

RULE_THREADS = 2


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
    context, run = memory_context(table, info, options)
    return report_for(context, registry, selected, run, debug, progress)


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
    if chosen == "memory" or path == "-":
        table, info = read_table(path, read)
        # Started after the read: the reader already keeps both cores busy.
        warm_imports()
        return run_check(table, info, options, debug=debug, progress=progress)
    warm_imports()
    registry = discover()
    selected = select_rules(registry, options)
    if chosen == "stream":
        context, run = scaled_context(StreamRunner(open_batches(path, read), pass_bars()), options, row_budget, profile, selected)
    else:
        with DaskRunner(path, read, scheduler, pass_bars()) as runner:
            context, run = scaled_context(runner, options, row_budget, profile, selected)
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
        engine = replace(engine, on_sample=tuple(o.rule for o in outcomes))
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

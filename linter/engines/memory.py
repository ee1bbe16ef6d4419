"""The memory engine: the whole table read at once; and the run context every engine builds from the rows it keeps."""

from __future__ import annotations

from dataclasses import replace

import pyarrow as pa

from ..baseline import BaselineProfile, profile_of, read_profile
from ..context import RunContext
from ..errors import UsageProblem
from ..options import CheckOptions
from ..outcome import EngineRun
from ..reading import ReadOptions, TableInfo, read_table
from ..roles import apply_missing_codes, resolve_roles
from ..scoring import check_declared_ranges, read_score_table


def build_context(table: pa.Table, info: TableInfo, options: CheckOptions) -> RunContext:
    """Apply declared missing codes, resolve roles and ranges, read any scoring table and baseline: the context rules read."""
    table, replaced = apply_missing_codes(table, options.missing_codes)
    roles = resolve_roles(table, options)
    check_declared_ranges(roles, options.ranges)
    score = read_score_table(options, roles)
    baseline = baseline_for(options) if options.baseline is not None else None
    return RunContext(table=table, info=info, roles=roles, options=options, replaced_codes=replaced, score=score, baseline=baseline)


def baseline_for(options: CheckOptions) -> BaselineProfile:
    """The baseline ``options`` name: a profile file written by ``--save-baseline``, or a table profiled now with the same options."""
    assert options.baseline is not None
    path = options.baseline
    profile = read_profile(path)
    if profile is not None:
        return profile
    try:
        table, info = read_table(path, ReadOptions(sep=options.sep, encoding=options.encoding))
        context = build_context(table, info, replace(options, baseline=None, score=None))
    except UsageProblem as problem:
        raise UsageProblem(f"--baseline {problem.where}", problem.problem, problem.fix) from None
    return replace(profile_of(context), origin=path, digest=info.sha256)


def memory_context(table: pa.Table, info: TableInfo, options: CheckOptions) -> tuple[RunContext, EngineRun]:
    """The context of a table held whole in memory, and the engine's run facts: every row seen by every rule."""
    return build_context(table, info, options), EngineRun("memory", info.rows, info.rows)

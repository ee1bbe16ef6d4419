"""The two-pass driver the stream and Dask engines share (the memory engine reads the table whole: :mod:`.memory`).

All three engines run the same rules on a :class:`~prefit.context.RunContext`. The
stream and Dask engines run the same pass functions (:mod:`prefit.engines.passes`)
per batch or partition, through a :class:`PassRunner`, and merge their results:

- the kept rows (:class:`KeptRows`): the whole table while it fits the row
  budget, which the rules then see exactly as the memory engine would, with
  the fit taken from the merged batch factors; beyond the budget, a sample
  of rows chosen by a seeded hash of their position, on which every rule
  runs (the report says so and how large);
- pass 1 (:func:`prefit.engines.passes.first_pass`), the whole table's R factor,
  and its column tallies when the rules see every row;
- pass 2 (:func:`prefit.engines.passes.second_pass`), only when the rules ran on a
  sample: every complete row scored against the whole table's fit and
  measured against the sample's robust centre, for the measures the selected
  rules screen (:attr:`prefit.rule.RuleLike.screen`), at their configured cutoffs.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Mapping, Protocol, Sequence

import numpy as np
import pyarrow as pa

from ..context import RunContext
from ..errors import UsageProblem
from ..options import CheckOptions
from ..outcome import EngineRun
from ..reading import TableInfo
from ..roles import Kind, apply_missing_codes
from ..rule import SCREEN_MEASURES, Cutoffs, RuleLike, RuleSettings, ScreenScale
from ..stats.batched import TableStatistics, merge_all
from ..stats.fit import PreliminaryFit
from ..stats.positions import position_hashes
from ..stats.screens import ColumnFences, MeasureScreen, RobustCentre
from .batches import BATCH_ROWS
from .memory import build_context
from .passes import first_pass, merge_screens, second_pass

SAMPLE_CELLS = 6_000_000
SAMPLE_SEED = 0x5EED_0F_1E1D


@dataclass(frozen=True)
class KeptRows:
    """Rows kept in memory for the rules: all rows while within ``limit`` rows, else the ``limit`` rows of smallest hash.

    The hash is that of each row's position (:func:`prefit.stats.positions.position_hashes`),
    so the sample is uniform and the same for any batching.

    Merging keeps table order; ``seen`` counts every row passed in.
    """

    table: pa.Table
    positions: np.ndarray
    hashes: np.ndarray
    seen: int
    limit: int

    @classmethod
    def of(cls, batch: pa.Table, offset: int, limit: int) -> "KeptRows":
        """The rows of one batch whose first row is table row ``offset``."""
        positions = np.arange(offset, offset + batch.num_rows, dtype=np.int64)
        return cls(batch, positions, position_hashes(positions, SAMPLE_SEED), batch.num_rows, limit)._pruned()

    @property
    def whole(self) -> bool:
        """Whether every row seen is kept."""
        return self.table.num_rows == self.seen

    def merge(self, other: "KeptRows") -> "KeptRows":
        """Both parts, this one first in table order."""
        table = pa.concat_tables([self.table, other.table], promote_options="permissive")
        return KeptRows(
            table,
            np.concatenate([self.positions, other.positions]),
            np.concatenate([self.hashes, other.hashes]),
            self.seen + other.seen,
            self.limit,
        )._pruned()

    def _pruned(self) -> "KeptRows":
        if self.table.num_rows <= self.limit:
            return self
        chosen = np.sort(np.argpartition(self.hashes, self.limit - 1)[: self.limit])
        return KeptRows(self.table.take(chosen), self.positions[chosen], self.hashes[chosen], self.seen, self.limit)


class PassRunner(Protocol):
    """Runs a function over every row batch of the table (with the batch's first table position) and merges the results.

    ``reads_in_process`` is True when the batches are read in this process:
    once every row is kept in memory, pass 1 then runs over the kept rows
    instead of reading the file again (a cluster keeps its own partitions).
    """

    name: str
    reads_in_process: bool

    def map_merge(self, task: Callable[[pa.Table, int], Any], merge: Callable[[Sequence[Any]], Any], label: str) -> Any: ...

    def info(self, rows: int, columns: int) -> TableInfo: ...

    def columns(self) -> int: ...


def conformed(batch: pa.Table, schema: pa.Schema, codes: Any) -> pa.Table:
    """A batch with the declared missing codes applied and each column cast to the kept rows' type."""
    batch, _ = apply_missing_codes(batch, codes)
    if batch.schema.equals(schema):
        return batch
    try:
        return batch.cast(schema, safe=False)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError) as exc:
        raise UsageProblem("table", f"changes a column's type part way through ({str(exc).splitlines()[0]})", "give every column one type, or use --engine memory") from None


def keep_rows(runner: PassRunner, limit: int) -> KeptRows:
    """Read the table once: every row while within ``limit`` rows, else the hashed sample."""
    return runner.map_merge(lambda batch, offset: KeptRows.of(batch, offset, limit), merge_all, "reading")


def scaled_context(
    runner: PassRunner,
    options: CheckOptions,
    row_budget: int | None = None,
    tallies: bool = False,
    selected: Sequence[tuple[RuleLike, RuleSettings]] = (),
) -> tuple[RunContext, EngineRun]:
    """Run the passes of the stream or Dask engine and build the context the rules read.

    Within the row budget (``row_budget`` rows, default ``SAMPLE_CELLS``
    cells) the context holds every row, and its column summaries and R factor
    are the merged pass-1 statistics; beyond it, the context holds the hashed
    sample and pass 2 screens every row against the whole table's fit.
    ``tallies`` has pass 1 tally every column even beyond the budget (for a
    baseline profile); the merged statistics are on the context as ``whole_statistics``.
    Pass 2 screens the measures the ``selected`` rules declare
    (:attr:`prefit.rule.RuleLike.screen`), at the cutoffs their configured thresholds give.
    """
    limit = row_budget if row_budget is not None else max(1, SAMPLE_CELLS // max(1, runner.columns()))
    kept = keep_rows(runner, limit)
    info = runner.info(kept.seen, kept.table.num_columns)
    context = build_context(kept.table, info, options)
    roles, intercept, schema, codes = context.roles, options.intercept, context.table.schema, options.missing_codes
    # The pass functions travel to every Dask partition: they close over small settings only, never the kept rows.
    whole = kept.whole

    def pass_one(batch: pa.Table, offset: int) -> TableStatistics:
        return first_pass(conformed(batch, schema, codes), roles, intercept, tallies=whole or tallies)

    if kept.whole and runner.reads_in_process:
        # Every row is already in memory: pass 1 runs over the kept rows' batches instead of reading the file again.
        statistics = merge_all([first_pass(batch, roles, intercept) for batch in _batches(context.table)])
    else:
        statistics = runner.map_merge(pass_one, merge_all, "pass 1")
    context.whole_statistics = statistics
    if kept.whole:
        context.statistics = statistics
        return context, EngineRun(runner.name, kept.seen, kept.seen, statistics.model.rows)
    context.file_positions = kept.positions
    context.table_model = statistics.model
    screens: tuple[MeasureScreen, ...] = ()
    declared = [(rule, settings, rule.screen) for rule, settings in selected if rule.screen is not None]
    wanted = {screen.measure for _, _, screen in declared}
    fit = whole_fit(statistics, roles.kinds, intercept) if context.target_is_numeric else None
    if fit is not None and not (fit.rank > 0 and fit.df_resid > 1):
        fit = None
    terms = statistics.model.terms(roles.kinds) if fit is not None else ()
    robust = robust_centre(context) if fit is not None and "robust_distance" in wanted else None
    line = context.resistant if fit is not None and robust is not None and "robust_residual" in wanted else None
    resistant = (line, context.design.terms) if line is not None else None
    fences = column_fences(context) if "fence_score" in wanted else None
    if fit is not None:
        bulk = context.robust.bulk if robust is not None and context.robust is not None else None
        scale = ScreenScale(fit.n, fit.rank, fit.df_resid, len(robust.columns) if robust is not None else 0, bulk)
    else:
        scale = ScreenScale(statistics.model.rows, 0, 0)
    measurable = {"fence_score"} if fit is None else set(SCREEN_MEASURES)
    cutoffs: dict[str, Cutoffs] = {}
    for _, settings, screen in declared:
        if screen.measure in measurable:
            counted = tuple((name, float(value)) for name, value in screen.cutoffs(scale, settings))
            cutoffs[screen.measure] = cutoffs.get(screen.measure, ()) + counted
    if fit is not None or fences is not None:

        def pass_two(batch: pa.Table, offset: int) -> tuple[MeasureScreen, ...]:
            return second_pass(conformed(batch, schema, codes), offset, roles, terms, fit, robust, fences, resistant, cutoffs)

        screens = runner.map_merge(pass_two, merge_screens, "pass 2")
    measured = {screen.measure for screen in screens}
    screened = tuple(rule.id for rule, _, screen in declared if screen.measure in measured)
    return context, EngineRun(runner.name, kept.seen, kept.table.num_rows, statistics.model.rows, screens, screened=screened, fences=fences)


def column_fences(context: RunContext) -> ColumnFences | None:
    """The sample's adjusted-boxplot fences of each column ``outliers.univariate`` measures (those with a nonzero IQR), or None."""
    kept = [(name, fence) for name in context.value_screened_columns if (fence := context.fences(name)) is not None]
    if not kept:
        return None
    return ColumnFences(
        columns=tuple(name for name, _ in kept),
        fences=tuple(fence for _, fence in kept),
        sample_values=tuple(int(np.count_nonzero(np.isfinite(context.values(name)))) for name, _ in kept),
    )


def robust_centre(context: RunContext) -> RobustCentre | None:
    """The sample's MCD location and scatter (:attr:`RunContext.robust`, the estimate ``outliers.multivariate`` reads), or None.

    Pass 2 then measures every complete row of the table against it. The
    context decides whether the sample can carry the estimate (two columns,
    enough rows per column); the engine keeps no rule of its own about it.
    """
    names = context.robust_columns.names
    estimate = context.robust
    if estimate is None:
        return None
    return RobustCentre(names, estimate.location, estimate.scatter)


def _batches(table: pa.Table) -> list[pa.Table]:
    return [pa.Table.from_batches([batch], schema=table.schema) for batch in table.to_batches(max_chunksize=BATCH_ROWS)]


def whole_fit(statistics: TableStatistics, kinds: Mapping[str, Kind], intercept: bool) -> PreliminaryFit:
    """The least-squares fit of the whole table from its merged pass-1 factor."""
    factor = statistics.model.design_factor(statistics.model.terms(kinds))
    tss = statistics.model.total_sum_of_squares(intercept)
    return PreliminaryFit(factor, tss, intercept)

"""The three engines: read the table whole (memory), in row batches (stream), or in partitions on Dask (dask).

All three run the same rules on a :class:`~prefit.context.RunContext`. The
stream and Dask engines run the same pass functions (:mod:`prefit.passes`)
per batch or partition and merge their results:

- the kept rows (:class:`KeptRows`): the whole table while it fits the row
  budget, which the rules then see exactly as the memory engine would, with
  the fit taken from the merged batch factors; beyond the budget, a sample
  of rows chosen by a seeded hash of their position, on which every rule
  runs (the report says so and how large);
- pass 1 (:func:`prefit.passes.first_pass`), the whole table's R factor,
  and its column tallies when the rules see every row;
- pass 2 (:func:`prefit.passes.second_pass`), only when the rules ran on a
  sample: every complete row scored against the whole table's fit and
  measured against the sample's robust centre.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Mapping, Protocol, Sequence

import numpy as np
import pyarrow as pa

from .batches import BATCH_ROWS, BatchSource
from .errors import UsageProblem
from .options import CheckOptions
from .passes import (
    FENCE_CONFIDENCE,
    ROBUST_QUANTILE,
    ColumnFences,
    MeasureScreen,
    RobustCentre,
    TableStatistics,
    first_pass,
    merge_all,
    merge_screens,
    second_pass,
)
from .reading import TableInfo
from .roles import Kind, apply_missing_codes
from .stats.fit import PreliminaryFit
from .stats.positions import position_hashes

if TYPE_CHECKING:
    from .context import RunContext

SAMPLE_CELLS = 6_000_000
ROWS_PER_VARIABLE = 5
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


@dataclass
class StreamRunner:
    """Batches read one at a time from the file, in order, with a progress bar per pass on a terminal."""

    source: BatchSource
    progress: Callable[[str, int | None], Any] | None = None
    name: str = "stream"
    reads_in_process: bool = True

    def map_merge(self, task: Callable[[pa.Table, int], Any], merge: Callable[[Sequence[Any]], Any], label: str) -> Any:
        results: list[Any] = []
        offset = 0
        bar = self.progress(label, self.source.rows) if self.progress is not None else None
        try:
            for batch in self.source.batches():
                results.append(task(batch, offset))
                offset += batch.num_rows
                if bar is not None:
                    bar.advance(batch.num_rows)
                # Merge as we go so that memory holds two results, not one per batch.
                if len(results) == 2:
                    results = [merge(results)]
        finally:
            if bar is not None:
                bar.finish()
        if not results:
            raise UsageProblem(self.source.path, "has a header but no data rows", "give a table with at least one data row")
        return merge(results)

    def info(self, rows: int, columns: int) -> TableInfo:
        return self.source.info(rows, columns)

    def columns(self) -> int:
        return len(self.source.schema())


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
    runner: PassRunner, options: CheckOptions, row_budget: int | None = None, tallies: bool = False
) -> tuple[RunContext, EngineRun]:
    """Run the passes of the stream or Dask engine and build the context the rules read.

    Within the row budget (``row_budget`` rows, default ``SAMPLE_CELLS``
    cells) the context holds every row, and its column summaries and R factor
    are the merged pass-1 statistics; beyond it, the context holds the hashed
    sample and pass 2 screens every row against the whole table's fit.
    ``tallies`` has pass 1 tally every column even beyond the budget (for a
    baseline profile); the merged statistics are on the context as ``whole_statistics``.
    """
    from .api import build_context

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
    fit = whole_fit(statistics, roles.kinds, intercept) if context.target_is_numeric else None
    if fit is not None and not (fit.rank > 0 and fit.df_resid > 1):
        fit = None
    terms = statistics.model.terms(roles.kinds) if fit is not None else ()
    robust = robust_centre(context) if fit is not None else None
    line = context.resistant if fit is not None and robust is not None else None
    resistant = (line, context.design.terms) if line is not None else None
    fences = column_fences(context)
    if fit is not None or fences is not None:

        def pass_two(batch: pa.Table, offset: int) -> tuple[MeasureScreen, ...]:
            return second_pass(conformed(batch, schema, codes), offset, roles, terms, fit, robust, fences, resistant)

        screens = runner.map_merge(pass_two, merge_screens, "pass 2")
    return context, EngineRun(runner.name, kept.seen, kept.table.num_rows, statistics.model.rows, screens, fences=fences)


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

    Pass 2 then measures every complete row of the table against it.
    """
    names = context.robust_columns.names
    if len(names) < 2 or context.design.n < ROWS_PER_VARIABLE * len(names):
        return None
    estimate = context.robust
    if estimate is None:
        return None
    bulk = estimate.cutoff(ROBUST_QUANTILE) if estimate.bulk is not None else None
    return RobustCentre(names, estimate.location, estimate.scatter, bulk)


def _batches(table: pa.Table) -> list[pa.Table]:
    return [pa.Table.from_batches([batch], schema=table.schema) for batch in table.to_batches(max_chunksize=BATCH_ROWS)]


def whole_fit(statistics: TableStatistics, kinds: Mapping[str, Kind], intercept: bool) -> PreliminaryFit:
    """The least-squares fit of the whole table from its merged pass-1 factor."""
    factor = statistics.model.design_factor(statistics.model.terms(kinds))
    tss = statistics.model.total_sum_of_squares(intercept)
    return PreliminaryFit(factor, tss, intercept)

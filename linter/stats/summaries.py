"""Per-column summaries of the whole table (all rows, not only complete cases), merged across row batches."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..roles import Kind, numeric_values
from .mergeable import Moments

DISTINCT_CAP = 10_000


@dataclass(frozen=True)
class ColumnSummary:
    """Counts, moments and the most frequent value of one column.

    ``missing`` counts nulls; ``nonfinite`` counts NaN and infinities in
    numeric columns (present in the file but unusable in a fit).
    """

    name: str
    kind: Kind
    rows: int
    missing: int
    nonfinite: int
    distinct: int
    mode: str | None
    mode_count: int
    moments: Moments

    @property
    def usable(self) -> int:
        """Values present and finite."""
        return self.rows - self.missing - self.nonfinite


@dataclass(frozen=True)
class ColumnTally:
    """The mergeable part of a column summary: counts, moments and value counts up to a cap.

    ``counts`` maps each distinct present value to its count, in order of
    first appearance; it becomes None once more than ``DISTINCT_CAP`` values
    are seen (the distinct count and mode are then taken from the rows kept
    in memory). Merging batches in table order keeps first-appearance order,
    so ties for the mode break as they do over the whole column.
    """

    rows: int
    missing: int
    nonfinite: int
    moments: Moments
    counts: Mapping[object, int] | None

    @classmethod
    def of(
        cls, column: pa.ChunkedArray | pa.Array, kind: Kind, cap: int | None = DISTINCT_CAP, values: np.ndarray | None = None
    ) -> "ColumnTally":
        """Tally one column (or one batch of it); ``cap=None`` counts every distinct value, ``cap=0`` none.

        ``values`` is the column already converted to float64, when the caller has it.
        """
        rows = len(column)
        missing = column.null_count
        moments = Moments.empty()
        nonfinite = 0
        if kind in (Kind.NUMERIC, Kind.BOOLEAN) or (kind is Kind.CATEGORICAL and _is_number_type(column.type)):
            if values is None:
                values = numeric_values(column if isinstance(column, pa.ChunkedArray) else pa.chunked_array([column]))
            finite = np.isfinite(values)
            nonfinite = int(np.count_nonzero(~finite)) - missing
            moments = Moments.of(values[finite])
        return cls(rows, missing, nonfinite, moments, None if cap == 0 else _value_counts(column, cap))

    def merge(self, other: "ColumnTally", cap: int | None = DISTINCT_CAP) -> "ColumnTally":
        """The tally of both batches, this one first."""
        counts: dict[object, int] | None = None
        if self.counts is not None and other.counts is not None:
            counts = dict(self.counts)
            for value, count in other.counts.items():
                counts[value] = counts.get(value, 0) + count
            if cap is not None and len(counts) > cap:
                counts = None
        return ColumnTally(self.rows + other.rows, self.missing + other.missing, self.nonfinite + other.nonfinite, self.moments.merge(other.moments), counts)

    def summary(self, name: str, kind: Kind, column: pa.ChunkedArray | None = None) -> ColumnSummary:
        """The summary; ``column`` (all rows) gives the distinct count and mode when the tally passed its cap."""
        counts = self.counts
        if counts is None and column is not None:
            counts = _value_counts(column, None)
        distinct, mode, mode_count = _mode(counts or {})
        return ColumnSummary(name, kind, self.rows, self.missing, self.nonfinite, distinct, mode, mode_count, self.moments)


def summarise(name: str, column: pa.ChunkedArray, kind: Kind, values: np.ndarray | None = None) -> ColumnSummary:
    """Summarise one whole column in one pass of Arrow kernels (``values``: the column as float64, when known)."""
    tally = ColumnTally.of(column, kind, cap=0, values=values)
    distinct, mode, mode_count = _arrow_mode(column)
    return ColumnSummary(name, kind, tally.rows, tally.missing, tally.nonfinite, distinct, mode, mode_count, tally.moments)


def _is_number_type(t: pa.DataType) -> bool:
    return bool(pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t))


_NAN = float("nan")


def _value_counts(column: pa.ChunkedArray | pa.Array, cap: int | None) -> dict[object, int] | None:
    if pa.types.is_null(column.type) or column.null_count == len(column):
        return {}
    counts = pc.value_counts(column.drop_null())
    if cap is not None and len(counts) > cap:
        return None
    values = counts.field("values").to_pylist()
    tallies = counts.field("counts").to_numpy()
    # One NaN object, so that NaN counts of different batches merge as one value.
    return {(_NAN if v != v else v): int(t) for v, t in zip(values, tallies)}


def _label(value: object) -> str:
    return str(int(value)) if isinstance(value, float) and value.is_integer() else str(value)


def _mode(counts: Mapping[object, int]) -> tuple[int, str | None, int]:
    if not counts:
        return 0, None, 0
    top, top_count = None, -1
    for value, count in counts.items():
        if count > top_count:
            top, top_count = value, count
    return len(counts), _label(top), top_count


def _arrow_mode(column: pa.ChunkedArray) -> tuple[int, str | None, int]:
    if pa.types.is_null(column.type) or column.null_count == len(column):
        return 0, None, 0
    counts = pc.value_counts(column.drop_null())
    tallies = counts.field("counts").to_numpy()
    best = int(np.argmax(tallies))
    return len(counts), _label(counts.field("values")[best].as_py()), int(tallies[best])

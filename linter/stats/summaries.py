"""Per-column summaries of the whole table (all rows, not only complete cases)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..roles import Kind, numeric_values
from .mergeable import Moments


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


def summarise(name: str, column: pa.ChunkedArray, kind: Kind) -> ColumnSummary:
    """Summarise one column in one pass of Arrow kernels."""
    rows = len(column)
    missing = column.null_count
    moments = Moments.empty()
    nonfinite = 0
    if kind in (Kind.NUMERIC, Kind.BOOLEAN) or (kind is Kind.CATEGORICAL and _is_number_type(column.type)):
        values = numeric_values(column)
        finite = np.isfinite(values)
        nonfinite = int(np.count_nonzero(~finite)) - missing
        moments = Moments.of(values[finite])
    distinct, mode, mode_count = _mode(column)
    return ColumnSummary(name, kind, rows, missing, nonfinite, distinct, mode, mode_count, moments)


def _is_number_type(t: pa.DataType) -> bool:
    return bool(pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t))


def _mode(column: pa.ChunkedArray) -> tuple[int, str | None, int]:
    if pa.types.is_null(column.type) or column.null_count == len(column):
        return 0, None, 0
    counts = pc.value_counts(column.drop_null())
    values = counts.field("values")
    tallies = counts.field("counts").to_numpy()
    best = int(np.argmax(tallies))
    top = values[best].as_py()
    label = str(int(top)) if isinstance(top, float) and top.is_integer() else str(top)
    return len(counts), label, int(tallies[best])

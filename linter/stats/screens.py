"""Mergeable screens of per-row measures: pass 2 of the stream and Dask engines counts every row of the table beyond each cutoff.

The robust centre and the column fences are the sample's estimates that
pass 2 measures every row against.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .distribution import dkw_rank_error
from .skewed import AdjustedFences

TOP_ROWS = 20
FENCE_CONFIDENCE = 0.99


@dataclass(frozen=True)
class Cutoff:
    """One cutoff of a per-row measure and how many complete rows lie beyond it."""

    name: str
    value: float
    beyond: int


@dataclass(frozen=True)
class MeasureScreen:
    """How far the rows of one per-row measure go: counts beyond each cutoff and the most extreme rows."""

    measure: str
    cutoffs: tuple[Cutoff, ...]
    top_values: np.ndarray = field(repr=False)
    top_positions: np.ndarray = field(repr=False)
    top_labels: tuple[str | int, ...] = ()
    column: str | None = None

    @property
    def key(self) -> str:
        """The measure, and the column for a per-column measure (``fence_score:kwh``)."""
        return self.measure if self.column is None else f"{self.measure}:{self.column}"

    def merge(self, other: "MeasureScreen") -> "MeasureScreen":
        """Both batches: counts add, the most extreme rows of either stay (ties: earlier row first)."""
        cutoffs = tuple(Cutoff(a.name, a.value, a.beyond + b.beyond) for a, b in zip(self.cutoffs, other.cutoffs))
        values = np.concatenate([self.top_values, other.top_values])
        positions = np.concatenate([self.top_positions, other.top_positions])
        labels = self.top_labels + other.top_labels
        keep = np.lexsort((positions, -values))[:TOP_ROWS]
        return MeasureScreen(self.measure, cutoffs, values[keep], positions[keep], tuple(labels[i] for i in keep) if labels else (), self.column)

    def to_dict(self) -> dict[str, object]:
        """Plain JSON types: cutoffs with counts, and the top rows (label or 1-based row number, value)."""
        shown = self.top_labels or tuple(int(p) + 1 for p in self.top_positions)
        return {
            **({"column": self.column} if self.column is not None else {}),
            "cutoffs": [{"name": c.name, "value": c.value, "rows_beyond": c.beyond} for c in self.cutoffs],
            "top_rows": [
                {"row": label, "row_number": int(p) + 1, "value": float(v)} for label, p, v in zip(shown, self.top_positions, self.top_values)
            ],
        }


@dataclass(frozen=True)
class RobustCentre:
    """A robust location and scatter of some numeric predictors (MCD on the sample), to measure every row against."""

    columns: tuple[str, ...]
    location: np.ndarray
    scatter: np.ndarray


@dataclass(frozen=True)
class ColumnFences:
    """The adjusted-boxplot fences of numeric columns in the sample, to screen every value of the table against.

    Beyond the row budget the sample the rules see is a uniform sample of
    rows, and it is the quantile sketch: by the Dvoretzky-Kiefer-Wolfowitz
    inequality with Massart's constant, a column's empirical distribution over
    its ``m`` sample values is within ``rank_error`` of the whole table's at
    every value, with probability :data:`FENCE_CONFIDENCE`. So the sample
    quartiles' ranks in the whole table are within ``rank_error`` of one
    quarter and three quarters.

    References
    ----------
    Dvoretzky, A., Kiefer, J., Wolfowitz, J. (1956). Ann. Math. Stat. 27(3), 642-669.
    Massart, P. (1990). The tight constant in the DKW inequality. Ann. Probab. 18(3), 1269-1283.
    """

    columns: tuple[str, ...]
    fences: tuple[AdjustedFences, ...]
    sample_values: tuple[int, ...]

    def rank_error(self, column: str) -> float:
        """The largest gap between the sample's and the table's distribution of ``column`` at confidence 0.99."""
        return dkw_rank_error(self.sample_values[self.columns.index(column)], FENCE_CONFIDENCE)

    def to_dict(self) -> dict[str, object]:
        """Plain JSON types: per column, the sample's quartiles, medcouple and fences, its values and the rank error bound."""
        return {
            "from": "the uniform sample of rows the rules ran on",
            "confidence": FENCE_CONFIDENCE,
            "bound": "Dvoretzky-Kiefer-Wolfowitz inequality with Massart's constant (1990): rank error sqrt(ln(2 / (1 - confidence)) / (2 m))",
            "columns": {
                name: {**fence.to_dict(), "sample_values": m, "rank_error": dkw_rank_error(m, FENCE_CONFIDENCE)}
                for name, fence, m in zip(self.columns, self.fences, self.sample_values)
            },
        }

"""A column's distribution kept in a few hundred numbers, and how far another column's values have moved from it.

A :class:`Distribution` is the empirical distribution function (ECDF) of a
numeric column, exact when the column has few distinct values and otherwise
a sketch of evenly spaced order statistics whose ECDF is within a stated rank
error of the column's at every value. It is what a baseline profile keeps of
a numeric column, and what the drift rules compare a new extract with: the
two-sample Kolmogorov-Smirnov distance and the population stability index
(PSI) over the baseline's deciles.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

SKETCH_POINTS = 512
SAMPLE_CONFIDENCE = 0.99
PSI_BINS = 10
EMPTY_BIN_COUNT = 0.5


@dataclass(frozen=True)
class Distribution:
    """The ECDF of ``count`` finite values: distinct ``points`` and how many of ``rank_total`` lie at or below each.

    ``rank_total`` is ``count`` for an exact distribution and the number of
    order statistics for a sketch, so that the ranks are whole numbers.

    ``rank_error`` bounds ``|G(x) - F(x)|`` at every ``x``, where ``G`` is this
    ECDF and ``F`` that of the values it describes: 0 when exact. A sketch of
    ``K`` order statistics at ranks ``floor((j + 1/2) n / K)`` has
    ``|G - F| <= 1 / (2K)``; a sketch of a uniform sample of the values adds
    that sample's own Dvoretzky-Kiefer-Wolfowitz bound.
    """

    points: np.ndarray
    ranks: np.ndarray
    rank_total: int
    count: int
    rank_error: float

    @classmethod
    def of(cls, values: np.ndarray, limit: int | None = SKETCH_POINTS, sample_error: float = 0.0) -> "Distribution":
        """The distribution of the finite entries of ``values``: exact up to ``limit`` distinct values, else a sketch.

        ``limit=None`` keeps every distinct value. ``sample_error`` is the rank
        error of ``values`` themselves when they are a sample of a longer column.
        """
        x = np.sort(np.asarray(values, dtype=np.float64)[np.isfinite(values)])
        n = int(x.size)
        if n == 0:
            return cls(np.zeros(0), np.zeros(0, dtype=np.int64), 1, 0, 0.0)
        starts = np.flatnonzero(np.concatenate([[True], x[1:] != x[:-1]]))
        if limit is None or starts.size <= limit:
            ends = np.concatenate([starts[1:], [n]])
            return cls(x[starts], ends.astype(np.int64), n, n, sample_error)
        picked = x[np.floor((np.arange(limit) + 0.5) * n / limit).astype(np.int64)]
        points, counts = np.unique(picked, return_counts=True)
        return cls(points, np.cumsum(counts), limit, n, 0.5 / limit + sample_error)

    @property
    def cumulative(self) -> np.ndarray:
        """The share of values at or below each point."""
        return self.ranks / self.rank_total

    @property
    def exact(self) -> bool:
        """Whether this is the values' own ECDF."""
        return self.rank_error == 0.0

    def shares_at(self, edges: np.ndarray) -> np.ndarray:
        """The share of values at or below each of ``edges`` (within :attr:`rank_error`)."""
        index = np.searchsorted(self.points, edges, side="right")
        padded = np.concatenate([[0.0], self.cumulative])
        return padded[index]

    def quantile(self, share: float) -> float:
        """The smallest point at or below which at least ``share`` of the values lie."""
        if self.count == 0:
            return float("nan")
        return float(self.points[min(int(np.searchsorted(self.cumulative, share - 1e-12)), self.points.size - 1)])

    def mapped(self, scale: float, offset: float) -> "Distribution":
        """The distribution of ``scale * x + offset`` (``scale > 0``)."""
        return Distribution(self.points * scale + offset, self.ranks, self.rank_total, self.count, self.rank_error)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types: the points and, per point, how many of ``rank_total`` lie at or below it."""
        return {
            "count": self.count, "exact": self.exact, "rank_error": self.rank_error, "rank_total": self.rank_total,
            "points": self.points.tolist(), "ranks": self.ranks.tolist(),
        }

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Distribution":
        """The inverse of :meth:`to_dict`."""
        return cls(
            np.asarray(data["points"], dtype=np.float64), np.asarray(data["ranks"], dtype=np.int64), int(data["rank_total"]),
            int(data["count"]), float(data["rank_error"]),
        )


@dataclass(frozen=True)
class ValuesAt:
    """How many of some values lie at or below, and strictly below, each point of a distribution."""

    at_or_below: np.ndarray
    below: np.ndarray
    count: int

    @classmethod
    def of(cls, values: np.ndarray, points: np.ndarray) -> "ValuesAt":
        """Count the finite ``values`` against sorted, distinct ``points``."""
        return cls.of_sorted(sorted_finite(values), points)

    @classmethod
    def of_sorted(cls, ordered: np.ndarray, points: np.ndarray) -> "ValuesAt":
        """Count sorted finite values against sorted, distinct ``points``: two binary searches per point, O(K log n)."""
        at_or_below = np.searchsorted(ordered, points, side="right")
        below = np.searchsorted(ordered, points, side="left")
        return cls(at_or_below, below, int(ordered.size))


def sorted_finite(values: np.ndarray) -> np.ndarray:
    """The finite entries of ``values``, sorted (one sort serves every count against any points)."""
    x = np.asarray(values, dtype=np.float64)
    return np.sort(x[np.isfinite(x)])


def _counted(reference: Distribution, values: "np.ndarray | ValuesAt") -> ValuesAt:
    return values if isinstance(values, ValuesAt) else ValuesAt.of(values, reference.points)


def ks_distance(reference: Distribution, values: "np.ndarray | ValuesAt") -> float:
    """The two-sample Kolmogorov-Smirnov distance ``sup |G(x) - F(x)|`` between ``reference`` and the ECDF of ``values``.

    ``values`` may be given already counted at the reference's points.

    Between two points of ``reference`` its ECDF ``G`` is constant and that
    of the values, ``F``, rises, so the supremum is reached at a point or just
    before one: the counts of values at or below, and below, each point
    suffice. Equal to ``scipy.stats.ks_2samp`` when ``reference`` is exact;
    within ``reference.rank_error`` of it otherwise.

    References
    ----------
    Smirnov, N. (1948). Table for estimating the goodness of fit of empirical distributions. Ann. Math. Stat. 19(2), 279-281.
    """
    counted = _counted(reference, values)
    if reference.count == 0 or counted.count == 0:
        return float("nan")
    at = counted.at_or_below / counted.count
    before = counted.below / counted.count
    previous = np.concatenate([[0.0], reference.cumulative[:-1]])
    return float(max(np.max(np.abs(reference.cumulative - at)), np.max(np.abs(previous - before))))


def dkw_rank_error(values: int, confidence: float) -> float:
    """``eps`` with ``P(sup |F_m - F| > eps) <= 1 - confidence`` for ``m = values`` sampled values (Massart 1990)."""
    return float(np.sqrt(np.log(2.0 / (1.0 - confidence)) / (2.0 * values))) if values > 0 else float("inf")


def ks_p_value(distance: float, first: int, second: int) -> float:
    """The asymptotic two-sided p-value of a two-sample KS distance (Kolmogorov's limit law, effective size n m / (n + m))."""
    from scipy.stats import kstwobign

    if not np.isfinite(distance) or first == 0 or second == 0:
        return float("nan")
    return float(kstwobign.sf(distance * np.sqrt(first * second / (first + second))))


def decile_edges(reference: Distribution, bins: int = PSI_BINS) -> np.ndarray:
    """The upper edges of the reference's quantile bins (distinct points; ties merge bins)."""
    if reference.count == 0:
        return np.zeros(0)
    index = np.searchsorted(reference.cumulative, np.arange(1, bins) / bins - 1e-12)
    index = index[index < reference.points.size - 1]
    return np.unique(reference.points[index])


def stability_index(expected: Sequence[float] | np.ndarray, actual: Sequence[float] | np.ndarray) -> float:
    """The population stability index ``sum (a_i - e_i) ln(a_i / e_i)`` of two sets of bin shares.

    References
    ----------
    Siddiqi, N. (2006). Credit Risk Scorecards, ch. 8. Wiley. (PSI and its bands 0.1 and 0.25; from memory. The
    bands are credit-scoring practice, as quoted on Cross Validated, question 219822.)
    Yurdakul, B. (2018). Statistical Properties of Population Stability Index. PhD thesis, Western Michigan University.
    """
    e = np.asarray(expected, dtype=np.float64)
    a = np.asarray(actual, dtype=np.float64)
    return float(np.sum((a - e) * np.log(a / e)))


def bin_shares(counts: np.ndarray) -> np.ndarray:
    """Shares of bin counts, an empty bin counted as half a value (common practice: a log of zero is undefined)."""
    padded = np.where(counts > 0, counts, EMPTY_BIN_COUNT).astype(np.float64)
    return padded / padded.sum()


def numeric_stability(reference: Distribution, values: "np.ndarray | ValuesAt") -> float:
    """PSI of ``values`` (or their counts at the reference's points) against ``reference`` over the reference's deciles."""
    edges = decile_edges(reference)
    counted = _counted(reference, values)
    if reference.count == 0 or counted.count == 0:
        return float("nan")
    old = np.diff(np.concatenate([[0.0], reference.shares_at(edges), [1.0]])) * reference.count
    index = np.searchsorted(reference.points, edges)
    new = np.diff(np.concatenate([[0], counted.at_or_below[index], [counted.count]]))
    return stability_index(bin_shares(old), bin_shares(new))


def level_stability(old: Mapping[str, int], new: Mapping[str, int]) -> float:
    """PSI of level counts, each level a bin (levels of either side)."""
    levels = sorted(set(old) | set(new))
    return stability_index(bin_shares(np.array([old.get(v, 0) for v in levels])), bin_shares(np.array([new.get(v, 0) for v in levels])))

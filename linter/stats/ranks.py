"""One ranking of a column serves every two-group rank test on its rows.

Whether a column's holes go with another column's values is a Mann-Whitney U
test of that other column between the rows where the first is missing and
the rest. The compared rows (those where the other column is finite) do not
depend on which column has the holes, so the other column is sorted once:
each test then needs only the rank sum of its group's rows, and the medians
of both groups are order statistics read from the same sorted values. The
p-value is the two-sided normal approximation with continuity and tie
correction, the same arithmetic as ``scipy.stats.mannwhitneyu(...,
method="asymptotic")``, so it agrees with it to the last bit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAGNITUDE = np.int64(0x7FFF_FFFF_FFFF_FFFF)
BLOCK = 65_536


def order_keys(values: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """64-bit integers that sort like the finite float64 ``values``, equal exactly where the values are equal.

    Adding 0.0 turns -0.0 into 0.0; then a double's bits read as a signed
    integer sort like the double once a negative value's bits below the sign
    are flipped.
    """
    keys = np.empty(np.shape(values), dtype=np.int64) if out is None else out
    np.add(values, 0.0, out=keys.view(np.float64))
    flip = keys >> 63
    flip &= MAGNITUDE
    keys ^= flip
    return keys


def ascending_rows(values: np.ndarray, rows: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Row numbers in ascending order of value, and the places in that order whose value equals the next one's.

    ``rows`` (ascending, finite values there) picks the rows to sort; None
    sorts every entry of ``values``, which must then all be finite. Each row
    number is packed into the low bits of its value's sort key, so one sort
    of 64-bit integers replaces a slower indirect sort; the keys are built
    ``BLOCK`` rows at a time, in cache. Only neighbours whose keys agree
    above those bits can be out of order or tied (in a million measurements
    a few dozen pairs lie that close); runs holding unequal values are
    sorted again by their full keys, and only these neighbours' values are
    compared.
    """
    count = values.size if rows is None else rows.size
    if count == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    bits = max((values.size - 1 if rows is None else int(rows[-1])).bit_length(), 1)
    packed = np.empty(count, dtype=np.int64)
    for start in range(0, count, BLOCK):
        stop = min(start + BLOCK, count)
        numbers = np.arange(start, stop, dtype=np.int64) if rows is None else rows[start:stop].astype(np.int64)
        key = order_keys(values[numbers] if rows is not None else values[start:stop], out=packed[start:stop])
        key >>= bits
        key <<= bits
        key |= numbers
    packed.sort()
    order = packed & np.int64((1 << bits) - 1)
    high = packed
    high >>= bits
    neighbours = np.flatnonzero(high[1:] == high[:-1])
    equal = values[order[neighbours]] == values[order[neighbours + 1]]
    if not equal.all():
        shared = np.unique(high[neighbours[~equal]])
        first = np.searchsorted(high, shared, side="left")
        length = np.searchsorted(high, shared, side="right") - first
        places = np.arange(int(length.sum())) + np.repeat(first - (np.cumsum(length) - length), length)
        crowded = order[places]
        order[places] = crowded[np.argsort(order_keys(values[crowded]), kind="stable")]
        equal = values[order[neighbours]] == values[order[neighbours + 1]]
    return order, neighbours[equal]


def mann_whitney_p(rank_sum: float, n1: int, n2: int, tie_term: float) -> float:
    """Two-sided p-value of the Mann-Whitney U test by the normal approximation.

    ``rank_sum`` is the sum of the first group's ranks among both groups
    (ties get the average of the ranks they span), ``tie_term`` the sum of
    ``t**3 - t`` over the sizes ``t`` of the groups of tied values. The
    statistic is ``U = max(U1, n1 n2 - U1)`` with ``U1 = rank_sum - n1 (n1 +
    1) / 2``; ``z = (U - n1 n2 / 2 - 1/2) / s`` with the tie-corrected
    ``s**2 = n1 n2 / 12 ((n + 1) - tie_term / (n (n - 1)))``; ``p = 2 P(Z >
    z)``, at most 1. Operations follow scipy's asymptotic method in order.

    References
    ----------
    Mann, H. B., Whitney, D. R. (1947). On a test of whether one of two random
    variables is stochastically larger than the other. Ann. Math. Stat. 18(1).
    Lehmann, E. L. (1975). Nonparametrics: Statistical Methods Based on Ranks,
    ch. 1 (normal approximation with tie correction; from memory).
    """
    import scipy.special

    u1 = np.float64(rank_sum) - n1 * (n1 + 1) / 2
    u2 = n1 * n2 - u1
    u = np.maximum(u1, u2)
    n = n1 + n2
    s = np.sqrt(n1 * n2 / 12 * ((n + 1) - np.float64(tie_term) / (n * (n - 1))))
    numerator = u - n1 * n2 / 2
    numerator -= 0.5
    with np.errstate(divide="ignore", invalid="ignore"):
        z = numerator / s
    p = scipy.special.ndtr(-z) * 2
    return float(np.clip(p, 0.0, 1.0))


@dataclass(frozen=True)
class RankSplit:
    """A Mann-Whitney comparison of one group of rows with the rest, and the two groups' medians."""

    group: int
    rest: int
    p_value: float
    group_median: float
    rest_median: float


@dataclass(frozen=True)
class RankedColumn:
    """A column's finite values in ascending order, and each table row's place in that order.

    ``values`` is the column (one entry per table row); ``order`` the rows
    of its finite values in ascending order of value; ``position`` per table
    row the index of the row in ``order`` (-1 where the value is missing or
    infinite); ``doubled_ranks`` twice the tie-averaged rank at each index of
    ``order`` (None without ties, where it is ``2 index + 2``); ``tie_term``
    the sum of ``t**3 - t`` over groups of ``t`` tied values. Built in
    O(n log n) once; each :meth:`split` then costs O(k log k) for a group of
    k rows.
    """

    values: np.ndarray
    order: np.ndarray
    position: np.ndarray
    doubled_ranks: np.ndarray | None
    tie_term: float

    @classmethod
    def of(cls, values: np.ndarray) -> "RankedColumn":
        """Rank the finite entries of ``values`` (one entry per table row)."""
        values = np.asarray(values, dtype=np.float64)
        finite = np.isfinite(values)
        order, tied = ascending_rows(values, None if finite.all() else np.flatnonzero(finite))
        position = np.empty(values.size, dtype=np.int32 if values.size < 2**31 else np.int64)
        if order.size < values.size:
            position[~finite] = -1
        for start in range(0, order.size, BLOCK):
            position[order[start : start + BLOCK]] = np.arange(start, min(start + BLOCK, order.size), dtype=position.dtype)
        if tied.size == 0:
            return cls(values, order, position, None, 0.0)
        continues = np.zeros(order.size, dtype=bool)
        continues[tied + 1] = True
        starts = np.flatnonzero(~continues)
        counts = np.diff(np.append(starts, order.size))
        doubled = np.repeat(2 * starts + counts + 1, counts)
        ties = np.zeros(order.size)
        ties[starts] = counts
        return cls(values, order, position, doubled, float(np.sum(ties**3 - ties)))

    @property
    def size(self) -> int:
        """How many finite values were ranked."""
        return int(self.order.size)

    def at(self, places: np.ndarray | int) -> np.ndarray:
        """The values at ``places`` in ascending order (0 is the smallest)."""
        return self.values[self.order[places]]

    def split(self, rows: np.ndarray, min_group: int = 1) -> RankSplit | None:
        """Compare the finite values at table rows ``rows`` with all other finite values.

        None when either group has fewer than ``min_group`` values.
        """
        places = self.position[rows]
        places = np.sort(places[places >= 0])
        group = int(places.size)
        rest = self.size - group
        if group < max(min_group, 1) or rest < max(min_group, 1):
            return None
        if self.doubled_ranks is None:
            doubled_sum = 2 * int(places.sum()) + 2 * group
        else:
            doubled_sum = int(self.doubled_ranks[places].sum())
        p_value = mann_whitney_p(doubled_sum / 2, group, rest, self.tie_term)
        rest_places = _rest_places(places, _middle(rest))
        return RankSplit(group, rest, p_value, _median(self.at(places[_middle(group)])), _median(self.at(rest_places)))


def _median(middle: np.ndarray) -> float:
    """The median from its one or two middle values, by the arithmetic of ``numpy.median``."""
    return float(np.median(middle))


def _middle(size: int) -> np.ndarray:
    """The 0-based order statistics whose mean is the median of ``size`` values."""
    return np.array([size // 2]) if size % 2 else np.array([size // 2 - 1, size // 2])


def _rest_places(group_places: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    """Indices in the full order of the rest's order statistics ``ranks``, given the group's sorted indices.

    Before the rest's ``k``-th value lie ``k`` values of the rest and every
    group index ``g_i`` with ``g_i - i <= k`` (``g_i - i`` counts the rest's
    values before ``g_i``).
    """
    before = group_places - np.arange(group_places.size)
    return ranks + np.searchsorted(before, ranks, side="right")

"""Numeric stand-ins for "missing": repeated, round values far outside the bulk of a column.

A value is judged from the data: it sits outside the range of the other values
with a gap that dwarfs the spacing of the values at that edge, and either its
digits look chosen rather than measured (all nines, one repeated digit, a power
of ten, zero, minus one) or it repeats far more often than the column's other
values do. Repetition alone is no evidence where every value repeats (an
attribute of a site on each of its site-days).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MIN_VALUES = 10
EDGE_VALUES = 10
MAX_PER_SIDE = 3
MAX_CODE_SHARE = 0.5
GAP_TO_SCALE_CODE = 1.0
GAP_TO_SCALE_ZERO = 0.5
GAP_TO_SCALE_PLAIN = 3.0
MIN_REPEATS_PLAIN = 3
MAX_SHARE_PLAIN = 0.2
EDGE_SAMPLE = 1_024
EDGE_ROWS = 64


@dataclass(frozen=True)
class SentinelLimits:
    """The adjustable limits of :func:`find_sentinels` (defaults: common practice)."""

    gap_to_spacing: float = 10.0
    code_distance: float = 3.0
    plain_distance: float = 5.0
    repeat_contrast: float = 3.0
    zero_share: float = 0.05


@dataclass(frozen=True)
class Sentinel:
    """A value that stands in for "missing", how often it occurs and why it was judged a code."""

    value: float
    count: int
    gap: float
    gap_in_spacings: float
    gap_in_scales: float
    reason: str


def code_shaped(value: float) -> bool:
    """Whether a number's digits look chosen: all nines, one repeated digit (two or more), -1, or a power of ten."""
    if not np.isfinite(value) or not float(value).is_integer():
        return False
    digits = str(abs(int(value)))
    if value == -1:
        return True
    if len(digits) >= 2 and len(set(digits)) == 1:
        return True
    return len(digits) >= 3 and digits[0] == "1" and set(digits[1:]) == {"0"}


def _robust_scale(values: np.ndarray) -> float:
    """Interquartile range / 1.349 (the normal-consistent IQR), or MAD * 1.4826 when the IQR is zero."""
    q1, q3 = np.percentile(values, [25, 75])
    scale = (q3 - q1) / 1.349
    if scale > 0:
        return float(scale)
    return float(1.4826 * np.median(np.abs(values - np.median(values))))


def typical_repeats(counts: np.ndarray) -> float:
    """How often the value of a typical row occurs: the row-weighted median of the distinct values' counts.

    1 for a column of distinct measurements; the number of rows per entity for
    an attribute of an entity repeated on each of its rows.
    """
    if counts.size == 0:
        return 0.0
    ordered = np.sort(counts)
    rows_so_far = np.cumsum(ordered)
    return float(ordered[np.searchsorted(rows_so_far, rows_so_far[-1] / 2.0)])


def _edge_spacing(distinct: np.ndarray, low: bool) -> float:
    """The median gap between consecutive distinct values at one edge of the rest of the column."""
    edge = distinct[:EDGE_VALUES] if low else distinct[-EDGE_VALUES:]
    return float(np.median(np.diff(edge)))


def find_sentinels(values: np.ndarray, limits: SentinelLimits = SentinelLimits()) -> list[Sentinel]:
    """Values of a numeric column that act as missing-value codes, lowest first.

    Each edge of the column is examined from the outside in: the most
    extreme distinct value is a code when it is separated from the remaining
    values by a gap of at least ten times the spacing of the remaining
    values at that edge (``limits.gap_to_spacing``, default 10, common practice) and

    * it is code-shaped (:func:`code_shaped`) and lies at least three robust
      standard deviations from the median of the rest, with a gap of at least
      one; or
    * it is zero, repeats in at most 5% of the rows (a zero that is common is
      a genuine level, such as a day without defrosts), and every other value
      is strictly positive, with a gap of at least half a robust standard
      deviation; or
    * it is a negative code-shaped value repeating in a column of
      non-negative integers (a count cannot be negative); or
    * it repeats at least three times (in at most a fifth of the rows), at
      least three times as often as a typical value of the rest repeats
      (:func:`typical_repeats`), and lies at least five robust standard
      deviations from the median with a gap of at least three (no measured
      value repeats exactly that far from the rest). Repetition is evidence
      only when it stands out: in a table of site-days a site's floor area
      repeats once per day like every other site's, however large the site.

    Robust standard deviation: interquartile range / 1.349 (Rousseeuw &
    Croux 1993). A code may cover at most half the values.

    References
    ----------
    Rousseeuw, P. J., Croux, C. (1993). Alternatives to the median absolute
    deviation. JASA 88(424).
    Pearson, R. K. (2006). The problem of disguised missing data. SIGKDD
    Explorations 8(1), 83-92.
    """
    x = np.asarray(values, dtype=np.float64)
    finite = np.isfinite(x)
    if not finite.all():
        x = x[finite]
    if x.size < MIN_VALUES or _edges_hold_no_code(x, limits):
        return []
    distinct, counts = np.unique(x, return_counts=True)
    found: list[Sentinel] = []
    low, high = 0, distinct.size
    for side_low in (True, False):
        for _ in range(MAX_PER_SIDE):
            if high - low < 4:
                break
            index = low if side_low else high - 1
            rest_distinct = distinct[low + 1 : high] if side_low else distinct[low : high - 1]
            rest_counts = counts[low + 1 : high] if side_low else counts[low : high - 1]
            sentinel = _judge(distinct[index], int(counts[index]), rest_distinct, rest_counts, side_low, x.size, limits)
            if sentinel is None:
                break
            found.append(sentinel)
            if side_low:
                low += 1
            else:
                high -= 1
    return sorted(found, key=lambda s: s.value)


def _edges_hold_no_code(x: np.ndarray, limits: SentinelLimits) -> bool:
    """Whether the most extreme value at each edge fails a test of :func:`_judge` that needs only the edge.

    Then no code is found, and the column need not be tallied in full. All
    copies of every value up to a low cut (and from a high cut) are taken,
    the cuts being order statistics of an evenly spaced sample, so the edge
    values' counts are exact; when too few distinct values fall beyond a cut
    the answer is False and the full search decides.
    """
    step = max(1, x.size // EDGE_SAMPLE)
    sample = np.sort(x[::step])
    k = min(EDGE_ROWS // step + 1, sample.size - 1)
    low_cut, high_cut = sample[k], sample[-1 - k]
    if low_cut >= high_cut:
        return False
    needed = MAX_PER_SIDE + EDGE_VALUES + 1
    for side_low, edge in ((True, x[x <= low_cut]), (False, x[x >= high_cut])):
        distinct, counts = np.unique(edge, return_counts=True)
        if distinct.size < needed:
            return False
        index = 0 if side_low else -1
        rest = distinct[1:] if side_low else distinct[:-1]
        if not _edge_rules_out(float(distinct[index]), int(counts[index]), rest, side_low, x.size, limits):
            return False
    return True


def _edge_rules_out(value: float, count: int, rest: np.ndarray, low: bool, total: int, limits: SentinelLimits) -> bool:
    """Whether :func:`_judge` rejects ``value`` on its share, its gap, or a shape and count no reason accepts."""
    if count > MAX_CODE_SHARE * total:
        return True
    gap, spacing = _gap_and_spacing(value, rest, low)
    if spacing <= 0 or gap < limits.gap_to_spacing * spacing:
        return True
    return not (code_shaped(value) or value == 0 or count >= MIN_REPEATS_PLAIN)


def _gap_and_spacing(value: float, rest: np.ndarray, low: bool) -> tuple[float, float]:
    """The gap from ``value`` to the nearest of the rest, and the spacing of the rest's values at that edge."""
    return abs(float(rest[0] if low else rest[-1]) - value), _edge_spacing(rest, low)


def _judge(
    value: float, count: int, rest: np.ndarray, rest_counts: np.ndarray, low: bool, total: int, limits: SentinelLimits
) -> Sentinel | None:
    value = float(value)
    if _edge_rules_out(value, count, rest, low, total, limits):
        return None
    gap, spacing = _gap_and_spacing(value, rest, low)
    expanded = np.repeat(rest, rest_counts)
    scale = _robust_scale(expanded)
    if scale <= 0:
        return None
    distance = abs(float(value) - float(np.median(expanded))) / scale
    in_scales = gap / scale
    in_spacings = gap / spacing
    reason = None
    if code_shaped(value) and distance >= limits.code_distance and in_scales >= GAP_TO_SCALE_CODE:
        reason = "a code-shaped value far outside the rest of the column"
    elif value == 0 and 2 <= count <= limits.zero_share * total and rest[0] > 0 and in_scales >= GAP_TO_SCALE_ZERO:
        reason = "zeros in a column that is otherwise strictly positive, far below its smallest other value"
    elif value < 0 and code_shaped(value) and count >= 2 and rest[0] >= 0 and np.all(np.mod(rest, 1) == 0):
        reason = "a negative code in a column of non-negative counts"
    elif (
        MIN_REPEATS_PLAIN <= count <= MAX_SHARE_PLAIN * total
        and count >= limits.repeat_contrast * typical_repeats(rest_counts)
        and distance >= limits.plain_distance
        and in_scales >= GAP_TO_SCALE_PLAIN
    ):
        reason = "a value repeated far outside the rest of the column"
    if reason is None:
        return None
    return Sentinel(float(value), count, gap, in_spacings, in_scales, reason)


def sentinel_free(block: np.ndarray, limits: SentinelLimits = SentinelLimits()) -> np.ndarray:
    """Per column of ``block`` (rows x columns): True where :func:`find_sentinels` is sure to find no code.

    Decided many columns at once for the common case of short columns of
    distinct finite values: there every value occurs once, so an edge value
    can only be a code when it is ``limits.gap_to_spacing`` times the edge's
    spacing away from the rest *and* code-shaped or zero (the first test of
    :func:`_judge`, :func:`_edge_rules_out`, with a count of one). When that
    rules out the outermost value on both sides, the search stops at once
    and finds nothing. Every other column is False (searched in full).
    """
    rows, columns = block.shape
    free = np.zeros(columns, dtype=bool)
    if rows < EDGE_VALUES + 2 or columns == 0:
        return free
    ordered = np.sort(block, axis=0)
    steps = np.diff(ordered, axis=0)
    distinct = np.isfinite(ordered).all(axis=0) & (steps > 0).all(axis=0)
    low_gap, high_gap = steps[0], steps[-1]
    low_spacing = np.median(steps[1:EDGE_VALUES], axis=0)
    high_spacing = np.median(steps[-EDGE_VALUES:-1], axis=0)
    with np.errstate(invalid="ignore", over="ignore"):
        low_out = low_gap < limits.gap_to_spacing * low_spacing
        high_out = high_gap < limits.gap_to_spacing * high_spacing
    free = distinct & low_out & high_out
    for j in np.flatnonzero(distinct & ~free):
        edges = [float(v) for v, out in ((ordered[0, j], low_out[j]), (ordered[-1, j], high_out[j])) if not out]
        free[j] = not any(value == 0 or code_shaped(value) for value in edges)
    return free

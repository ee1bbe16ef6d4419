"""Missingness statistics: row patterns of holes and Little's test of missing completely at random.

Both are built from statistics that merge across row batches: the count of
each distinct row pattern (:class:`MissingPatterns`) and, per pattern, the
count, mean and co-moment of the observed values (:class:`PatternMoments`).
The EM estimate of the normal mean and covariance, and Little's statistic,
need nothing else.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property, reduce
from typing import Callable, Mapping, Sequence

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..roles import Kind, numeric_values
from .blas import one_blas_thread

Pattern = tuple[bool, ...]
TABLE_BITS = 20
MOMENT_ROWS = 8_192
CONDITION_LIMIT = 1e6


def pattern_index(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct rows of a boolean matrix, the index of each row's pattern, and the pattern counts; O(rows x columns).

    Patterns are sorted as binary numbers with the first column most
    significant. Only columns with a True somewhere can tell rows apart, so
    each row's key holds just those bits; with at most ``TABLE_BITS`` of them
    the patterns are counted in a table indexed by the key, without sorting.
    """
    mask = np.asarray(mask, dtype=bool)
    rows, width = mask.shape
    if rows == 0:
        return np.zeros((0, width), dtype=bool), np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    holed = np.flatnonzero(mask.any(axis=0))
    if holed.size > 62:
        distinct, inverse, counts = np.unique(mask, axis=0, return_inverse=True, return_counts=True)
        return distinct, inverse.reshape(-1).astype(np.int64), counts
    keys = _row_keys(mask, holed)
    if holed.size <= TABLE_BITS:
        table = np.bincount(keys, minlength=1 << holed.size)
        found = np.flatnonzero(table)
        index = np.zeros(table.size, dtype=np.int64)
        index[found] = np.arange(found.size)
        inverse, counts = index[keys], table[found]
    else:
        found, inverse, counts = np.unique(keys, return_inverse=True, return_counts=True)
    distinct = np.zeros((found.size, width), dtype=bool)
    distinct[:, holed] = (found[:, None].astype(np.int64) >> np.arange(holed.size - 1, -1, -1)) & 1 == 1
    return distinct, inverse.astype(np.int64, copy=False), counts.astype(np.int64, copy=False)


def _row_keys(mask: np.ndarray, columns: np.ndarray) -> np.ndarray:
    """The bits of ``mask`` in ``columns`` (at most 62) as one unsigned integer per row, first column most significant."""
    dtype = next(t for t in (np.uint8, np.uint16, np.uint32, np.uint64) if np.iinfo(t).bits >= columns.size)
    keys = np.zeros(mask.shape[0], dtype=dtype)
    for j in columns:
        np.left_shift(keys, 1, out=keys)
        np.bitwise_or(keys, mask[:, j], out=keys)
    return keys


def _pattern_counts(distinct: np.ndarray, counts: np.ndarray) -> dict[Pattern, int]:
    return {tuple(bool(v) for v in row): int(c) for row, c in zip(distinct, counts)}


@dataclass(frozen=True)
class MissingPatterns:
    """How many rows show each pattern of missing values over ``columns``.

    A pattern is a tuple of booleans, True where the column is missing.
    Merging adds the counts, so the patterns of a table are the merged
    patterns of its row batches.
    """

    columns: tuple[str, ...]
    counts: Mapping[Pattern, int] = field(default_factory=dict)

    @classmethod
    def of(cls, columns: tuple[str, ...], mask: np.ndarray) -> "MissingPatterns":
        """Patterns of one batch; ``mask`` is rows x columns, True where missing."""
        distinct, _, counts = pattern_index(mask)
        return cls(columns, _pattern_counts(distinct, counts))

    def merge(self, other: "MissingPatterns") -> "MissingPatterns":
        """The patterns of both batches together."""
        if other.columns != self.columns:
            raise ValueError("patterns over different columns cannot be merged")
        merged = dict(self.counts)
        for pattern, count in other.counts.items():
            merged[pattern] = merged.get(pattern, 0) + count
        return MissingPatterns(self.columns, merged)

    @property
    def rows(self) -> int:
        """Rows counted."""
        return int(sum(self.counts.values()))

    def missing_columns(self, pattern: Pattern) -> tuple[str, ...]:
        """The columns a pattern lacks."""
        return tuple(c for c, missing in zip(self.columns, pattern) if missing)

    def incomplete(self) -> list[tuple[Pattern, int]]:
        """Patterns with at least one hole, most frequent first (ties by the columns they lack)."""
        found = [(p, c) for p, c in self.counts.items() if any(p)]
        return sorted(found, key=lambda item: (-item[1], self.missing_columns(item[0])))

    def is_monotone(self) -> bool:
        """Whether the sets of missing columns are nested (each contained in the next larger one).

        Nested patterns are what drop-out produces: once a column is
        missing, every later one is too, so the columns can be ordered so
        that a row missing one is missing all that follow (Little & Rubin
        2019, section 1.3).

        References
        ----------
        Little, R. J. A., Rubin, D. B. (2019). Statistical Analysis with
        Missing Data, 3rd ed. Wiley.
        """
        sets = sorted({frozenset(np.flatnonzero(p).tolist()) for p in self.counts if any(p)}, key=len)
        return all(small <= large for small, large in zip(sets, sets[1:]))


@dataclass(frozen=True)
class Holes:
    """Where the model columns (target first, then predictors) are missing, row by row.

    A value is missing when it is null, or NaN in a numeric column. ``mask``
    is rows x columns in column-major order (each column's holes lie
    together); ``row_pattern`` gives each row's index into ``pattern_masks``,
    the distinct rows of ``mask``.
    """

    columns: tuple[str, ...]
    mask: np.ndarray
    patterns: MissingPatterns
    row_pattern: np.ndarray
    pattern_masks: np.ndarray

    @classmethod
    def of(
        cls,
        table: pa.Table,
        columns: tuple[str, ...],
        kinds: Mapping[str, Kind],
        values: Callable[[str], np.ndarray] | None = None,
    ) -> "Holes":
        """The holes of ``columns`` of ``table``; O(rows x columns) booleans.

        ``values`` returns a numeric column as float64 with NaN for missing
        (a shared cache of conversions); without it, columns are converted here.
        """
        convert = values or (lambda name: numeric_values(table.column(name)))
        mask = np.zeros((table.num_rows, len(columns)), dtype=bool, order="F")
        for j, name in enumerate(columns):
            column = table.column(name)
            if kinds[name] in (Kind.NUMERIC, Kind.BOOLEAN, Kind.DATETIME):
                np.isnan(convert(name), out=mask[:, j])
            else:
                mask[:, j] = pc.is_null(column).to_numpy(zero_copy_only=False)
        distinct, inverse, counts = pattern_index(mask)
        return cls(columns, mask, MissingPatterns(columns, _pattern_counts(distinct, counts)), inverse, distinct)

    @cached_property
    def _position(self) -> dict[str, int]:
        return {column: j for j, column in enumerate(self.columns)}

    def missing(self, column: str) -> np.ndarray:
        """The missing mask of one column over all rows."""
        return self.mask[:, self._position[column]]

    @cached_property
    def _totals(self) -> np.ndarray:
        return np.count_nonzero(self.mask, axis=0)

    def counts(self) -> dict[str, int]:
        """Missing values per column."""
        return {c: int(self._totals[j]) for j, c in enumerate(self.columns)}


@dataclass(frozen=True)
class PatternGroup:
    """Count, mean and co-moment of the observed columns of the rows sharing one pattern."""

    count: int
    mean: np.ndarray
    comoment: np.ndarray

    def merge(self, other: "PatternGroup") -> "PatternGroup":
        """Chan-Golub-LeVeque pairwise update of mean and co-moment."""
        n = self.count + other.count
        delta = other.mean - self.mean
        mean = self.mean + delta * other.count / n
        comoment = self.comoment + other.comoment + np.outer(delta, delta) * self.count * other.count / n
        return PatternGroup(n, mean, comoment)


@dataclass(frozen=True)
class PatternMoments:
    """Per missingness pattern, the moments of the observed values of ``columns``.

    Sufficient for the EM estimate of a multivariate normal mean and
    covariance and for Little's test. Merged pattern by pattern.

    References
    ----------
    Chan, T. F., Golub, G. H., LeVeque, R. J. (1979). Updating formulae and a
    pairwise algorithm for computing sample variances.
    """

    columns: tuple[str, ...]
    groups: Mapping[Pattern, PatternGroup] = field(default_factory=dict)

    @classmethod
    def of(cls, columns: tuple[str, ...], values: np.ndarray) -> "PatternMoments":
        """Moments of one batch; ``values`` is rows x columns with NaN where missing."""
        values = np.asarray(values, dtype=np.float64)
        distinct, inverse, _ = pattern_index(~np.isfinite(values))
        return cls.grouped(columns, [values[:, j] for j in range(values.shape[1])], inverse, distinct)

    @classmethod
    def grouped(
        cls,
        columns: tuple[str, ...],
        arrays: Sequence[np.ndarray],
        row_group: np.ndarray,
        group_missing: np.ndarray,
        scales: np.ndarray | None = None,
    ) -> "PatternMoments":
        """Moments from one array per column, given each row's group and each group's pattern.

        ``row_group`` holds a group index per row, ``group_missing`` a row per
        group, True where the group's rows lack the column; groups with the
        same pattern are pooled. One counting sort puts the rows in group
        order, O(rows); each group's observed columns are then gathered
        ``MOMENT_ROWS`` rows at a time, and the blocks' moments merged.
        ``scales``, when given, divides each column as it is gathered (the
        moments are then those of the scaled values): dividing by a column's
        largest magnitude keeps its squares from overflowing.
        """
        if row_group.size == 0:
            return cls(columns, {})
        patterns, label = np.unique(np.asarray(group_missing, dtype=bool), axis=0, return_inverse=True)
        label = label.reshape(-1)
        if patterns.shape[0] < label.size or np.any(label != np.arange(label.size)):
            row_group = label[row_group]
        code = np.uint16 if patterns.shape[0] <= np.iinfo(np.uint16).max else np.int64
        order = np.argsort(row_group.astype(code), kind="stable")
        ends = np.cumsum(np.bincount(row_group, minlength=patterns.shape[0]))
        groups: dict[Pattern, PatternGroup] = {}
        with one_blas_thread():
            for pattern, start, end in zip(patterns, ends - np.diff(ends, prepend=0), ends):
                if end > start:
                    observed = np.flatnonzero(~pattern)
                    scale = None if scales is None else scales[observed]
                    groups[tuple(bool(v) for v in pattern)] = _group_moments(arrays, observed, order[start:end], scale)
        return cls(columns, groups)

    def merge(self, other: "PatternMoments") -> "PatternMoments":
        """The moments of both batches together."""
        if other.columns != self.columns:
            raise ValueError("pattern moments over different columns cannot be merged")
        merged = dict(self.groups)
        for pattern, group in other.groups.items():
            merged[pattern] = merged[pattern].merge(group) if pattern in merged else group
        return PatternMoments(self.columns, merged)

    def standardized(self) -> "PatternMoments":
        """The moments of the columns shifted and scaled to available-case mean 0 and standard deviation 1.

        The same as the moments of the standardized values (each column minus
        the mean of its observed values, over their n-denominator standard
        deviation), without another pass over the rows. Columns without
        spread keep their scale.
        """
        count, mean, m2 = _available_case(self.usable(), len(self.columns))
        variance = np.divide(m2, count, out=np.zeros_like(m2), where=count > 0)
        scale = np.where(variance > 0, np.sqrt(variance), 1.0)
        groups: dict[Pattern, PatternGroup] = {}
        for pattern, group in self.groups.items():
            o = np.flatnonzero(~np.array(pattern, dtype=bool))
            shifted = (group.mean - mean[o]) / scale[o]
            groups[pattern] = PatternGroup(group.count, shifted, group.comoment / np.outer(scale[o], scale[o]))
        return PatternMoments(self.columns, groups)

    def usable(self) -> list[tuple[np.ndarray, PatternGroup]]:
        """Patterns with at least one observed column, as observed-column masks, in a fixed order."""
        return [(np.array([not m for m in p]), g) for p, g in sorted(self.groups.items()) if not all(p)]


def _group_moments(arrays: Sequence[np.ndarray], observed: np.ndarray, rows: np.ndarray, scale: np.ndarray | None) -> PatternGroup:
    """Count, mean and co-moment of ``arrays[j][rows] / scale`` over the ``observed`` columns ``j``, block by block."""
    block = np.empty((min(MOMENT_ROWS, rows.size), observed.size), order="F")
    parts = (rows[start : start + MOMENT_ROWS] for start in range(0, rows.size, MOMENT_ROWS))
    return reduce(PatternGroup.merge, (_block_moments(arrays, observed, part, block[: part.size], scale) for part in parts))


def _block_moments(
    arrays: Sequence[np.ndarray], observed: np.ndarray, rows: np.ndarray, block: np.ndarray, scale: np.ndarray | None
) -> PatternGroup:
    for k, j in enumerate(observed):
        np.take(arrays[j], rows, out=block[:, k])
    if scale is not None:
        block /= scale
    mean = block.mean(axis=0)
    block -= mean
    return PatternGroup(int(rows.size), mean, block.T @ block)


@dataclass(frozen=True)
class NormalEstimate:
    """Maximum-likelihood mean and covariance of a multivariate normal from incomplete data."""

    mean: np.ndarray
    covariance: np.ndarray
    iterations: int
    converged: bool


def normal_em(moments: PatternMoments, tolerance: float = 1e-10, max_iterations: int = 10_000) -> NormalEstimate:
    """EM estimate of the mean and covariance from per-pattern moments (Dempster, Laird & Rubin 1977).

    The E-step of every row of a pattern depends on the rows only through the
    pattern's count, mean and co-moment, so each iteration costs
    O(patterns x p^3), independent of the number of rows. Patterns with the
    same number of observed columns are handled together, as stacks of
    submatrices. Iteration stops when no parameter moves by more than
    ``tolerance`` (relative to its size).

    References
    ----------
    Dempster, A. P., Laird, N. M., Rubin, D. B. (1977). Maximum likelihood from
    incomplete data via the EM algorithm. JRSS B 39(1).
    Little, R. J. A., Rubin, D. B. (2019). Statistical Analysis with Missing
    Data, 3rd ed., section 11.2.
    """
    groups = moments.usable()
    p = len(moments.columns)
    n = sum(g.count for _, g in groups)
    mean, covariance = _start(groups, p)
    fixed_total = np.zeros(p)
    fixed_cross = np.zeros((p, p))
    for observed, group in groups:
        o = np.flatnonzero(observed)
        fixed_total[o] += group.count * group.mean
        fixed_cross[np.ix_(o, o)] += group.comoment + group.count * np.outer(group.mean, group.mean)
    stacks = _PatternStack.split([(o, g) for o, g in groups if not o.all()], p)
    for iteration in range(1, max_iterations + 1):
        total = fixed_total.copy()
        cross = fixed_cross.copy()
        precision = _precision(covariance)
        for stack in stacks:
            stack.add_expected(mean, covariance, precision, total, cross)
        new_mean = total / n
        new_covariance = cross / n - np.outer(new_mean, new_mean)
        change = max(
            float(np.max(np.abs(new_mean - mean) / (np.abs(mean) + 1.0))),
            float(np.max(np.abs(new_covariance - covariance) / (np.abs(covariance) + 1.0))),
        )
        mean, covariance = new_mean, (new_covariance + new_covariance.T) / 2
        if change < tolerance:
            return NormalEstimate(mean, covariance, iteration, True)
    return NormalEstimate(mean, covariance, max_iterations, False)


def _start(groups: list[tuple[np.ndarray, PatternGroup]], p: int) -> tuple[np.ndarray, np.ndarray]:
    """Available-case means and variances (merged over patterns) as the starting point."""
    count, mean, m2 = _available_case(groups, p)
    variance = np.where(count > 0, m2 / np.maximum(count, 1), 1.0)
    return mean, np.diag(np.where(variance > 0, variance, 1.0))


def _available_case(groups: list[tuple[np.ndarray, PatternGroup]], p: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per column, the count, mean and sum of squared deviations of its observed values, merged over patterns.

    The pooled mean is the count-weighted mean of the pattern means; the
    pooled sum of squares adds each pattern's own to its count times the
    squared distance of its mean from the pooled one.
    """
    if not groups:
        return np.zeros(p), np.zeros(p), np.zeros(p)
    column = np.concatenate([np.flatnonzero(observed) for observed, _ in groups])
    weight = np.concatenate([np.full(group.mean.size, float(group.count)) for _, group in groups])
    group_mean = np.concatenate([group.mean for _, group in groups])
    squares = np.concatenate([np.diagonal(group.comoment) for _, group in groups])
    count = np.bincount(column, weights=weight, minlength=p)
    mean = np.divide(np.bincount(column, weights=weight * group_mean, minlength=p), count, out=np.zeros(p), where=count > 0)
    m2 = np.bincount(column, weights=squares + weight * (group_mean - mean[column]) ** 2, minlength=p)
    return count, mean, m2


class _PatternStack:
    """Patterns observing the same number of columns, stacked.

    ``o`` (patterns x observed) and ``m`` (patterns x missing) hold each
    pattern's column indices; ``count``, ``mean`` and ``comoment`` its
    moments; ``om`` and ``mm`` the flat positions of each pattern's
    observed-by-missing and missing-by-missing cells in a p x p matrix.
    """

    __slots__ = ("comoment", "count", "m", "mean", "mm", "o", "om", "p")

    def __init__(self, members: list[tuple[np.ndarray, PatternGroup]], p: int) -> None:
        self.p = p
        self.o = np.array([np.flatnonzero(observed) for observed, _ in members], dtype=np.intp)
        self.m = np.array([np.flatnonzero(~observed) for observed, _ in members], dtype=np.intp)
        self.count = np.array([g.count for _, g in members], dtype=np.float64)
        self.mean = np.array([g.mean for _, g in members])
        self.comoment = np.array([g.comoment for _, g in members])
        self.om = (self.o[:, :, None] * p + self.m[:, None, :]).ravel()
        self.mm = (self.m[:, :, None] * p + self.m[:, None, :]).ravel()

    @classmethod
    def split(cls, groups: list[tuple[np.ndarray, PatternGroup]], p: int) -> list[_PatternStack]:
        """One stack per number of observed columns, fewest first, patterns in their given order within."""
        by_size: dict[int, list[tuple[np.ndarray, PatternGroup]]] = {}
        for observed, group in groups:
            by_size.setdefault(int(observed.sum()), []).append((observed, group))
        return [cls(by_size[size], p) for size in sorted(by_size)]

    def blocks(self, covariance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Every pattern's observed-by-observed and missing-by-observed blocks of ``covariance``."""
        o, m = self.o, self.m
        return covariance[o[:, :, None], o[:, None, :]], covariance[m[:, :, None], o[:, None, :]]

    def regression(self, covariance: np.ndarray, precision: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
        """Per pattern, the slopes ``B = Sigma_mo Sigma_oo^-1`` of missing on observed columns, and the residual covariance.

        With the precision ``K = Sigma^-1`` at hand, ``B = -K_mm^-1 K_mo`` and
        the residual covariance is ``K_mm^-1``: a solve of the size of the
        missing columns instead of the observed ones (Whittaker 1990,
        section 5.7). Without it, ``Sigma_oo`` is solved directly.

        References
        ----------
        Whittaker, J. (1990). Graphical Models in Applied Multivariate
        Statistics. Wiley.
        """
        o, m = self.o, self.m
        if precision is not None:
            residual_covariance = np.linalg.inv(precision[m[:, :, None], m[:, None, :]])
            return -(residual_covariance @ precision[m[:, :, None], o[:, None, :]]), residual_covariance
        sigma_oo, sigma_mo = self.blocks(covariance)
        sigma_om = sigma_mo.transpose(0, 2, 1)
        slope = _solve_symmetric_stack(sigma_oo, sigma_om).transpose(0, 2, 1)
        return slope, covariance[m[:, :, None], m[:, None, :]] - slope @ sigma_om

    def add_expected(
        self, mean: np.ndarray, covariance: np.ndarray, precision: np.ndarray | None, total: np.ndarray, cross: np.ndarray
    ) -> None:
        """E-step: add the expected sums of the missing values and of their products to ``total`` and ``cross``.

        Given the observed values, the missing ones are normal with mean
        ``mu_m + B (y_o - mu_o)``, ``B = Sigma_mo Sigma_oo^-1``, and covariance
        ``Sigma_mm - B Sigma_om`` (Little & Rubin 2019, section 11.2.1).
        ``precision`` is ``Sigma^-1``, or None when it is not to be trusted.
        """
        o, m, n, p = self.o, self.m, self.count, self.p
        slope, residual_covariance = self.regression(covariance, precision)
        slope_t = slope.transpose(0, 2, 1)
        mean_o, mean_m = mean[o], mean[m]
        slope_mean = (slope @ self.mean[:, :, None])[:, :, 0]
        missing_mean = mean_m + slope_mean - (slope @ mean_o[:, :, None])[:, :, 0]
        comoment_slope = self.comoment @ slope_t
        weighted_mean = n[:, None] * self.mean
        cross_om = weighted_mean[:, :, None] * missing_mean[:, None, :] + comoment_slope
        cross_mm = (
            n[:, None, None] * residual_covariance
            + slope @ comoment_slope
            + n[:, None, None] * (missing_mean[:, :, None] * missing_mean[:, None, :])
        )
        total += np.bincount(m.ravel(), weights=(n[:, None] * missing_mean).ravel(), minlength=p)
        observed_missing = np.bincount(self.om, weights=cross_om.ravel(), minlength=p * p).reshape(p, p)
        cross += observed_missing + observed_missing.T
        cross += np.bincount(self.mm, weights=cross_mm.ravel(), minlength=p * p).reshape(p, p)


def _precision(covariance: np.ndarray) -> np.ndarray | None:
    """The inverse of a covariance matrix whose condition number is at most ``CONDITION_LIMIT``, else None.

    Inverting loses about ``log10(condition)`` of the 16 digits (Golub & Van
    Loan 2013, section 2.6.2); within the limit the EM estimate agrees with
    direct solves of ``Sigma_oo`` to about 1e-10.

    References
    ----------
    Golub, G. H., Van Loan, C. F. (2013). Matrix Computations, 4th ed. Johns
    Hopkins University Press.
    """
    eigenvalues = np.linalg.eigvalsh(covariance)
    if eigenvalues[0] <= eigenvalues[-1] / CONDITION_LIMIT:
        return None
    inverse = np.linalg.inv(covariance)
    return (inverse + inverse.T) / 2


def _solve_symmetric(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``a x = b`` for a symmetric positive semi-definite ``a`` (least squares when singular)."""
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        return np.linalg.lstsq(a, b, rcond=None)[0]


def _solve_symmetric_stack(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``a[i] x[i] = b[i]`` for a stack of symmetric positive semi-definite ``a`` (least squares for a singular one)."""
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        return np.stack([_solve_symmetric(a_i, b_i) for a_i, b_i in zip(a, b)])


@dataclass(frozen=True)
class LittleTest:
    """Little's chi-square test of missing completely at random."""

    statistic: float
    df: int
    p_value: float
    patterns: int
    rows: int
    converged: bool


def little_mcar(moments: PatternMoments) -> LittleTest | None:
    """Little's (1988) test: sum over patterns of n_j (ybar_j - mu_j)' Sigma_j^-1 (ybar_j - mu_j).

    ``mu`` and ``Sigma`` are the maximum-likelihood (EM) estimates under a
    multivariate normal model; ``mu_j``, ``Sigma_j`` their parts for the
    columns pattern ``j`` observes. Under MCAR the statistic is
    asymptotically chi-square with ``sum_j p_j - p`` degrees of freedom.
    Returns None when there are fewer than two patterns (nothing to compare).

    References
    ----------
    Little, R. J. A. (1988). A test of missing completely at random for
    multivariate data with missing values. JASA 83(404), 1198-1202, eq. (5).
    """
    import scipy.stats

    groups = moments.usable()
    p = len(moments.columns)
    if len(groups) < 2 or p == 0:
        return None
    estimate = normal_em(moments)
    statistic = 0.0
    for stack in _PatternStack.split(groups, p):
        difference = stack.mean - estimate.mean[stack.o]
        sigma_oo, _ = stack.blocks(estimate.covariance)
        solved = _solve_symmetric_stack(sigma_oo, difference[:, :, None])[:, :, 0]
        statistic += float(stack.count @ np.einsum("ij,ij->i", difference, solved))
    df = sum(int(observed.sum()) for observed, _ in groups) - p
    if df <= 0:
        return None
    p_value = float(scipy.stats.chi2.sf(statistic, df))
    rows = sum(g.count for _, g in groups)
    return LittleTest(float(statistic), int(df), p_value, len(groups), int(rows), estimate.converged)

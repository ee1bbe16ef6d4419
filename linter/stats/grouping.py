"""Grouped rows (site-days, repeated measures, clusters): per-group sums that merge, and what they say about a fit.

Every statistic here comes from :class:`GroupFactors`: per group, its row
count, the means of the design columns and the target, and the R factor of
its rows centred on those means. They merge across row batches (two parts of
one group combine like Chan's pairwise variance update, with QR in place of
sums of squares), so the stream and Dask engines find the same groups as the
memory engine; and from them follow, for any coefficient vector, each
group's residual mean and within-group residual sum of squares, its score
``X_g' e_g`` for cluster-robust standard errors, and the within- and
between-group regressions.

References
----------
Chan, T. F., Golub, G. H., LeVeque, R. J. (1979). Updating formulae and a pairwise algorithm for computing sample variances.
Kish, L. (1965). Survey Sampling. Wiley, sec. 5.4 (design effect of cluster samples).
Donner, A., Koval, J. J. (1980). The estimation of intraclass correlation in the analysis of family data. Biometrics 36.
Cameron, A. C., Miller, D. L. (2015). A practitioner's guide to cluster-robust inference. J. Human Resources 50(2).
Mundlak, Y. (1978). On the pooling of time series and cross section data. Econometrica 46(1).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Sequence

import numpy as np

from .factor import DesignFactor
from .fit import PreliminaryFit
from .mergeable import TriangularFactor, triangular

BETWEEN_ONLY = 1e-10


@dataclass(frozen=True)
class GroupRows:
    """Which group each complete case belongs to: ``codes`` index ``labels`` (sorted); ``sizes`` count rows per group."""

    labels: tuple[str, ...]
    codes: np.ndarray

    @classmethod
    def of(cls, labels: Sequence[str] | np.ndarray) -> "GroupRows":
        """Groups of the given row labels."""
        unique, codes = np.unique(np.asarray(labels, dtype=object).astype(str), return_inverse=True)
        return cls(tuple(str(u) for u in unique), codes.astype(np.int64))

    @property
    def count(self) -> int:
        """Number of groups."""
        return len(self.labels)

    @cached_property
    def sizes(self) -> np.ndarray:
        """Rows per group."""
        return np.bincount(self.codes, minlength=self.count)

    @cached_property
    def members(self) -> tuple[np.ndarray, ...]:
        """The row indices of each group, in row order."""
        if not self.count:
            return ()
        order = np.argsort(self.codes, kind="stable")
        return tuple(np.split(order, np.cumsum(self.sizes)[:-1]))


@dataclass(frozen=True)
class GroupFactors:
    """Per group: row count, column means and the R factor of the centred rows, for ``k`` columns (design, then target).

    ``labels`` are sorted; ``r[g]`` is upper triangular with ``r[g]' r[g]``
    the centred cross-product matrix of group ``g``.
    """

    labels: tuple[str, ...]
    counts: np.ndarray
    means: np.ndarray
    r: np.ndarray

    @classmethod
    def of(cls, X: np.ndarray, y: np.ndarray, rows: GroupRows) -> "GroupFactors":
        """The factors of the rows of ``[X | y]``, grouped by ``rows``."""
        k = X.shape[1] + 1
        means = np.zeros((rows.count, k))
        r = np.zeros((rows.count, k, k))
        sizes = rows.sizes
        order = np.argsort(rows.codes, kind="stable")
        starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
        # Groups of one size are stacked and factored together: one batched QR per distinct size.
        for size in np.unique(sizes[sizes > 0]):
            chosen = np.flatnonzero(sizes == size)
            picked = order[starts[chosen][:, None] + np.arange(size)[None, :]]
            block = np.concatenate([X[picked], y[picked][:, :, None]], axis=2)
            means[chosen] = block.mean(axis=1)
            r[chosen] = _triangular_each(block - means[chosen][:, None, :], k)
        return cls(rows.labels, sizes.astype(np.int64), means, r)

    @property
    def count(self) -> int:
        """Number of groups."""
        return len(self.labels)

    @property
    def rows(self) -> int:
        """Rows counted over every group."""
        return int(self.counts.sum())

    def merge(self, other: "GroupFactors") -> "GroupFactors":
        """The factors of both parts; a group found in both combines its means and centred factors exactly.

        For a shared group ``R = qr([R_a; R_b; sqrt(n_a n_b / n) (mean_b - mean_a)])``, all shared groups in
        one stacked QR.
        """
        labels = tuple(sorted(set(self.labels) | set(other.labels)))
        index = {label: g for g, label in enumerate(labels)}
        k = self.means.shape[1]
        counts = np.zeros(len(labels), dtype=np.int64)
        means = np.zeros((len(labels), k))
        r = np.zeros((len(labels), k, k))
        mine = np.array([index[label] for label in self.labels], dtype=np.int64)
        theirs = np.array([index[label] for label in other.labels], dtype=np.int64)
        counts[mine], means[mine], r[mine] = self.counts, self.means, self.r
        shared = np.zeros(len(labels), dtype=bool)
        shared[mine] = True
        only = ~shared[theirs]
        counts[theirs[only]], means[theirs[only]], r[theirs[only]] = other.counts[only], other.means[only], other.r[only]
        both, source = theirs[~only], np.flatnonzero(~only)
        if both.size:
            na, nb = counts[both].astype(float), other.counts[source].astype(float)
            n = na + nb
            delta = other.means[source] - means[both]
            stacked = np.concatenate([r[both], other.r[source], (np.sqrt(na * nb / n)[:, None] * delta)[:, None, :]], axis=1)
            r[both] = _triangular_each(stacked, k)
            means[both] = means[both] + delta * (nb / n)[:, None]
            counts[both] = counts[both] + other.counts[source]
        return GroupFactors(labels, counts, means, r)

    def placed(self, destination: Sequence[int], width: int) -> "GroupFactors":
        """The factors with column ``j`` moved to ``destination[j]`` of ``width`` columns (the others zero)."""
        if list(destination) == list(range(width)):
            return self
        means = np.zeros((self.count, width))
        r = np.zeros((self.count, self.r.shape[1], width))
        means[:, destination] = self.means
        r[:, :, destination] = self.r
        return GroupFactors(self.labels, self.counts, means, _triangular_each(r, width))

    def select(self, columns: Sequence[int]) -> "GroupFactors":
        """The factors of the chosen columns, in the order given."""
        chosen = list(columns)
        return GroupFactors(self.labels, self.counts, self.means[:, chosen].copy(), _triangular_each(self.r[:, :, chosen], len(chosen)))

    # ------------------------------------------------------------ column facts

    @cached_property
    def within_sum_of_squares(self) -> np.ndarray:
        """Per column, the sum of squares about each group's own mean."""
        return np.einsum("gij,gij->j", self.r, self.r)

    @cached_property
    def between_sum_of_squares(self) -> np.ndarray:
        """Per column, the sum over groups of ``n_g`` times the squared distance of the group mean from the overall mean."""
        grand = self.counts @ self.means / max(self.rows, 1)
        return self.counts @ (self.means - grand) ** 2

    def within_share(self) -> np.ndarray:
        """Per column, the share of its variation that lies within groups (NaN for a constant column)."""
        within, between = self.within_sum_of_squares, self.between_sum_of_squares
        total = within + between
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(total > 0, within / np.where(total > 0, total, 1.0), np.nan)

    # ------------------------------------------------------------ residuals of a fit

    def residual_sums(self, coef: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Each group's residual mean and within-group residual sum of squares, for coefficients ``coef`` (design order)."""
        v = _residual_vector(coef)
        mean = self.means @ v
        centred = np.einsum("gij,j->gi", self.r, v)
        return mean, np.einsum("gi,gi->g", centred, centred)

    def scores(self, coef: np.ndarray) -> np.ndarray:
        """Each group's score ``X_g' e_g`` (groups x design columns), for coefficients ``coef``."""
        v = _residual_vector(coef)
        centred = np.einsum("gij,j->gi", self.r, v)
        within = np.einsum("gij,gi->gj", self.r, centred)[:, :-1]
        mean = self.means @ v
        return within + (self.counts * mean)[:, None] * self.means[:, :-1]


def _residual_vector(coef: np.ndarray) -> np.ndarray:
    """``[-b | 1]``, so that ``[x | y] @ v`` is the residual (coefficients the design cannot estimate count as zero)."""
    return np.concatenate([-np.nan_to_num(coef), [1.0]])


def _triangular_each(r: np.ndarray, width: int) -> np.ndarray:
    """The ``width x width`` R factor of each matrix of the stack ``r`` (groups x rows x width), in one stacked QR."""
    out = np.zeros((r.shape[0], width, width))
    if r.shape[0] == 0 or width == 0:
        return out
    if r.shape[1] < width:
        r = np.concatenate([r, np.zeros((r.shape[0], width - r.shape[1], width))], axis=1)
    out[:] = np.linalg.qr(r, mode="r")
    return out


@dataclass(frozen=True)
class IntraclassCorrelation:
    """The one-way ANOVA estimate of the intraclass correlation, with its F test, design effect and effective size.

    ``size_n0`` is the ANOVA's average group size ``(N - sum n_g^2 / N) / (G - 1)``;
    ``design_effect`` uses the mean group size ``N / G`` (Kish 1965).
    """

    icc: float
    f_statistic: float
    p_value: float
    groups: int
    rows: int
    size_n0: float
    mean_square_between: float
    mean_square_within: float

    @property
    def mean_size(self) -> float:
        """Rows per group on average."""
        return self.rows / self.groups

    @property
    def design_effect(self) -> float:
        """``1 + (m - 1) ICC`` with ``m`` the mean group size (a negative ICC counts as zero)."""
        return 1.0 + (self.mean_size - 1.0) * max(self.icc, 0.0)

    @property
    def effective_rows(self) -> float:
        """Rows divided by the design effect."""
        return self.rows / self.design_effect


def one_way_icc(counts: np.ndarray, means: np.ndarray, within_ss: np.ndarray) -> IntraclassCorrelation:
    """The one-way random-effects ANOVA estimator ``(MSB - MSW) / (MSB + (n0 - 1) MSW)`` from group counts, means and within sums of squares.

    References
    ----------
    Donner & Koval (1980), Biometrics 36, eq. 2.1; Snedecor & Cochran (1989), Statistical Methods, 8th ed., sec. 13.3.
    """
    import scipy.stats

    counts = np.asarray(counts, dtype=float)
    groups, rows = int(counts.size), float(counts.sum())
    if groups < 2 or rows <= groups:
        return IntraclassCorrelation(float("nan"), float("nan"), float("nan"), groups, int(rows), float("nan"), float("nan"), float("nan"))
    grand = float(counts @ means / rows)
    msb = float(counts @ (means - grand) ** 2) / (groups - 1)
    msw = float(np.sum(within_ss)) / (rows - groups)
    n0 = (rows - float(counts @ counts) / rows) / (groups - 1)
    denominator = msb + (n0 - 1.0) * msw
    icc = (msb - msw) / denominator if denominator > 0 else float("nan")
    f = msb / msw if msw > 0 else float("inf")
    p = float(scipy.stats.f.sf(f, groups - 1, rows - groups)) if np.isfinite(f) else 0.0
    return IntraclassCorrelation(float(icc), float(f), p, groups, int(rows), float(n0), msb, msw)


def cr1_covariance(fit: PreliminaryFit, scores: np.ndarray) -> np.ndarray:
    """The cluster-robust (CR1) covariance of the coefficients: ``c (X'X)^-1 (sum_g s_g s_g') (X'X)^-1``.

    ``c = G / (G - 1) * (N - 1) / (N - k)`` with ``k`` the rank, as
    statsmodels' ``cov_type="cluster"`` computes it by default. Columns the
    design cannot estimate are NaN.

    References
    ----------
    Cameron & Miller (2015), J. Human Resources 50(2), eq. 11 and sec. II.C.
    """
    groups, n, k = scores.shape[0], fit.n, fit.rank
    cov = fit.cov_unscaled
    estimable = np.isfinite(np.diag(cov))
    out = np.full(cov.shape, np.nan)
    if groups < 2 or n <= k or not estimable.any():
        return out
    bread = cov[np.ix_(estimable, estimable)]
    meat = scores[:, estimable].T @ scores[:, estimable]
    correction = groups / (groups - 1) * (n - 1) / (n - k)
    out[np.ix_(estimable, estimable)] = correction * bread @ meat @ bread
    return out


@dataclass(frozen=True)
class GroupDeletions:
    """What deleting each whole group does to the fit: ``shift[g]`` is ``b - b_(g)`` (design units, NaN where not
    estimable) and ``cooks[g]`` the group's Cook's distance (infinite when the other groups cannot estimate every
    coefficient)."""

    shift: np.ndarray
    cooks: np.ndarray


def group_deletions(factors: GroupFactors, fit: PreliminaryFit) -> GroupDeletions:
    """Delete each group in turn, all groups at once in the ``rank``-dimensional whitened coordinates of the fit.

    With ``M`` the fit's leverage map (``M' X'X M = I``), ``B_g = M' X_g'X_g M``
    comes from the group's centred factor and mean, and
    ``b - b_(g) = M (I - B_g)^-1 M' X_g' e_g``; Cook's distance is
    ``||(I - B_g)^-1 M' X_g' e_g||^2 / (k s^2)``. O(G k^3), no row is read.

    References
    ----------
    Cook & Weisberg (1982), Residuals and Influence in Regression, sec. 3.6 (deleting subsets of cases).
    """
    groups, p = factors.count, factors.means.shape[1] - 1
    k = fit.rank
    shift = np.full((groups, p), np.nan)
    cooks = np.full(groups, np.nan)
    if k == 0 or groups == 0 or fit.df_resid <= 0:
        return GroupDeletions(shift, cooks)
    whiten = fit.leverage_map
    centred = factors.r[:, :, :p] @ whiten
    mean = np.sqrt(factors.counts)[:, None] * (factors.means[:, :p] @ whiten)
    kept = np.eye(k) - np.einsum("gij,gil->gjl", centred, centred) - np.einsum("gj,gl->gjl", mean, mean)
    reach = factors.scores(fit.coef) @ whiten
    smallest = np.linalg.eigvalsh(kept)[:, 0]
    solvable = smallest > max(k, 1) * 1e3 * np.finfo(float).eps
    moved = np.zeros((groups, k))
    moved[solvable] = np.linalg.solve(kept[solvable], reach[solvable][:, :, None])[:, :, 0]
    estimable = fit.factor.perm[:k]
    shift[np.ix_(solvable, estimable)] = (moved[solvable] @ whiten.T)[:, estimable]
    s2 = fit.rss / fit.df_resid
    cooks[solvable] = np.einsum("gj,gj->g", moved[solvable], moved[solvable]) / (k * s2) if s2 > 0 else np.inf
    cooks[~solvable] = np.inf
    return GroupDeletions(shift, cooks)


@dataclass(frozen=True)
class TwoLevelSlopes:
    """Within-group and between-group slopes of the design columns that vary both ways (NaN elsewhere).

    ``within`` comes from least squares on group-mean-centred columns, with
    the fixed-effects degrees of freedom ``N - G - k``; ``between`` from
    least squares of the group means of the target on the group means of
    every design column, one row per group.
    """

    within: np.ndarray
    within_se: np.ndarray
    between: np.ndarray
    between_se: np.ndarray
    both_ways: np.ndarray

    @property
    def contrast(self) -> np.ndarray:
        """``(between - within) / sqrt(se_between^2 + se_within^2)``: the two estimators are uncorrelated (Mundlak 1978)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return (self.between - self.within) / np.sqrt(self.between_se**2 + self.within_se**2)


def two_level_slopes(groups: GroupFactors, intercept_column: int | None) -> TwoLevelSlopes:
    """The within and between regressions of the target from the group factors (design columns, then the target).

    A column varies both ways when the share of its variation within groups
    lies strictly between :data:`BETWEEN_ONLY` and ``1 - BETWEEN_ONLY``.
    """
    p = groups.means.shape[1] - 1
    share = groups.within_share()[:p]
    varies_within = np.nan_to_num(share) > BETWEEN_ONLY
    both_ways = varies_within & (np.nan_to_num(share, nan=1.0) < 1.0 - BETWEEN_ONLY)
    if intercept_column is not None:
        varies_within[intercept_column] = both_ways[intercept_column] = False
    within, within_se = np.full(p, np.nan), np.full(p, np.nan)
    chosen = np.flatnonzero(varies_within)
    dof = groups.rows - groups.count - chosen.size
    if chosen.size and dof > 0:
        stacked = triangular(groups.r[:, :, [*chosen, p]].reshape(-1, chosen.size + 1))
        norms = np.sqrt(np.einsum("ij,ij->j", stacked[:, :-1], stacked[:, :-1]))
        scales = np.where(norms > 0, norms, 1.0)
        stacked[:, :-1] /= scales
        factor = DesignFactor.from_triangular(TriangularFactor(stacked, groups.rows), scales)
        fit = PreliminaryFit(factor, float("nan"), False)
        if fit.rank == chosen.size:
            within[chosen] = fit.coef
            within_se[chosen] = fit.se * np.sqrt(fit.df_resid / dof)
    between, between_se = np.full(p, np.nan), np.full(p, np.nan)
    if groups.count > p:
        means_fit = PreliminaryFit(DesignFactor.of(groups.means[:, :p], groups.means[:, p]), float("nan"), intercept_column is not None)
        if means_fit.df_resid > 0:
            between, between_se = means_fit.coef, means_fit.se
    return TwoLevelSlopes(within, within_se, between, between_se, both_ways)


def within_group_residual(X: np.ndarray, y: np.ndarray, rows: GroupRows) -> np.ndarray:
    """Residuals of ``y`` on ``X`` plus one intercept per group, without building the group indicators.

    By the Frisch-Waugh-Lovell theorem these are the residuals of the group
    means removed from ``y`` regressed on ``X`` with its group means removed
    (columns constant within every group vanish and are dropped); the solve is
    an SVD least squares, O(n p^2) whatever the number of groups.
    """
    sizes = np.maximum(rows.sizes, 1).astype(np.float64)
    codes = rows.codes
    y_within = y - (np.bincount(codes, weights=y, minlength=rows.count) / sizes)[codes]
    if X.shape[1] == 0:
        return y_within
    sums = np.zeros((rows.count, X.shape[1]))
    np.add.at(sums, codes, X)
    X_within = X - (sums / sizes[:, None])[codes]
    scale = np.sqrt(np.einsum("ij,ij->j", X_within, X_within))
    varying = scale > 1e-9 * np.maximum(1.0, np.sqrt(np.einsum("ij,ij->j", X, X)))
    if not varying.any():
        return y_within
    coef, *_ = np.linalg.lstsq(X_within[:, varying], y_within, rcond=None)
    return y_within - X_within[:, varying] @ coef

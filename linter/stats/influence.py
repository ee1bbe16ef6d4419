"""Per-row influence of least-squares fits in closed form, and what deleting rows does to the coefficients.

Every measure is a function of the fit (R factor, residual sum of squares,
rank) and of the row itself (its design values, hat value and residual), so
it is computed batch by batch in O(rows p^2) once the fit is known, and never
needs the n x n hat matrix or n refits.

References
----------
Belsley, D. A., Kuh, E., Welsch, R. E. (1980). Regression Diagnostics. Wiley, ch. 2.
Cook, R. D., Weisberg, S. (1982). Residuals and Influence in Regression. Chapman & Hall, ch. 3.
Chatterjee, S., Hadi, A. S. (1988). Sensitivity Analysis in Linear Regression. Wiley, ch. 4-5.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import scipy.linalg

from .blas import one_blas_thread
from .fit import PreliminaryFit, RowScores

INFLUENCE_ROWS = 8_192


@dataclass(frozen=True)
class DfbetasTerms:
    """What DFBETAS of any row are made of: ``t_i c_ij / (sqrt(c_jj) sqrt(1 - h_i))`` with ``c_i = (X'X)^-1 x_i``.

    ``columns`` is ``(X'X)^-1`` with each column divided by ``sqrt(c_jj)``
    (zero where the design cannot estimate the coefficient), so that a row's
    DFBETAS are one product ``x_i columns`` scaled by the row's own terms.
    """

    X: np.ndarray = field(repr=False)
    columns: np.ndarray
    root_remaining: np.ndarray = field(repr=False)
    studentized: np.ndarray = field(repr=False)
    estimable: np.ndarray
    undefined: np.ndarray = field(repr=False)

    def unit(self, rows: np.ndarray | slice) -> np.ndarray:
        """``c_ij / (sqrt(c_jj) sqrt(1 - h_i))`` of the chosen rows before the studentized residual, transposed (p x rows).

        Coefficients run down the first axis so that a maximum over them is an
        elementwise pass over whole rows of the block.
        """
        with np.errstate(divide="ignore", invalid="ignore"):
            unit = self.columns.T @ self.X[rows].T
            unit /= self.root_remaining[rows]
        return unit

    def finish(self, unit: np.ndarray, rows: np.ndarray | slice) -> np.ndarray:
        """Turn :meth:`unit` of the chosen rows into transposed DFBETAS in place (NaN where undefined)."""
        with np.errstate(invalid="ignore"):
            unit *= self.studentized[rows]
        unit[~self.estimable] = np.nan
        unit[:, self.undefined[rows]] = np.nan
        return unit


@dataclass(frozen=True)
class RowInfluence:
    """Closed-form deletion measures of one batch of complete rows.

    ``studentized`` is the externally studentized residual
    ``e_i / (s_(i) sqrt(1 - h_i))``; ``cooks`` is Cook's distance with the
    rank of the design as the number of parameters; :attr:`dfbetas` (rows x p)
    is the change of each coefficient when the row is deleted, in units of
    the deleted-row standard error (NaN for coefficients the design cannot
    estimate), built on demand (:meth:`dfbetas_of` gives chosen rows only);
    ``dfbetas_largest`` is ``max_j |dfbetas_ij|`` of each row;
    ``dfbetas_reach`` is ``max_j |dfbetas_ij| / |studentized_i|``, the factor
    that turns a row's studentized residual into its largest DFBETAS, needed
    for the chance of crossing a DFBETAS cutoff.
    """

    hat: np.ndarray
    residual: np.ndarray
    studentized: np.ndarray
    cooks: np.ndarray
    dffits: np.ndarray
    dfbetas_largest: np.ndarray
    dfbetas_reach: np.ndarray
    terms: DfbetasTerms = field(repr=False, compare=False)

    def dfbetas_of(self, rows: np.ndarray) -> np.ndarray:
        """DFBETAS of the chosen rows (len(rows) x p)."""
        rows = np.asarray(rows, dtype=np.int64)
        return self.terms.finish(self.terms.unit(rows), rows).T

    @cached_property
    def dfbetas(self) -> np.ndarray:
        """DFBETAS of every row (rows x p), built ``INFLUENCE_ROWS`` rows at a time on first use."""
        rows = len(self.hat)
        out = np.empty((rows, self.terms.columns.shape[1]))
        with one_blas_thread():
            for start in range(0, rows, INFLUENCE_ROWS):
                block = slice(start, start + INFLUENCE_ROWS)
                out[block] = self.terms.finish(self.terms.unit(block), block).T
        return out


def _sensitivities(fit: PreliminaryFit, X: np.ndarray) -> np.ndarray:
    """``(X'X)^-1 x_i`` for every row of ``X`` (rows x p, design units; NaN for columns the design cannot estimate).

    One matrix product with the p x p ``(X'X)^-1`` that the fit builds from ``R^-1``: O(rows p^2).
    """
    cov = fit.cov_unscaled
    estimable = np.isfinite(np.diag(cov))
    out = X @ np.where(np.isfinite(cov), cov, 0.0)
    out[:, ~estimable] = np.nan
    return out


def _dfbetas_terms(fit: PreliminaryFit, X: np.ndarray, root_remaining: np.ndarray, studentized: np.ndarray, undefined: np.ndarray) -> DfbetasTerms:
    cov = fit.cov_unscaled
    diagonal = np.diag(cov)
    estimable = np.isfinite(diagonal)
    columns = np.zeros_like(cov)
    columns[np.ix_(estimable, estimable)] = cov[np.ix_(estimable, estimable)] / np.sqrt(diagonal[estimable])[None, :]
    return DfbetasTerms(X, columns, root_remaining, studentized, estimable, undefined)


def _largest_and_reach(terms: DfbetasTerms) -> tuple[np.ndarray, np.ndarray]:
    """``max_j |dfbetas_ij|`` and ``max_j |dfbetas_ij| / |t_i|`` of every row, ``INFLUENCE_ROWS`` rows at a time.

    Each block is one matrix product whose result stays in cache; the rows x p
    DFBETAS matrix itself is never stored.
    """
    rows = terms.X.shape[0]
    largest, reach = np.empty(rows), np.empty(rows)
    with one_blas_thread():
        for start in range(0, rows, INFLUENCE_ROWS):
            block = slice(start, start + INFLUENCE_ROWS)
            unit = terms.unit(block)
            np.fmax.reduce(np.abs(unit), axis=0, out=reach[block])
            np.fmax.reduce(np.abs(terms.finish(unit, block)), axis=0, out=largest[block])
    return largest, reach


def deleted_variance(fit: PreliminaryFit, hat: np.ndarray, residual: np.ndarray) -> np.ndarray:
    """Residual variance without row i: ``(RSS - e_i^2 / (1 - h_i)) / (n - k - 1)`` (NaN without degrees of freedom)."""
    dof = fit.df_resid - 1
    if dof <= 0:
        return np.full(hat.shape, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        value = (fit.rss - residual**2 / (1.0 - hat)) / dof
    return np.maximum(value, 0.0)


def row_influence(fit: PreliminaryFit, X: np.ndarray, y: np.ndarray, scores: RowScores | None = None) -> RowInfluence:
    """Studentized residuals, Cook's distance, DFFITS and DFBETAS of a batch of complete rows, given the fit.

    ``scores`` are the batch's hat values and residuals from
    :meth:`PreliminaryFit.score_rows`, computed here when not given. Rows
    with ``h_i = 1`` (the fit passes through them whatever their value) get
    NaN deletion measures.

    References
    ----------
    Belsley, Kuh & Welsch (1980), eq. 2.4-2.11; Cook & Weisberg (1982), sec. 3.4.
    """
    if scores is None:
        scores = fit.score_rows(X, y)
    hat, residual = scores.hat, scores.residual
    k, rows = fit.rank, len(residual)
    if k == 0 or fit.df_resid <= 0:
        empty = np.full(rows, np.nan)
        terms = DfbetasTerms(X, np.zeros((fit.factor.p, fit.factor.p)), empty, empty, np.zeros(fit.factor.p, dtype=bool), np.ones(rows, dtype=bool))
        return RowInfluence(hat, residual, empty, empty.copy(), empty.copy(), empty.copy(), empty.copy(), terms)
    s2 = fit.rss / fit.df_resid
    s2_deleted = deleted_variance(fit, hat, residual)
    undefined = hat >= 1.0 - 1e-12
    with np.errstate(divide="ignore", invalid="ignore"):
        remaining = 1.0 - hat
        studentized = residual / np.sqrt(s2_deleted * remaining)
        cooks = residual**2 * hat / (k * s2 * remaining**2)
        dffits = studentized * np.sqrt(hat / remaining)
    terms = _dfbetas_terms(fit, X, np.sqrt(remaining), studentized, undefined)
    largest, reach = _largest_and_reach(terms)
    for measure in (studentized, cooks, dffits, reach, largest):
        measure[undefined] = np.nan
    return RowInfluence(hat, residual, studentized, cooks, dffits, largest, reach, terms)


def deletion_shift(fit: PreliminaryFit, X: np.ndarray, residual: np.ndarray, hat: np.ndarray) -> np.ndarray:
    """``b - b_(i)`` for each given row (rows x p): the rank-one downdate ``(X'X)^-1 x_i e_i / (1 - h_i)``.

    This is the exact leave-one-out change of the coefficients (Sherman-Morrison
    update of ``(X'X)^-1``), in the units of the design columns; columns the
    design cannot estimate are NaN.

    References
    ----------
    Belsley, Kuh & Welsch (1980), eq. 2.1; Cook & Weisberg (1982), eq. 3.4.3.
    """
    if fit.rank == 0 or len(residual) == 0:
        return np.full((len(residual), fit.factor.p), np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        weight = residual / (1.0 - hat)
    return _sensitivities(fit, X) * weight[:, None]


@dataclass(frozen=True)
class GroupDeletion:
    """What deleting a set of rows at once does to the fit.

    ``shift`` is ``b - b_(S)`` in design-column units; ``cooks`` the group
    Cook's distance ``(b - b_(S))' X'X (b - b_(S)) / (k s^2)``; ``rss_drop``
    how much the residual sum of squares falls; ``se_after`` the standard
    errors of the coefficients fitted without the rows (from the Woodbury
    update of ``(X'X)^-1``). ``cooks`` is infinite when the remaining rows
    cannot estimate every coefficient.
    """

    rows: int
    shift: np.ndarray
    cooks: float
    rss_drop: float
    se_after: np.ndarray


def group_deletion(fit: PreliminaryFit, X: np.ndarray, residual: np.ndarray) -> GroupDeletion:
    """Delete the rows ``X`` (m x p, m small) together: ``b - b_(S) = (X'X)^-1 X_S' (I - H_SS)^-1 e_S``.

    Only the m x m block ``H_SS`` of the hat matrix is formed, from ``R^-T x``.

    References
    ----------
    Cook & Weisberg (1982), sec. 3.6 (deleting subsets of cases); Belsley, Kuh & Welsch (1980), sec. 2.2.
    """
    with one_blas_thread():
        return _group_deletion(fit, X, residual)


#: Deleted sets larger than this are refitted without the rows (O(n p^2)) instead of forming the m x m block (O(m^3)).
DIRECT_DELETION_ROWS = 500


def rows_deleted(fit: PreliminaryFit, deleted: np.ndarray) -> GroupDeletion:
    """Delete the rows where ``deleted`` (a boolean mask over the complete cases) is set, for any number of them.

    Up to :data:`DIRECT_DELETION_ROWS` rows this is :func:`group_deletion`;
    beyond, the coefficients are fitted again on the remaining rows (SVD least
    squares on the estimable columns), which gives the same shift, Cook's
    distance, fall in the residual sum of squares and standard errors.
    """
    rows = np.flatnonzero(deleted)
    X, y = fit.X, fit.y
    if X is None or y is None:
        raise ValueError("deleting rows needs the fit's design and target")
    residual = y - X @ np.nan_to_num(fit.coef)
    if rows.size <= DIRECT_DELETION_ROWS:
        return group_deletion(fit, X[rows], residual[rows])
    f, k, m = fit.factor, fit.rank, int(rows.size)
    shift, se_after = np.full(f.p, np.nan), np.full(f.p, np.nan)
    cols = np.sort(f.perm[:k])
    kept = ~deleted
    dof_after = fit.df_resid - m
    if k == 0 or dof_after <= 0:
        return GroupDeletion(m, shift, float("inf"), float("nan"), se_after)
    with one_blas_thread():
        after, _, rank_after, singular = np.linalg.lstsq(X[kept][:, cols], y[kept], rcond=None)
        if rank_after < k:
            return GroupDeletion(m, shift, float("inf"), float("nan"), se_after)
        moved = fit.coef[cols] - after
        shift[cols] = moved
        rss_after = float(np.sum((y[kept] - X[kept][:, cols] @ after) ** 2))
        s2 = fit.rss / fit.df_resid
        change = X[:, cols] @ moved
        cooks = float(change @ change / (k * s2)) if s2 > 0 else float("inf")
        _, r = np.linalg.qr(X[kept][:, cols])
        inverse = scipy.linalg.solve_triangular(r, np.eye(k), check_finite=False)
        se_after[cols] = np.sqrt(rss_after / dof_after * np.einsum("ij,ij->i", inverse, inverse))
    return GroupDeletion(m, shift, cooks, fit.rss - rss_after, se_after)


def _group_deletion(fit: PreliminaryFit, X: np.ndarray, residual: np.ndarray) -> GroupDeletion:
    f, k, m = fit.factor, fit.rank, len(residual)
    shift, se_after = np.full(f.p, np.nan), np.full(f.p, np.nan)
    if k == 0 or m == 0 or fit.df_resid <= 0:
        return GroupDeletion(m, shift, float("nan"), float("nan"), se_after)
    cols = f.perm[:k]
    r11 = f.r[:k, :k]
    w = scipy.linalg.solve_triangular(r11, (X[:, cols] / f.scales[cols]).T, trans="T", check_finite=False)
    keep = np.eye(m) - w.T @ w
    singular_values = scipy.linalg.svdvals(keep)
    if singular_values[-1] <= max(m, k) * np.finfo(float).eps * max(1.0, singular_values[0]):
        return GroupDeletion(m, shift, float("inf"), float("nan"), se_after)
    weights = scipy.linalg.solve(keep, residual, assume_a="sym")
    moved_w = w @ weights
    moved_scaled = scipy.linalg.solve_triangular(r11, moved_w, check_finite=False)
    shift[cols] = moved_scaled / f.scales[cols]
    s2 = fit.rss / fit.df_resid
    cooks = float(moved_w @ moved_w / (k * s2)) if s2 > 0 else float("inf")
    rss_drop = float(residual @ weights)
    dof_after = fit.df_resid - m
    if dof_after > 0:
        inverse = scipy.linalg.solve_triangular(r11, np.eye(k), check_finite=False)
        reach = scipy.linalg.solve_triangular(r11, w, check_finite=False)
        added = np.einsum("km,mk->k", reach, scipy.linalg.solve(keep, reach.T, assume_a="sym"))
        variance = (np.einsum("ij,ij->i", inverse, inverse) + added) / f.scales[cols] ** 2
        scaled = max(fit.rss - rss_drop, 0.0) / dof_after * variance
        se_after[cols] = np.sqrt(np.where(scaled >= 0, scaled, np.nan))
    return GroupDeletion(m, shift, cooks, rss_drop, se_after)

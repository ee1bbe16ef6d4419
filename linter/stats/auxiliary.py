"""Auxiliary regressions on the preliminary fit, reusing its QR factor instead of refactoring the design.

A vector ``v`` regressed on ``[X | Z]`` has the residual sum of squares of
``v`` regressed on the part of ``Z`` that ``X`` does not explain (the
Frisch-Waugh-Lovell theorem), so every score test that adds columns to the
design (squares of fitted values, squares of a predictor, lagged residuals,
products of predictors) needs only the R factor of ``X`` already computed
and a small QR of the added columns.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.linalg

from .factor import EPS, DesignFactor
from .fit import PreliminaryFit
from .mergeable import TriangularFactor

DEPENDENT_SHARE = float(np.sqrt(EPS))
BATCH_CELLS = 1 << 21


@dataclass(frozen=True)
class AddedFit:
    """``v`` regressed on ``[X | Z]``: residual sum of squares, ranks, and the added columns' coefficients.

    ``added_rank`` counts the columns of ``Z`` not already explained by
    ``X`` or by earlier columns of ``Z`` (to a share ``sqrt(eps)`` of their
    length); ``coef`` holds their coefficients (NaN for dependent ones);
    ``largest_shift`` is the largest change the added columns make to a
    fitted value, in the units of ``v``; ``residual`` is ``v``'s residual
    from the augmented regression.
    """

    rss_base: float
    rss: float
    rank: int
    added_rank: int
    coef: np.ndarray
    n: int
    largest_shift: float = 0.0
    residual: np.ndarray | None = None

    @property
    def df_resid(self) -> int:
        """Residual degrees of freedom of the augmented regression."""
        return self.n - self.rank

    @property
    def f_statistic(self) -> float:
        """F statistic for the added columns: ``((rss_base - rss) / added_rank) / (rss / df_resid)``."""
        if self.added_rank == 0 or self.df_resid <= 0 or self.rss <= 0:
            return float("nan")
        return float((self.rss_base - self.rss) / self.added_rank / (self.rss / self.df_resid))

    @property
    def partial_r_squared(self) -> float:
        """Share of the base residual sum of squares the added columns explain."""
        return float(1.0 - self.rss / self.rss_base) if self.rss_base > 0 else float("nan")

    @property
    def cohen_f_squared(self) -> float:
        """Cohen's effect size f^2 = partial R^2 / (1 - partial R^2).

        References
        ----------
        Cohen, J. (1988). Statistical Power Analysis for the Behavioral
        Sciences, 2nd ed., sec. 9.2.
        """
        share = self.partial_r_squared
        return float(share / (1.0 - share)) if share < 1.0 else float("inf")


@dataclass(frozen=True)
class AddedColumns:
    """Columns to add to the design, produced one batch of rows at a time so that wide sets never sit in memory whole."""

    width: int
    rows: Callable[[int, int], np.ndarray]

    @classmethod
    def of(cls, Z: np.ndarray) -> "AddedColumns":
        """Added columns held in memory (n x m)."""
        Z = np.asarray(Z, dtype=np.float64)
        return cls(int(Z.shape[1]), lambda start, stop: Z[start:stop])


def row_batches(n: int, width: int) -> list[tuple[int, int]]:
    """Row ranges of at most :data:`BATCH_CELLS` cells each for a block ``width`` columns wide."""
    step = max(1, BATCH_CELLS // max(width, 1))
    return [(start, min(n, start + step)) for start in range(0, n, step)]


Projection = tuple[Callable[[int, int], np.ndarray], list[tuple[int, int]], np.ndarray]


def _projected(factor: DesignFactor, X: np.ndarray, v: np.ndarray, added: AddedColumns) -> Projection:
    """``[Z | v]`` minus its projection on the design, batch by batch, with the added columns scaled to unit length.

    Returns a function giving the projected block for a row range, the row
    batches, and the original lengths of the added columns. The projection
    uses the corrected semi-normal equations with one refinement pass.
    """
    n, m = X.shape[0], added.width
    batches = row_batches(n, m + factor.p + 1)
    k = factor.rank
    cols = factor.perm[:k]
    r = factor.r[:k, :k]

    def block(start: int, stop: int) -> tuple[np.ndarray, np.ndarray]:
        scaled = X[start:stop, cols] / factor.scales[cols]
        return scaled, np.column_stack([added.rows(start, stop), v[start:stop]])

    coef_x = np.zeros((k, m + 1))
    squares = np.zeros(m + 1)
    for refinement in range(2):
        gram = np.zeros((k, m + 1))
        for start, stop in batches:
            scaled, right = block(start, stop)
            if refinement == 0:
                squares += np.einsum("ij,ij->j", right, right)
            if k:
                gram += scaled.T @ (right - scaled @ coef_x)
        if k:
            inner = scipy.linalg.solve_triangular(r, gram, trans="T", check_finite=False)
            coef_x = coef_x + scipy.linalg.solve_triangular(r, inner, check_finite=False)
    lengths = np.where(squares[:m] > 0, np.sqrt(squares[:m]), 1.0)
    unit = np.append(1.0 / lengths, 1.0)

    def rest(start: int, stop: int) -> np.ndarray:
        scaled, right = block(start, stop)
        return (right - scaled @ coef_x) * unit

    return rest, batches, lengths


def _as_added(Z: np.ndarray | AddedColumns, n: int) -> AddedColumns:
    return Z if isinstance(Z, AddedColumns) else AddedColumns.of(np.asarray(Z, dtype=np.float64).reshape(n, -1))


def _leading_independent(diagonal: np.ndarray) -> int:
    """How many leading pivots of a column-pivoted R stand clear of dependence.

    Pivots decrease in size, so the independent columns come first; counting
    only the leading run keeps an overflowed (NaN or infinite) pivot from
    letting a zero one through.
    """
    clear = np.abs(diagonal) > DEPENDENT_SHARE
    return int(diagonal.size if clear.all() else np.argmin(clear))


def regress_added(factor: DesignFactor, X: np.ndarray, v: np.ndarray, Z: np.ndarray | AddedColumns) -> AddedFit:
    """Regress ``v`` on ``[X | Z]`` using the R factor of ``X``; ``Z`` may have zero columns.

    ``[Z | v]`` is projected off the design in row batches (corrected
    semi-normal equations with one refinement pass), and the R factors of the
    projected batches are merged (tall-skinny QR), so the added block is
    never held whole.

    References
    ----------
    Björck, Å. (1987). Stability analysis of the method of seminormal
    equations for linear least squares problems. Linear Algebra Appl. 88/89.
    """
    n = X.shape[0]
    added = _as_added(Z, n)
    m = added.width
    rest, batches, lengths = _projected(factor, X, np.asarray(v, dtype=np.float64), added)
    merged = TriangularFactor.of(np.zeros((0, m + 1)))
    for start, stop in batches:
        merged = merged.merge(TriangularFactor.of(rest(start, stop)))
    rss_base = float(np.sum(merged.r[:, m] ** 2))
    coef = np.full(m, np.nan)
    if m == 0:
        return AddedFit(rss_base, rss_base, factor.rank, 0, coef, n, 0.0, _column(rest, batches, 0, np.zeros(0)))
    q2, r2, perm = scipy.linalg.qr(merged.r[:m, :m], pivoting=True, check_finite=False)
    qty = q2.T @ merged.r[:m, m]
    kept = _leading_independent(np.diag(r2))
    rss = float(merged.r[m, m] ** 2 + np.sum(qty[kept:] ** 2))
    on_unit = np.zeros(m)
    if kept:
        solution = scipy.linalg.solve_triangular(r2[:kept, :kept], qty[:kept], check_finite=False)
        on_unit[perm[:kept]] = solution
        coef[perm[:kept]] = solution / lengths[perm[:kept]]
    residual = _column(rest, batches, m, on_unit)
    shift = 0.0
    if n and kept:
        shift = max(float(np.max(np.abs(rest(start, stop)[:, :m] @ on_unit))) for start, stop in batches)
    return AddedFit(rss_base, rss, factor.rank + kept, kept, coef, n, shift, residual)


def each_added_alone(factor: DesignFactor, X: np.ndarray, v: np.ndarray, Z: np.ndarray | AddedColumns) -> list[AddedFit]:
    """For each column of ``Z`` on its own, ``v`` regressed on ``[X | z_j]``; one projection serves all columns.

    The fits carry no residual vector.
    """
    n = X.shape[0]
    added = _as_added(Z, n)
    m = added.width
    rest, batches, lengths = _projected(factor, X, np.asarray(v, dtype=np.float64), added)
    cross, largest = np.zeros(m + 1), np.zeros(m)
    outside = np.zeros(m)
    for start, stop in batches:
        piece = rest(start, stop)
        outside += np.einsum("ij,ij->j", piece[:, :m], piece[:, :m])
        cross += piece.T @ piece[:, m]
        if piece.shape[0]:
            largest = np.maximum(largest, np.max(np.abs(piece[:, :m]), axis=0))
    rss_base = float(cross[m])
    fits = []
    for j in range(m):
        if outside[j] <= DEPENDENT_SHARE**2:
            fits.append(AddedFit(rss_base, rss_base, factor.rank, 0, np.full(1, np.nan), n))
            continue
        on_unit = cross[j] / outside[j]
        rss = max(rss_base - cross[j] * on_unit, 0.0)
        fits.append(AddedFit(rss_base, rss, factor.rank + 1, 1, np.array([on_unit / lengths[j]]), n, float(abs(on_unit) * largest[j])))
    return fits


def _column(rest: Callable[[int, int], np.ndarray], batches: list[tuple[int, int]], m: int, on_unit: np.ndarray) -> np.ndarray:
    """The last column of the projected block minus the added columns' fit, batch by batch."""
    parts = [piece[:, m] - piece[:, :m] @ on_unit for piece in (rest(start, stop) for start, stop in batches)]
    return np.concatenate(parts) if parts else np.zeros(0)


def hc3_standard_errors(fit: PreliminaryFit, X: np.ndarray, residual: np.ndarray, hat: np.ndarray) -> np.ndarray:
    """Heteroscedasticity-consistent (HC3) standard errors of the coefficients, NaN where not estimable.

    ``cov = (X'X)^-1 X' diag(e_i^2 / (1 - h_ii)^2) X (X'X)^-1``, evaluated as
    ``R^-1 (Q' W Q) R^-T`` from the fit's R factor; rows with leverage 1
    (their residual is exactly zero) contribute nothing.

    References
    ----------
    MacKinnon, J. G., White, H. (1985). Some heteroskedasticity-consistent
    covariance matrix estimators with improved finite sample properties.
    J. Econometrics 29(3).
    Long, J. S., Ervin, L. H. (2000). Using heteroscedasticity consistent
    standard errors in the linear regression model. Am. Stat. 54(3).
    """
    factor = fit.factor
    k = factor.rank
    out = np.full(factor.p, np.nan)
    if k == 0:
        return out
    cols = factor.perm[:k]
    scaled = X[:, cols] / factor.scales[cols]
    r = factor.r[:k, :k]
    q_rows = scipy.linalg.solve_triangular(r, scaled.T, trans="T", check_finite=False)
    room = 1.0 - hat
    weights = np.divide(residual**2, room**2, out=np.zeros_like(residual), where=room > EPS * 16)
    meat = (q_rows * weights) @ q_rows.T
    r_inverse = scipy.linalg.solve_triangular(r, np.eye(k), check_finite=False)
    cov = r_inverse @ meat @ r_inverse.T
    out[cols] = np.sqrt(np.diag(cov)) / factor.scales[cols]
    return out


def lagged(values: np.ndarray, lags: int, groups: np.ndarray | None = None) -> np.ndarray:
    """Columns ``values[t - 1], ..., values[t - lags]``, zero before the start of the series (n x lags).

    With ``groups`` (one code per row, rows of a group contiguous), each
    group is its own series: a lag reaching into another group is zero.
    """
    n = values.size
    out = np.zeros((n, lags))
    for lag in range(1, lags + 1):
        out[lag:, lag - 1] = values[: n - lag]
        if groups is not None:
            out[lag:, lag - 1] *= groups[lag:] == groups[: n - lag]
    return out


def durbin_watson(residual: np.ndarray, groups: np.ndarray | None = None) -> float:
    """Durbin-Watson statistic ``sum((e_t - e_{t-1})^2) / sum(e_t^2)`` of residuals in their order.

    With ``groups``, differences are taken only within a group's series.

    References
    ----------
    Durbin, J., Watson, G. S. (1950). Testing for serial correlation in least
    squares regression I. Biometrika 37(3/4).
    """
    total = float(residual @ residual)
    steps = np.diff(residual)
    if groups is not None:
        steps = steps[groups[1:] == groups[:-1]]
    return float(np.sum(steps**2) / total) if total > 0 else float("nan")


def autocorrelations(residual: np.ndarray, lags: int, groups: np.ndarray | None = None) -> np.ndarray:
    """Autocorrelations ``sum(e_t e_{t-k}) / sum(e_t^2)`` for k = 1..lags, pairs within a group only when grouped."""
    total = float(residual @ residual)
    if total <= 0:
        return np.full(lags, np.nan)
    return np.sum(lagged(residual, lags, groups) * residual[:, None], axis=0) / total

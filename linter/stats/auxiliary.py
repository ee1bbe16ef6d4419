"""Auxiliary regressions on the preliminary fit, reusing its QR factor instead of refactoring the design.

A vector ``v`` regressed on ``[X | Z]`` has the residual sum of squares of
``v`` regressed on the part of ``Z`` that ``X`` does not explain (the
Frisch-Waugh-Lovell theorem), so every score test that adds columns to the
design (squares of fitted values, squares of a predictor, lagged residuals,
products of predictors) needs only the R factor of ``X`` already computed
and a small QR of the added columns.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import scipy.linalg

from .blas import one_blas_thread
from .factor import EPS, DesignFactor, leading_clear_pivots
from .fit import PreliminaryFit
from .mergeable import triangular

DEPENDENT_SHARE = float(np.sqrt(EPS))
BATCH_CELLS = 1 << 21
BATCH_ROWS = 4_096


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
    """Columns to add to the design, produced one batch of rows at a time so that wide sets never sit in memory whole.

    ``fill(start, stop, out)`` writes the added columns of rows
    ``start:stop`` into ``out`` (``stop - start`` x ``width``), a block in
    the memory ``order`` ("C" rows or "F" columns) it writes fastest.
    """

    width: int
    fill: Callable[[int, int, np.ndarray], None]
    order: Literal["C", "F"] = "C"

    @classmethod
    def of(cls, Z: np.ndarray) -> "AddedColumns":
        """Added columns held in memory (n x m)."""
        Z = np.asarray(Z, dtype=np.float64)

        def fill(start: int, stop: int, out: np.ndarray) -> None:
            out[...] = Z[start:stop]

        return cls(int(Z.shape[1]), fill)


def column_picker(index: np.ndarray) -> slice | np.ndarray:
    """``index`` as a slice when its columns are consecutive (a view instead of a gathered copy)."""
    index = np.asarray(index, dtype=int)
    if index.size and np.array_equal(index, np.arange(index[0], index[0] + index.size)):
        return slice(int(index[0]), int(index[0]) + index.size)
    return index


def row_batches(n: int, width: int) -> list[tuple[int, int]]:
    """Row ranges of at most :data:`BATCH_CELLS` cells and at most :data:`BATCH_ROWS` rows each for a block ``width`` columns wide.

    Small batches keep each block and its temporaries in cache (measured
    fastest between 2,048 and 4,096 rows at 20 to 280 columns).
    """
    step = max(1, min(BATCH_ROWS, BATCH_CELLS // max(width, 1)))
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
        # All columns in design order (no gather); the coefficients carry the pivot order instead.
        scaled = X[start:stop] / factor.scales
        right = np.empty((stop - start, m + 1), order=added.order)
        added.fill(start, stop, right[:, :m])
        right[:, m] = v[start:stop]
        return scaled, right

    def in_design_order(coef: np.ndarray) -> np.ndarray:
        spread = np.zeros((factor.p, m + 1))
        spread[cols] = coef
        return spread

    coef_x = np.zeros((k, m + 1))
    squares = np.zeros(m + 1)
    for refinement in range(2):
        gram = np.zeros((factor.p, m + 1))
        spread = in_design_order(coef_x)
        for start, stop in batches:
            scaled, right = block(start, stop)
            if refinement == 0:
                squares += np.einsum("ij,ij->j", right, right)
            if k:
                gram += scaled.T @ (right - scaled @ spread if refinement else right)
        if k:
            inner = scipy.linalg.solve_triangular(r, gram[cols], trans="T", check_finite=False)
            coef_x = coef_x + scipy.linalg.solve_triangular(r, inner, check_finite=False)
    lengths = np.where(squares[:m] > 0, np.sqrt(squares[:m]), 1.0)
    unit = np.append(1.0 / lengths, 1.0)
    spread = in_design_order(coef_x)

    def rest(start: int, stop: int) -> np.ndarray:
        scaled, right = block(start, stop)
        return (right - scaled @ spread) * unit

    return rest, batches, lengths


def _as_added(Z: np.ndarray | AddedColumns, n: int) -> AddedColumns:
    return Z if isinstance(Z, AddedColumns) else AddedColumns.of(np.asarray(Z, dtype=np.float64).reshape(n, -1))


def _absorbed(r: np.ndarray, block: np.ndarray) -> np.ndarray:
    """The R factor of ``r`` stacked on ``block``: one more batch merged into a tall-skinny QR in one factorisation."""
    stacked = np.empty((r.shape[0] + block.shape[0], block.shape[1]), order="F")
    stacked[: r.shape[0]] = r
    stacked[r.shape[0] :] = block
    return triangular(stacked)


def regress_added(
    factor: DesignFactor, X: np.ndarray, v: np.ndarray, Z: np.ndarray | AddedColumns, keep_residual: bool = True
) -> AddedFit:
    """Regress ``v`` on ``[X | Z]`` using the R factor of ``X``; ``Z`` may have zero columns.

    ``[Z | v]`` is projected off the design in row batches (corrected
    semi-normal equations with one refinement pass), and the R factors of the
    projected batches are merged (tall-skinny QR), so the added block is
    never held whole. Batches are small, so they run on one BLAS thread.
    Without ``keep_residual`` the fit carries no residual vector and no
    ``largest_shift`` (one pass over the rows fewer).

    References
    ----------
    Björck, Å. (1987). Stability analysis of the method of seminormal
    equations for linear least squares problems. Linear Algebra Appl. 88/89.
    """
    with one_blas_thread():
        return _regress_added(factor, X, v, Z, keep_residual)


def _regress_added(
    factor: DesignFactor, X: np.ndarray, v: np.ndarray, Z: np.ndarray | AddedColumns, keep_residual: bool
) -> AddedFit:
    n = X.shape[0]
    added = _as_added(Z, n)
    m = added.width
    rest, batches, lengths = _projected(factor, X, np.asarray(v, dtype=np.float64), added)
    merged = np.zeros((0, m + 1))
    for start, stop in batches:
        merged = _absorbed(merged, rest(start, stop))
    if merged.shape[0] < m + 1:
        merged = triangular(merged)
    rss_base = float(np.sum(merged[:, m] ** 2))
    coef = np.full(m, np.nan)
    if m == 0:
        residual = _column(rest, batches, 0, np.zeros(0)) if keep_residual else None
        return AddedFit(rss_base, rss_base, factor.rank, 0, coef, n, 0.0, residual)
    q2, r2, perm = scipy.linalg.qr(merged[:m, :m], pivoting=True, check_finite=False)
    qty = q2.T @ merged[:m, m]
    kept = leading_clear_pivots(np.diag(r2), DEPENDENT_SHARE)
    rss = float(merged[m, m] ** 2 + np.sum(qty[kept:] ** 2))
    on_unit = np.zeros(m)
    if kept:
        solution = scipy.linalg.solve_triangular(r2[:kept, :kept], qty[:kept], check_finite=False)
        on_unit[perm[:kept]] = solution
        coef[perm[:kept]] = solution / lengths[perm[:kept]]
    if not keep_residual:
        return AddedFit(rss_base, rss, factor.rank + kept, kept, coef, n)
    parts: list[np.ndarray] = []
    shift = 0.0
    for start, stop in batches:
        piece = rest(start, stop)
        change = piece[:, :m] @ on_unit
        parts.append(piece[:, m] - change)
        if kept and change.size:
            shift = max(shift, float(np.max(np.abs(change))))
    residual = np.concatenate(parts) if parts else np.zeros(0)
    return AddedFit(rss_base, rss, factor.rank + kept, kept, coef, n, shift, residual)


def each_added_alone(factor: DesignFactor, X: np.ndarray, v: np.ndarray, Z: np.ndarray | AddedColumns) -> list[AddedFit]:
    """For each column of ``Z`` on its own, ``v`` regressed on ``[X | z_j]``; one projection serves all columns.

    The fits carry no residual vector.
    """
    with one_blas_thread():
        return _each_added_alone(factor, X, v, Z)


def _each_added_alone(factor: DesignFactor, X: np.ndarray, v: np.ndarray, Z: np.ndarray | AddedColumns) -> list[AddedFit]:
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
    room = 1.0 - hat
    weights = np.divide(residual**2, room**2, out=np.zeros_like(residual), where=room > EPS * 16)
    leverage_map = fit.leverage_map
    meat = np.zeros((k, k))
    with one_blas_thread():
        for start in range(0, X.shape[0], BATCH_ROWS):
            # Rows of Q for this block: the scaled estimable columns times R^-1.
            q_rows = X[start : start + BATCH_ROWS] @ leverage_map
            meat += (q_rows.T * weights[start : start + BATCH_ROWS]) @ q_rows
    r_inverse = fit.r11_inverse
    cov = r_inverse @ meat @ r_inverse.T
    out[cols] = np.sqrt(np.diag(cov)) / factor.scales[cols]
    return out


def r_squared_on_each(X: np.ndarray, v: np.ndarray, groups: Sequence[Sequence[int]]) -> list[float]:
    """For each group of columns of ``X``, the R^2 of ``v`` regressed on that group and a constant (0 when ``v`` is constant).

    The centred columns and the centred ``v`` are factored once by a
    tall-skinny QR in row batches; as ``[Xc | vc] = Q R``, each group's
    regression is the small least-squares problem on the matching columns
    of ``R``, so the rows are read once whatever the number of groups.
    """
    used = sorted({int(j) for group in groups for j in group})
    n = X.shape[0]
    if n == 0:
        return [0.0 for _ in groups]
    with one_blas_thread():
        # Each column over its largest magnitude: no R^2 changes, and no sum overflows.
        sums, largest = np.zeros(len(used)), np.zeros(len(used))
        for start in range(0, n, BATCH_ROWS):
            largest = np.fmax(largest, np.max(np.abs(X[start : start + BATCH_ROWS, used]), axis=0))
        scales = np.where(np.isfinite(largest) & (largest > 0), largest, 1.0)
        for start in range(0, n, BATCH_ROWS):
            sums += (X[start : start + BATCH_ROWS, used] / scales).sum(axis=0)
        means, centre = sums / n, float(np.mean(v))
        merged = np.zeros((0, len(used) + 1))
        for start in range(0, n, BATCH_ROWS):
            block = np.column_stack([X[start : start + BATCH_ROWS, used] / scales - means, v[start : start + BATCH_ROWS] - centre])
            merged = _absorbed(merged, block)
    merged = triangular(merged) if merged.shape[0] < len(used) + 1 else merged
    target = merged[:, -1]
    total = float(target @ target)
    shares = []
    for group in groups:
        columns = merged[:, [used.index(int(j)) for j in group]]
        if not (np.all(np.isfinite(columns)) and np.isfinite(total)):
            shares.append(float("nan"))
            continue
        coef, *_ = np.linalg.lstsq(columns, target, rcond=None)
        left = target - columns @ coef
        shares.append(1.0 - float(left @ left) / total if total > 0 else 0.0)
    return shares


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

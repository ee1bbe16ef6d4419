"""The preliminary least-squares fit, from the QR factor: coefficients, standard errors, residuals, leverage."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import scipy.linalg

from .accuracy import Digits, Refined, perturbation_digits, refine
from .blas import one_blas_thread
from .factor import DesignFactor, condition_number

SCORE_ROWS = 8_192
REFINE_ABOVE = 1e-9
EPS = float(np.finfo(np.float64).eps)


@dataclass(frozen=True)
class RowScores:
    """Per-row quantities of one batch of complete rows: leverage and raw residual."""

    hat: np.ndarray
    residual: np.ndarray


@dataclass(frozen=True)
class PreliminaryFit:
    """Ordinary least squares on the complete cases, computed from the pivoted QR factor.

    Columns beyond the numerical rank are not estimable: their coefficient
    and standard error are NaN. ``tss`` is centred when the model has an
    intercept and uncentred otherwise, as statistics packages report R^2.

    Given the design ``X`` and target ``y`` the fit refines its solution with
    residuals in extended precision (see :func:`refine`) and can estimate how
    many digits of its coefficients and standard errors the data support
    (:attr:`digits`); without them it is the plain QR solution.
    """

    factor: DesignFactor
    tss: float
    has_intercept: bool
    X: np.ndarray | None = field(default=None, repr=False, compare=False)
    y: np.ndarray | None = field(default=None, repr=False, compare=False)

    @property
    def n(self) -> int:
        """Complete cases."""
        return self.factor.n

    @property
    def rank(self) -> int:
        """Numerical rank of the design."""
        return self.factor.rank

    @property
    def df_resid(self) -> int:
        """Residual degrees of freedom, n - rank."""
        return self.n - self.rank

    @cached_property
    def r11_inverse(self) -> np.ndarray:
        """``R11^-1`` (rank x rank), the inverse of the estimable block of the pivoted, scaled R factor."""
        k = self.rank
        return scipy.linalg.solve_triangular(self.factor.r[:k, :k], np.eye(k)) if k else np.zeros((0, 0))

    @cached_property
    def _refined(self) -> Refined | None:
        f, k = self.factor, self.rank
        if self.X is None or self.y is None or k == 0:
            return None
        z = scipy.linalg.solve_triangular(f.r[:k, :k], f.qty[:k], check_finite=False)
        if self.forward_error_bound <= REFINE_ABOVE:
            return Refined(z, self.qr_rss, self.forward_error_bound, 0)
        return refine(f, self.X, self.y, z)

    @cached_property
    def qr_rss(self) -> float:
        """Residual sum of squares of the plain QR solution (before any refinement)."""
        return float(self.factor.rss_outside + np.sum(self.factor.qty[self.rank :] ** 2))

    @cached_property
    def forward_error_bound(self) -> float:
        """A first-order bound on the relative error of the plain QR solution: ``k eps kappa (2 + kappa tan(theta))``.

        ``kappa`` is the condition number of the estimable, unit-length-scaled
        columns and ``tan(theta)`` the ratio of the residual norm to the fitted
        values' norm. Below :data:`REFINE_ABOVE` the solution needs no refinement
        (and the row passes that refinement costs are skipped).

        References
        ----------
        Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., thm. 20.1. SIAM.
        Golub, G. H., Van Loan, C. F. (2013). Matrix Computations, 4th ed., sec. 5.3.8.
        """
        f, k = self.factor, self.rank
        if k == f.p and f.r.shape[0] == k:
            values = f.singular_values_scaled  # the whole factor: shared with every other reader of its singular values
        else:
            values = scipy.linalg.svdvals(f.r[:k, :k]) if k else np.zeros(0)
        kappa = condition_number(values)
        fitted = float(np.linalg.norm(f.qty[:k]))
        residual = float(np.sqrt(self.qr_rss))
        tangent = residual / fitted if fitted > 0 else float("inf")
        return float(k * EPS * kappa * (2.0 + kappa * tangent))

    @cached_property
    def coef(self) -> np.ndarray:
        """Coefficients in the units of the design columns."""
        f, k = self.factor, self.rank
        out = np.full(f.p, np.nan)
        if k:
            refined = self._refined
            solution = refined.z if refined is not None else scipy.linalg.solve_triangular(f.r[:k, :k], f.qty[:k])
            out[f.perm[:k]] = solution / f.scales[f.perm[:k]]
        return out

    @property
    def rss(self) -> float:
        """Residual sum of squares."""
        refined = self._refined
        if refined is not None:
            return refined.rss
        return self.qr_rss

    @cached_property
    def digits(self) -> Digits | None:
        """Estimated correct significant digits of each estimable coefficient and standard error.

        Ordered like the pivoted estimable columns ``factor.perm[:rank]``; see
        :attr:`coef_digits` and :attr:`se_digits` for design order. None
        without the design rows. Computing it costs a few passes over the rows.
        """
        refined = self._refined
        if refined is None or self.X is None or self.y is None:
            return None
        return perturbation_digits(self.factor, self.X, self.y, refined)

    def _in_design_order(self, values: np.ndarray) -> np.ndarray:
        out = np.full(self.factor.p, np.nan)
        out[self.factor.perm[: self.rank]] = values
        return out

    @property
    def coef_digits(self) -> np.ndarray | None:
        """Estimated correct significant digits of each coefficient, in design order (NaN if not estimable)."""
        digits = self.digits
        return None if digits is None else self._in_design_order(digits.coef)

    @property
    def se_digits(self) -> np.ndarray | None:
        """Estimated correct significant digits of each standard error, in design order (NaN if not estimable)."""
        digits = self.digits
        return None if digits is None else self._in_design_order(digits.se)

    @property
    def sigma(self) -> float:
        """Residual standard deviation, sqrt(RSS / (n - rank)); NaN without residual degrees of freedom."""
        return float(np.sqrt(self.rss / self.df_resid)) if self.df_resid > 0 else float("nan")

    @cached_property
    def cov_unscaled(self) -> np.ndarray:
        """(X'X)^-1 over the estimable columns (others NaN), from R^-1 without forming X'X."""
        f, k = self.factor, self.rank
        out = np.full((f.p, f.p), np.nan)
        if k:
            inv = self.r11_inverse
            cols = f.perm[:k]
            scale = f.scales[cols]
            out[np.ix_(cols, cols)] = (inv @ inv.T) / np.outer(scale, scale)
        return out

    @cached_property
    def se(self) -> np.ndarray:
        """Standard errors of the coefficients."""
        return self.sigma * np.sqrt(np.diag(self.cov_unscaled))

    @property
    def r_squared(self) -> float:
        """R^2 (centred with an intercept, uncentred without)."""
        return 1.0 - self.rss / self.tss if self.tss > 0 else float("nan")

    @property
    def adjusted_r_squared(self) -> float:
        """R^2 adjusted for the parameters used."""
        dof_total = self.n - 1 if self.has_intercept else self.n
        if self.df_resid <= 0 or dof_total <= 0:
            return float("nan")
        return 1.0 - (1.0 - self.r_squared) * dof_total / self.df_resid

    @cached_property
    def leverage_map(self) -> np.ndarray:
        """``M`` (p x rank) with ``h_ii = ||x_i M||^2`` for a design row ``x_i`` in design units.

        Row ``perm[j]`` of ``M`` is row ``j`` of ``R11^-1`` divided by that
        column's scale; rows of columns the design cannot estimate are zero.
        ``x_i M`` is ``R11^-T`` applied to the scaled estimable part of ``x_i``.
        """
        f, k = self.factor, self.rank
        out = np.zeros((f.p, k))
        if k:
            cols = f.perm[:k]
            out[cols] = self.r11_inverse / f.scales[cols][:, None]
        return out

    def score_rows(self, X: np.ndarray, y: np.ndarray) -> RowScores:
        """Leverage h_ii = ||R^-T x_i||^2 and residuals for a batch of complete rows (O(rows p^2)).

        Rows are taken ``SCORE_ROWS`` at a time: one matrix product with
        :attr:`leverage_map` and a row sum of squares per block, so no
        temporary is larger than a block.
        """
        rows, k = len(y), self.rank
        residual = np.asarray(y, dtype=np.float64) - X @ np.nan_to_num(self.coef)
        hat = np.zeros(rows)
        if not k:
            return RowScores(hat, residual)
        leverage_map = self.leverage_map
        with one_blas_thread():
            for start in range(0, rows, SCORE_ROWS):
                w = X[start : start + SCORE_ROWS] @ leverage_map
                np.einsum("ij,ij->i", w, w, out=hat[start : start + SCORE_ROWS])
        return RowScores(hat, residual)

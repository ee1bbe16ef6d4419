"""How accurate the preliminary fit is: refinement of the solution and an estimate of its correct digits.

Both passes walk the rows in fixed-size batches, so they need no more memory
than one batch in extended precision and can run batch by batch on a stream.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator

import numpy as np
import scipy.linalg

from .factor import EPS, DesignFactor

BATCH_ROWS = 16_384
MAX_DIGITS = 14.0
DIGITS_MARGIN = 10.0
PERTURBATION_SAMPLES = 3
PERTURBATION_SEED = 20_240_601
CONVERGED = 4 * EPS


def _batches(rows: int) -> Iterator[slice]:
    for start in range(0, rows, BATCH_ROWS):
        yield slice(start, min(start + BATCH_ROWS, rows))


@dataclass(frozen=True)
class Refined:
    """A least-squares solution after iterative refinement, with its residual sum of squares.

    ``correction`` is the relative size of the last correction applied: once
    refinement has converged it bounds the error the solver itself leaves.
    When refinement was not needed (``steps`` 0) it is the a-priori bound on
    the plain solution's relative error.
    """

    z: np.ndarray
    rss: float
    correction: float
    steps: int


def _residual_pass(X: np.ndarray, y: np.ndarray, cols: np.ndarray, coef: np.ndarray) -> tuple[np.ndarray, float]:
    """``X' r`` and ``r' r`` for ``r = y - X[:, cols] coef``, accumulated in extended precision."""
    wide = coef.astype(np.longdouble)
    gradient = np.zeros(cols.size, dtype=np.longdouble)
    rss = np.longdouble(0.0)
    for rows in _batches(X.shape[0]):
        block = X[rows][:, cols].astype(np.longdouble)
        residual = y[rows].astype(np.longdouble) - np.einsum("ij,j->i", block, wide)
        gradient += np.einsum("ij,i->j", block, residual)
        rss += np.dot(residual, residual)
    return gradient.astype(np.float64), float(rss)


def refine(factor: DesignFactor, X: np.ndarray, y: np.ndarray, z: np.ndarray, max_steps: int = 3) -> Refined:
    """Refine ``z`` (the solution for the first ``rank`` pivoted, scaled columns) with residuals in extended precision.

    Each step solves ``R'R dz = Xs' r`` with the R factor already at hand
    (corrected semi-normal equations), where ``r`` and ``Xs' r`` are summed in
    ``np.longdouble``; it stops when the correction falls below a few units
    of rounding or after ``max_steps``.

    References
    ----------
    Björck, Å. (1987). Stability analysis of the method of seminormal equations for linear least squares
    problems. Linear Algebra Appl. 88/89, 31-48.
    Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., ch. 12 and 20. SIAM.
    """
    k = z.size
    cols = factor.perm[:k]
    scales = factor.scales[cols]
    r = factor.r[:k, :k]
    coef = z / scales
    gradient, rss = _residual_pass(X, y, cols, coef)
    correction = float("inf")
    steps = 0
    for steps in range(1, max_steps + 1):
        w = scipy.linalg.solve_triangular(r, gradient / scales, trans="T", check_finite=False)
        dz = scipy.linalg.solve_triangular(r, w, check_finite=False)
        top = float(np.max(np.abs(z))) or 1.0
        correction = float(np.max(np.abs(dz))) / top
        z = z + dz
        coef = z / scales
        gradient, rss = _residual_pass(X, y, cols, coef)
        if correction <= CONVERGED:
            break
    return Refined(z, rss, correction, steps)


@dataclass(frozen=True)
class Digits:
    """Estimated correct significant digits of each estimable coefficient and standard error."""

    coef: np.ndarray
    se: np.ndarray

    @property
    def least(self) -> float:
        """The fewest digits over every coefficient and standard error (MAX_DIGITS when there are none)."""
        both = np.concatenate([self.coef, self.se])
        return float(both.min()) if both.size else MAX_DIGITS


def _digits(error: np.ndarray, value: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        relative = DIGITS_MARGIN * error / np.abs(value)
        digits = -np.log10(relative)
    digits = np.where(np.isfinite(digits), digits, np.where(relative == 0, MAX_DIGITS, 0.0))
    return np.clip(np.floor(digits * 10) / 10, 0.0, MAX_DIGITS)


def _unit_noise(rng: np.random.Generator, shape: tuple[int, ...]) -> np.ndarray:
    """Seeded noise of unit standard deviation: uniform on [-sqrt(3), sqrt(3)), drawn in single precision for speed."""
    return (rng.random(shape, dtype=np.float32) - np.float32(0.5)) * np.float32(2.0 * np.sqrt(3.0))


def perturbation_digits(factor: DesignFactor, X: np.ndarray, y: np.ndarray, refined: Refined) -> Digits:
    """Digits of the coefficients and standard errors that survive rounding the data to double precision.

    A table held in doubles is already rounded: every entry of ``X`` and ``y``
    carries a relative error up to ``eps / 2``. Small-sample statistical
    condition estimation perturbs every entry by a seeded random relative
    amount of size ``eps``, propagates it through the first-order
    perturbation of the least-squares solution and of ``sigma^2 (X'X)^-1``,
    and takes the root mean square over a few samples; the digits claimed
    are those of that change times a safety margin of 10. When refinement
    has not converged, its last correction is added to the error.

    References
    ----------
    Kenney, C. S., Laub, A. J. (1994). Small-sample statistical condition estimates for general matrix
    functions. SIAM J. Sci. Comput. 15(1), 36-61.
    Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., sec. 20.1. SIAM.
    """
    k = refined.z.size
    if k == 0:
        return Digits(np.zeros(0), np.zeros(0))
    cols = factor.perm[:k]
    scales = factor.scales[cols]
    r = factor.r[:k, :k]
    r_inverse = scipy.linalg.solve_triangular(r, np.eye(k), check_finite=False)
    cov = r_inverse @ r_inverse.T
    z = refined.z
    rss = refined.rss
    rng = np.random.default_rng(PERTURBATION_SEED)
    rhs = np.zeros((PERTURBATION_SAMPLES, k))
    d_rss = np.zeros(PERTURBATION_SAMPLES)
    d_gram = np.zeros((PERTURBATION_SAMPLES, k, k))
    for rows in _batches(X.shape[0]):
        xs = X[rows][:, cols] / scales
        residual = y[rows] - xs @ z
        for sample in range(PERTURBATION_SAMPLES):
            dx = xs * _unit_noise(rng, xs.shape)
            dy = y[rows] * _unit_noise(rng, (xs.shape[0],))
            moved = dy - dx @ z
            rhs[sample] += xs.T @ moved + dx.T @ residual
            d_rss[sample] += 2.0 * float(residual @ moved)
            d_gram[sample] += xs.T @ dx
    dz = EPS * rhs @ cov
    d_sigma_rel = EPS * d_rss / (2.0 * rss) if rss > 0 else np.full(PERTURBATION_SAMPLES, np.inf)
    d_cov_diag = -2.0 * EPS * np.einsum("ij,sjk,ki->si", cov, d_gram, cov)
    d_se_rel = d_sigma_rel[:, None] + d_cov_diag / (2.0 * np.diag(cov))[None, :]
    dz_sq = np.sum(dz**2, axis=0)
    dse_sq = np.sum(d_se_rel**2, axis=0)
    coef_error = np.sqrt(dz_sq / PERTURBATION_SAMPLES) + (refined.correction if refined.correction > CONVERGED else 0.0) * np.max(np.abs(z))
    se_error = np.sqrt(dse_sq / PERTURBATION_SAMPLES)
    return Digits(_digits(coef_error, z), _digits(se_error, np.ones(k)))

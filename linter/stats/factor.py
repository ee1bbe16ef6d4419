"""The pivoted QR factor of the unit-length-scaled design: numerical rank and exact dependencies."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.linalg

from .mergeable import TriangularFactor, triangular

EPS = float(np.finfo(np.float64).eps)
BATCH_ROWS = 8_192
SAFE_SQUARES = float(np.finfo(np.float64).tiny) / EPS


def _sum_of_squares(X: np.ndarray, divisor: np.ndarray | float, batch_rows: int) -> np.ndarray:
    squares = np.zeros(X.shape[1])
    for start in range(0, X.shape[0], batch_rows):
        shrunk = X[start : start + batch_rows] / divisor
        squares += np.einsum("ij,ij->j", shrunk, shrunk)
    return squares


def column_scales(X: np.ndarray, batch_rows: int = BATCH_ROWS) -> np.ndarray:
    """Euclidean norm of each column (1 for an all-zero column), to scale columns to unit length.

    Sums of squares are taken directly when that neither overflows nor underflows; otherwise each
    column is divided by its largest magnitude before squaring, so values up to the largest double
    do not overflow (a column whose norm itself exceeds the double range is scaled by its largest
    magnitude instead). Rows are taken ``batch_rows`` at a time, so no temporary is as large as ``X``.
    """
    if not X.size:
        return np.ones(X.shape[1])
    squares = _sum_of_squares(X, 1.0, batch_rows)
    if np.all(np.isfinite(squares) & ((squares == 0) | (squares >= SAFE_SQUARES))):
        norms = np.sqrt(squares)
    else:
        largest = np.zeros(X.shape[1])
        for start in range(0, X.shape[0], batch_rows):
            largest = np.maximum(largest, np.max(np.abs(X[start : start + batch_rows]), axis=0))
        largest = np.where(largest > 0, largest, 1.0)
        with np.errstate(over="ignore"):
            norms = largest * np.sqrt(_sum_of_squares(X, largest, batch_rows))
        # A norm beyond the largest double: the largest magnitude still scales the column into [-1, 1].
        norms = np.where(np.isfinite(norms), norms, largest)
    return np.where(norms > 0, norms, 1.0)


def augmented_factor(X: np.ndarray, y: np.ndarray, scales: np.ndarray) -> TriangularFactor:
    """The R factor of ``[X / scales | y]`` for one batch of rows; merge batches with ``merge``."""
    return TriangularFactor.of(np.column_stack([X / scales, y]))


def short_augmented_factor(X: np.ndarray, y: np.ndarray, scales: np.ndarray) -> TriangularFactor:
    """The R factor of ``[X / scales | y]`` for a design of fewer rows than columns, without its zero rows."""
    block = np.column_stack([X / scales, y])
    return TriangularFactor(triangular(block, short=True), int(block.shape[0]))


def leading_clear_pivots(diagonal: np.ndarray, tolerance: float) -> int:
    """How many leading pivots of a column-pivoted R have magnitude above ``tolerance``.

    Pivots decrease in size, so the independent columns come first; counting
    only the leading run keeps an overflowed (NaN or infinite) pivot from
    letting a zero one through.
    """
    clear = np.abs(diagonal) > tolerance
    return int(clear.size if clear.all() else np.argmin(clear))


def condition_number(values: np.ndarray) -> float:
    """2-norm condition number from singular values, largest first: 1 for none, infinite when the last is zero."""
    if values.size == 0:
        return 1.0
    return float(values[0] / values[-1]) if values[-1] > 0 else float("inf")


TIE = 1e-8


def pivoted_qr(a: np.ndarray, z: np.ndarray, relative_tolerance: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Householder QR with column pivoting of a small square ``a``: ``a[:, perm] = Q r``; also returns ``Q' z``.

    Each step takes the column with the largest remaining norm, as LAPACK's
    ``dgeqp3`` does, except that norms within a relative ``1e-8`` of the
    largest, or within the rank tolerance (``relative_tolerance`` times the
    largest first norm), count as tied and the first in design order wins.
    Exact ties (a dummy trap, a duplicated column) are then broken the same way
    whatever the rounding of the merged factor, so every engine names the same
    dependent columns.
    """
    r = np.array(a, dtype=np.float64)
    qtz = np.array(z, dtype=np.float64)
    m, n = r.shape
    perm = np.arange(n)
    floor = 0.0
    for j in range(min(m, n)):
        remaining = np.sqrt(np.einsum("ij,ij->j", r[j:, j:], r[j:, j:]))
        top = float(remaining.max()) if remaining.size else 0.0
        if j == 0:
            floor = relative_tolerance * top
        pick = j + int(np.argmax(remaining >= top - max(TIE * top, floor)))
        if pick != j:
            r[:, [j, pick]] = r[:, [pick, j]]
            perm[[j, pick]] = perm[[pick, j]]
        x = r[j:, j]
        norm = float(np.sqrt(x @ x))
        if norm == 0.0:
            continue
        alpha = -norm if x[0] >= 0 else norm
        v = x.copy()
        v[0] -= alpha
        vv = float(v @ v)
        if vv == 0.0:
            continue
        r[j:, j:] -= np.outer(v, (2.0 / vv) * (v @ r[j:, j:]))
        qtz[j:] -= v * ((2.0 / vv) * (v @ qtz[j:]))
        r[j + 1 :, j] = 0.0
    return np.triu(r), perm, qtz


@dataclass(frozen=True)
class Relation:
    """An exact linear dependency among design columns: ``left = sum(coef * right)``."""

    left: int
    right: tuple[int, ...]
    coefficients: tuple[float, ...]
    pivot: float


@dataclass(frozen=True)
class DesignFactor:
    """Pivoted QR of the scaled design, ``(X / scales)[:, perm] = Q r``, with ``Q' y`` carried along.

    ``r`` is p x p, or n x p (upper trapezoidal) for a design of n <= p rows.

    ``rank`` counts the diagonal entries of ``r`` above ``tolerance =
    max(n, p) * eps * |r[0, 0]|``, the usual numerical-rank tolerance
    (Golub & Van Loan, Matrix Computations, 4th ed., sec. 5.4).
    """

    scales: np.ndarray
    r: np.ndarray
    perm: np.ndarray
    qty: np.ndarray
    rss_outside: float
    n: int

    @classmethod
    def from_triangular(cls, merged: TriangularFactor, scales: np.ndarray) -> "DesignFactor":
        """Finish the factor from the merged R of ``[X / scales | y]``."""
        p = scales.size
        rho = merged.r[p, p] if merged.r.shape[0] > p else 0.0
        r0, z0 = merged.r[:p, :p], merged.r[:p, p]
        if p == 0:
            return cls(scales, np.zeros((0, 0)), np.zeros(0, dtype=int), np.zeros(0), float(rho**2), merged.rows)
        r2, perm, qtz = pivoted_qr(r0, z0, max(merged.rows, p) * EPS)
        return cls(scales, r2, perm, qtz, float(rho**2), merged.rows)

    @classmethod
    def of(cls, X: np.ndarray, y: np.ndarray, batch_rows: int = BATCH_ROWS) -> "DesignFactor":
        """Factor a whole design held in memory, ``batch_rows`` rows at a time (merged tall-skinny QR).

        Batches keep the scaled copy small (memory stays near the design's own
        size) and in cache; a design of at most ``batch_rows`` rows is one batch.
        """
        scales = column_scales(X)
        if X.shape[0] <= X.shape[1]:
            return cls.from_triangular(short_augmented_factor(X, y, scales), scales)
        merged = augmented_factor(X[:batch_rows], y[:batch_rows], scales)
        for start in range(batch_rows, X.shape[0], batch_rows):
            merged = merged.merge(augmented_factor(X[start : start + batch_rows], y[start : start + batch_rows], scales))
        return cls.from_triangular(merged, scales)

    @property
    def p(self) -> int:
        """Design columns."""
        return int(self.scales.size)

    @property
    def tolerance(self) -> float:
        """Diagonal entries of ``r`` at or below this count as zero."""
        top = abs(self.r[0, 0]) if self.p else 0.0
        return max(self.n, self.p) * EPS * top

    @cached_property
    def rank(self) -> int:
        """Numerical rank of the design."""
        if self.p == 0 or self.n == 0:
            return 0
        return leading_clear_pivots(np.diag(self.r), self.tolerance)

    @cached_property
    def singular_values_scaled(self) -> np.ndarray:
        """Singular values of the unit-length-scaled design, largest first."""
        return scipy.linalg.svdvals(self.r) if self.p else np.zeros(0)

    @cached_property
    def singular_values_raw(self) -> np.ndarray:
        """Singular values of the design as given (unscaled), largest first."""
        if not self.p:
            return np.zeros(0)
        undo = np.empty(self.p)
        undo[: self.p] = self.scales[self.perm]
        return scipy.linalg.svdvals(self.r * undo[None, :])

    @property
    def condition_scaled(self) -> float:
        """2-norm condition number of the unit-length-scaled design."""
        return condition_number(self.singular_values_scaled)

    @property
    def condition_raw(self) -> float:
        """2-norm condition number of the design as given."""
        return condition_number(self.singular_values_raw)

    def relations(self) -> list[Relation]:
        """Each column beyond the rank written as a combination of the independent ones (original units)."""
        k = self.rank
        out: list[Relation] = []
        if k == self.p:
            return out
        r11 = self.r[:k, :k]
        for j in range(k, self.p):
            combo = scipy.linalg.solve_triangular(r11, self.r[:k, j]) if k else np.zeros(0)
            dependent = int(self.perm[j])
            right = [int(c) for c in self.perm[:k]]
            coefficients = [float(c * self.scales[dependent] / self.scales[i]) for c, i in zip(combo, right)]
            out.append(Relation(dependent, tuple(right), tuple(coefficients), float(abs(self.r[j, j])) if j < self.r.shape[0] else 0.0))
        return out

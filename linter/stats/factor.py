"""The pivoted QR factor of the unit-length-scaled design: numerical rank and exact dependencies."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.linalg

from .mergeable import TriangularFactor

EPS = float(np.finfo(np.float64).eps)


def column_scales(X: np.ndarray) -> np.ndarray:
    """Euclidean norm of each column (1 for an all-zero column), to scale columns to unit length.

    Each column is divided by its largest magnitude before squaring, so values up to the largest
    double do not overflow.
    """
    if not X.size:
        return np.ones(X.shape[1])
    largest = np.max(np.abs(X), axis=0)
    largest = np.where(largest > 0, largest, 1.0)
    shrunk = X / largest
    norms = largest * np.sqrt(np.einsum("ij,ij->j", shrunk, shrunk))
    return np.where(norms > 0, norms, 1.0)


def augmented_factor(X: np.ndarray, y: np.ndarray, scales: np.ndarray) -> TriangularFactor:
    """The R factor of ``[X / scales | y]`` for one batch of rows; merge batches with ``merge``."""
    return TriangularFactor.of(np.column_stack([X / scales, y]))


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
        r0, z0, rho = merged.r[:p, :p], merged.r[:p, p], merged.r[p, p]
        if p == 0:
            return cls(scales, np.zeros((0, 0)), np.zeros(0, dtype=int), np.zeros(0), float(rho**2), merged.rows)
        q2, r2, perm = scipy.linalg.qr(r0, pivoting=True, check_finite=False)
        return cls(scales, r2, perm, q2.T @ z0, float(rho**2), merged.rows)

    @classmethod
    def of(cls, X: np.ndarray, y: np.ndarray) -> "DesignFactor":
        """Factor a whole design held in memory (one batch)."""
        scales = column_scales(X)
        return cls.from_triangular(augmented_factor(X, y, scales), scales)

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
        return int(np.sum(np.abs(np.diag(self.r)) > self.tolerance))

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

    @staticmethod
    def _condition(values: np.ndarray) -> float:
        if values.size == 0:
            return 1.0
        return float(values[0] / values[-1]) if values[-1] > 0 else float("inf")

    @property
    def condition_scaled(self) -> float:
        """2-norm condition number of the unit-length-scaled design."""
        return self._condition(self.singular_values_scaled)

    @property
    def condition_raw(self) -> float:
        """2-norm condition number of the design as given."""
        return self._condition(self.singular_values_raw)

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
            out.append(Relation(dependent, tuple(right), tuple(coefficients), float(abs(self.r[j, j]))))
        return out

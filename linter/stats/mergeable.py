"""Statistics that merge across row batches, so the same rules run in memory, streaming and on Dask.

Each class is built from one batch with ``of(...)`` and combined with
``merge``; merging the pieces of a table gives the statistic of the whole
table, up to floating-point rounding.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg.lapack


@dataclass(frozen=True)
class Moments:
    """Count, mean, central moment sums up to the fourth, min and max of finite values.

    Merged with the pairwise update of Chan, Golub & LeVeque (1979) extended
    to third and fourth moments (Pébay 2008), which stays accurate when the
    mean is large compared with the spread.

    References
    ----------
    Chan, T. F., Golub, G. H., LeVeque, R. J. (1979). Updating formulae and a
    pairwise algorithm for computing sample variances.
    Pébay, P. (2008). Formulas for robust, one-pass parallel computation of
    covariances and arbitrary-order statistical moments. Sandia SAND2008-6212.
    """

    count: int
    mean: float
    m2: float
    m3: float
    m4: float
    minimum: float
    maximum: float

    @classmethod
    def empty(cls) -> "Moments":
        """The moments of no values."""
        return cls(0, 0.0, 0.0, 0.0, 0.0, np.inf, -np.inf)

    @classmethod
    def of(cls, values: np.ndarray) -> "Moments":
        """Moments of the finite entries of ``values``."""
        x = np.asarray(values, dtype=np.float64)
        x = x[np.isfinite(x)]
        if x.size == 0:
            return cls.empty()
        with np.errstate(over="ignore", invalid="ignore"):
            mean = float(x.mean())
            d = x - mean
            d2 = d * d
            return cls(int(x.size), mean, float(d2.sum()), float((d2 * d).sum()), float((d2 * d2).sum()), float(x.min()), float(x.max()))

    def merge(self, other: "Moments") -> "Moments":
        """The moments of both batches together."""
        if self.count == 0:
            return other
        if other.count == 0:
            return self
        na, nb = self.count, other.count
        n = na + nb
        # numpy scalars: values near the double range overflow to inf (reported elsewhere) instead of raising.
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            delta = np.float64(other.mean) - np.float64(self.mean)
            mean = self.mean + delta * nb / n
            m2 = self.m2 + other.m2 + delta**2 * na * nb / n
            m3 = (
                self.m3 + other.m3
                + delta**3 * na * nb * (na - nb) / n**2
                + 3 * delta * (na * other.m2 - nb * self.m2) / n
            )
            m4 = (
                self.m4 + other.m4
                + delta**4 * na * nb * (na * na - na * nb + nb * nb) / n**3
                + 6 * delta**2 * (na * na * other.m2 + nb * nb * self.m2) / n**2
                + 4 * delta * (na * other.m3 - nb * self.m3) / n
            )
        return Moments(n, float(mean), float(m2), float(m3), float(m4), min(self.minimum, other.minimum), max(self.maximum, other.maximum))

    @property
    def variance(self) -> float:
        """Sample variance (n - 1 denominator); NaN below two values."""
        return self.m2 / (self.count - 1) if self.count > 1 else float("nan")

    @property
    def std(self) -> float:
        """Sample standard deviation."""
        return float(np.sqrt(self.variance))

    @property
    def skewness(self) -> float:
        """Moment skewness g1 (biased, as ``scipy.stats.skew`` by default)."""
        if self.count < 2 or not self.m2 > 0:
            return float("nan")
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            return _finite_or_nan(np.sqrt(self.count) * (np.float64(self.m3) / self.m2) / np.sqrt(self.m2))

    @property
    def kurtosis(self) -> float:
        """Moment kurtosis (not excess), as in the Jarque-Bera statistic; NaN when the fourth powers underflowed."""
        if self.count < 2 or not self.m2 > 0 or not self.m4 > 0:
            return float("nan")
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            return _finite_or_nan(self.count * (np.float64(self.m4) / self.m2) / self.m2)


def _finite_or_nan(value: float) -> float:
    """``value`` as a float, NaN when it over- or underflowed."""
    return float(value) if np.isfinite(value) else float("nan")


@dataclass(frozen=True)
class TriangularFactor:
    """The R factor of a tall matrix, merged batch by batch (tall-skinny QR).

    The QR factorisation of the stacked R factors of two batches gives the R
    factor of the stacked batches (Demmel et al. 2012), so the whole table's R
    is found without ever forming the normal equations, whose condition
    number is the square of the design's.

    References
    ----------
    Demmel, J., Grigori, L., Hoemmen, M., Langou, J. (2012). Communication-
    optimal parallel and sequential QR and LU factorizations. SIAM J. Sci.
    Comput. 34(1).
    """

    r: np.ndarray
    rows: int

    @classmethod
    def of(cls, block: np.ndarray, rows: int | None = None) -> "TriangularFactor":
        """The R factor of one batch (k columns; ``rows`` counts the table rows it stands for, default its own)."""
        block = np.asarray(block, dtype=np.float64)
        return cls(triangular(block), int(block.shape[0]) if rows is None else rows)

    def merge(self, other: "TriangularFactor") -> "TriangularFactor":
        """The R factor of both batches stacked."""
        return TriangularFactor(triangular(np.vstack([self.r, other.r])), self.rows + other.rows)


def triangular(block: np.ndarray, short: bool = False) -> np.ndarray:
    """The k x k upper-triangular R of a rows x k matrix (zero rows below a short matrix's rank).

    With ``short`` a matrix of fewer rows than columns keeps only its
    ``rows`` x k upper-trapezoidal R, without the zero rows (a table far wider
    than long would otherwise hold a k x k array of zeros).

    LAPACK's Householder QR (``dgeqrf``) runs on a private Fortran-ordered copy that it overwrites.
    """
    rows, k = block.shape
    r = np.zeros((min(rows, k) if short else k, k))
    if rows == 0 or k == 0:
        return r
    work = np.array(block, dtype=np.float64, order="F")
    lwork, _ = scipy.linalg.lapack.dgeqrf_lwork(rows, k)
    qr, _, _, info = scipy.linalg.lapack.dgeqrf(work, lwork=int(lwork), overwrite_a=1)
    if info != 0:
        raise np.linalg.LinAlgError(f"dgeqrf failed with info={info}")
    top = min(k, rows)
    r[:top] = np.triu(qr[:top, :k])
    return r

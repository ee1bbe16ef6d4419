"""Robust distances of rows from the bulk of the data: the median absolute deviation and the MCD estimate.

References
----------
Iglewicz, B., Hoaglin, D. C. (1993). How to Detect and Handle Outliers. ASQC Quality Press, sec. 3.
Rousseeuw, P. J., van Zomeren, B. C. (1990). Unmasking multivariate outliers and leverage points.
JASA 85(411), 633-639.
Hubert, M., Rousseeuw, P. J., Verdonck, T. (2012). A deterministic algorithm for robust location and
scatter. J. Comput. Graph. Stat. 21(3), 618-637.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

MODIFIED_Z_FACTOR = 0.6745
MCD_SAMPLE_ROWS = 2_000
MCD_SAMPLE_SEED = 20_260_601


def median_and_mad(values: np.ndarray) -> tuple[float, float]:
    """The median of the finite values and their median absolute deviation from it (NaN without values)."""
    x = np.asarray(values, dtype=float)
    finite = x[np.isfinite(x)]
    if finite.size == 0:
        return float("nan"), float("nan")
    median = float(np.median(finite))
    deviation = np.abs(finite - median, out=finite)
    return median, float(np.median(deviation, overwrite_input=True))


def modified_z(values: np.ndarray) -> tuple[np.ndarray, float, float]:
    """``0.6745 (x - median) / MAD`` of the finite values (NaN elsewhere), with the median and the MAD.

    The MAD is the median absolute deviation from the median; when it is
    zero (more than half the values tie) the scores are NaN.

    References
    ----------
    Iglewicz & Hoaglin (1993), eq. 3.1.
    """
    x = np.asarray(values, dtype=float)
    median, mad = median_and_mad(x)
    if not np.isfinite(mad) or mad == 0:
        return np.full(x.shape, np.nan), median, mad
    return MODIFIED_Z_FACTOR * (x - median) / mad, median, mad


@dataclass(frozen=True)
class RobustDistances:
    """Squared robust Mahalanobis distances of rows from a reweighted MCD estimate.

    ``sampled`` is the number of rows the estimate was computed on (every
    row when the table is small; a fixed seeded sample otherwise); the
    distances cover every row given.
    """

    columns: tuple[str, ...]
    squared: np.ndarray
    location: np.ndarray
    scatter: np.ndarray
    sampled: int


def mcd_estimate(data: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Location and scatter of the reweighted deterministic MCD (statsmodels ``CovDetMCD``, h = (n + p + 1) // 2).

    References
    ----------
    Hubert, Rousseeuw & Verdonck (2012); statsmodels.robust.covariance.CovDetMCD.
    """
    from statsmodels.robust.covariance import CovDetMCD

    with np.errstate(all="ignore"):
        try:
            result = CovDetMCD(data).fit(None)
        except (ValueError, ZeroDivisionError) as exc:
            raise np.linalg.LinAlgError(f"the MCD estimate failed: {exc}") from exc
    return np.asarray(result.mean), np.asarray(result.cov)


def squared_distances(data: np.ndarray, location: np.ndarray, scatter: np.ndarray) -> np.ndarray:
    """``(x - m)' S^-1 (x - m)`` for each row, through the inverse Cholesky factor of ``S`` (O(rows p^2))."""
    factor = scipy.linalg.cholesky(scatter, lower=True)
    whitening = scipy.linalg.solve_triangular(factor, np.eye(factor.shape[0]), lower=True, check_finite=False)
    z = (data - location) @ whitening.T
    return np.einsum("ij,ij->i", z, z)


def _row_hashes(data: np.ndarray) -> np.ndarray:
    """A 64-bit hash of each row's values (equal rows, equal hashes), mixed column by column."""
    bits = np.ascontiguousarray(data + 0.0).view(np.uint64)
    mixed = np.full(data.shape[0], np.uint64(MCD_SAMPLE_SEED), dtype=np.uint64)
    with np.errstate(over="ignore"):
        for j in range(data.shape[1]):
            mixed = (mixed ^ bits[:, j]) * np.uint64(0x9E3779B97F4A7C15)
            mixed ^= mixed >> np.uint64(29)
    return mixed


def _content_sample(data: np.ndarray, sample_rows: int) -> np.ndarray:
    """At most ``sample_rows`` rows chosen by content, in lexicographic order of their values."""
    if data.shape[0] > sample_rows:
        data = data[np.argpartition(_row_hashes(data), sample_rows - 1)[:sample_rows]]
    if data.shape[1] == 0:
        return data
    return data[np.lexsort(data.T[::-1])]


def robust_distances(data: np.ndarray, columns: tuple[str, ...], sample_rows: int = MCD_SAMPLE_ROWS) -> RobustDistances:
    """Robust squared distances of every row of ``data`` (complete rows, one column per variable).

    Tables longer than ``sample_rows`` are estimated on a sample of that
    many rows (FastMCD likewise works on subsets of large tables), then every
    row is measured against that estimate. The sample is chosen by a hash of
    each row's values and put in sorted order, so the result does not depend
    on the order of the rows or the columns in the file. Raises
    ``numpy.linalg.LinAlgError`` when the estimate fails or the robust
    scatter is singular or not finite (values so large that their squares
    overflow).

    References
    ----------
    Rousseeuw, P. J., Van Driessen, K. (1999). A fast algorithm for the minimum covariance determinant
    estimator. Technometrics 41(3), 212-223 (subsets for large n).
    """
    order = np.argsort(np.array(columns, dtype=object), kind="stable")
    data = np.asarray(data, dtype=float)[:, order]
    sample = _content_sample(data, sample_rows)
    if not np.all(np.isfinite(sample)):
        raise np.linalg.LinAlgError("the data are not all finite")
    with np.errstate(all="ignore"):
        spread = sample.std(axis=0)
        standardized = (sample - sample.mean(axis=0)) / np.where(spread > 0, spread, 1.0)
    if not np.all(np.isfinite(standardized)) or np.linalg.matrix_rank(standardized) < sample.shape[1]:
        raise np.linalg.LinAlgError("the columns are linearly dependent or too extreme to standardise")
    location, scatter = mcd_estimate(sample)
    if not (np.all(np.isfinite(scatter)) and np.all(np.isfinite(location))):
        raise np.linalg.LinAlgError("the robust scatter is not finite")
    back = np.argsort(order)
    return RobustDistances(columns, squared_distances(data, location, scatter), location[back], scatter[np.ix_(back, back)], int(sample.shape[0]))

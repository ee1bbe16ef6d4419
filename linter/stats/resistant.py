"""A high-breakdown regression (statsmodels' deterministic MM-estimator) and the Rousseeuw-van Zomeren row classes.

Least-squares diagnostics are computed from a fit that the outlying rows
themselves have pulled: a group of bad leverage points can drag the line
onto themselves and leave the good rows looking odd (masking and swamping).
A fit with a 50% breakdown point is not dragged, so its residuals show the
rows that disagree with the bulk, and the robust (MCD) distance shows the
rows far out in predictor space; together they sort every row into regular,
vertical outlier, good leverage and bad leverage.

References
----------
Rousseeuw, P. J., van Zomeren, B. C. (1990). Unmasking multivariate outliers and leverage points. JASA 85(411), 633-639.
Rousseeuw, P. J., Leroy, A. M. (1987). Robust Regression and Outlier Detection. Wiley, ch. 6.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..preload import serial_import
from .robust import content_sample_positions

RESISTANT_SAMPLE_ROWS = 1_000
MIN_ROWS_PER_PARAMETER = 5
"""Rows per estimated parameter below which the high-breakdown fit is not attempted (common practice, as for the MCD: with fewer
the S-estimator's elemental subsets cover the design too thinly, and its bad-leverage calls are noise)."""
MAX_PARAMETERS = 50
"""Parameters above which the high-breakdown fit is not attempted: statsmodels' deterministic S- and MM-estimation
on 1,000 rows took 1.2 s at 11 parameters, 6.5 s at 61 and 17 s at 121 on a shared 2-core machine (one BLAS
thread), growing faster than the design's own O(n p^2) factor; a wide table would spend most of its check there."""
RESIDUAL_LIMIT = 2.5
DISTANCE_QUANTILE = 0.975


class RowClass(enum.IntEnum):
    """Where a row stands against the robust fit and the bulk of the predictors."""

    REGULAR = 0
    VERTICAL = 1
    GOOD_LEVERAGE = 2
    BAD_LEVERAGE = 3

    @property
    def word(self) -> str:
        """The class as written in reports."""
        return self.name.lower().replace("_", " ")


@dataclass(frozen=True)
class ResistantFit:
    """The MM fit: coefficients per design column (NaN for columns the design cannot estimate), its scale, and every row's standardized residual.

    ``sampled`` is the number of rows the estimate was computed on (every
    row up to :data:`RESISTANT_SAMPLE_ROWS`, else a sample chosen by a hash
    of the rows' values); the residuals cover every row given.
    """

    coef: np.ndarray
    scale: float
    residual: np.ndarray
    sampled: int

    def standardized(self, X: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Standardized robust residuals ``(y - X b) / scale`` of further rows (pass 2 over a long table)."""
        kept = np.flatnonzero(np.isfinite(self.coef))
        return (y - X[:, kept] @ self.coef[kept]) / self.scale


def resistant_stands_aside(complete_cases: int, rank: int) -> str | None:
    """Why the high-breakdown fit is not attempted for this many rows and parameters, or None when it is."""
    fitted = resistant_rows(complete_cases)
    if fitted < MIN_ROWS_PER_PARAMETER * rank:
        return f"{fitted:,} rows for {rank:,} parameters: a high-breakdown fit needs at least {MIN_ROWS_PER_PARAMETER} rows per parameter"
    if rank > MAX_PARAMETERS:
        return (
            f"{rank:,} parameters: the high-breakdown (MM) fit is attempted up to {MAX_PARAMETERS} parameters, beyond which "
            "its deterministic S-estimation costs more than the rest of the check (17 s at 121 parameters on 1,000 rows)"
        )
    return None


def resistant_rows(complete_cases: int) -> int:
    """How many rows the high-breakdown fit is computed on: every complete case up to the sample size."""
    return min(complete_cases, RESISTANT_SAMPLE_ROWS)


def resistant_fit(
    X: np.ndarray,
    y: np.ndarray,
    estimable: Sequence[int],
    start_columns: Sequence[int],
    names: Sequence[str],
    sample_rows: int = RESISTANT_SAMPLE_ROWS,
) -> ResistantFit:
    """Fit ``y`` on the ``estimable`` columns of ``X`` by statsmodels' ``RLMDetSMM`` (95% efficiency, 50% breakdown).

    ``start_columns`` are the continuous predictors whose robust distances
    choose the deterministic starting subsets (indicator columns would make
    their scatter singular). Tables longer than ``sample_rows`` are fitted
    on a sample of rows chosen by their values (columns taken in the order
    of their ``names``, so neither the row nor the column order of the file
    changes the sample), then every row is scored.
    Raises ``ValueError`` or ``numpy.linalg.LinAlgError`` when the estimate fails.

    References
    ----------
    Koller, M., Stahel, W. A. (2011). Sharpening Wald-type inference in robust regression for small samples.
    Comput. Stat. Data Anal. 55(8) (MM-estimator with 95% efficiency); Hubert, Rousseeuw & Verdonck (2012),
    J. Comput. Graph. Stat. 21(3) (deterministic starts).
    """
    import warnings

    RLMDetSMM = serial_import("statsmodels.robust.resistant_linear_model").RLMDetSMM

    columns = np.asarray(estimable, dtype=int)
    data = np.column_stack([X[:, columns], y])
    order = np.argsort(np.array([names[j] for j in columns] + [""], dtype=object)[:-1], kind="stable")
    rows = content_sample_positions(data, np.append(order, columns.size), sample_rows)
    starts = [int(np.flatnonzero(columns == j)[0]) for j in start_columns if j in columns]
    if not starts:
        raise ValueError("no continuous predictor to choose the starting subsets")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = RLMDetSMM(y[rows], X[rows][:, columns], col_indices=starts).fit()
    scale = float(result.scale)
    if not (np.isfinite(scale) and scale > 0):
        raise ValueError("the robust scale is zero or not finite")
    coef = np.full(X.shape[1], np.nan)
    coef[columns] = np.asarray(result.params, dtype=float)
    residual = (y - X[:, columns] @ coef[columns]) / scale
    return ResistantFit(coef, scale, residual, int(rows.size))


def classify(residual: np.ndarray, squared_distance: np.ndarray, distance_cutoff: float, residual_limit: float = RESIDUAL_LIMIT) -> np.ndarray:
    """Each row's :class:`RowClass` from its standardized robust residual and squared robust distance.

    A row is off the line when ``|residual| > residual_limit`` and a leverage
    point when its squared distance exceeds ``distance_cutoff`` (the 0.975
    quantile of chi-square with as many degrees of freedom as predictors).
    """
    off = np.abs(np.nan_to_num(residual, nan=0.0)) > residual_limit
    far = np.nan_to_num(squared_distance, nan=0.0) > distance_cutoff
    classes = np.full(residual.shape, int(RowClass.REGULAR))
    classes[off & ~far] = RowClass.VERTICAL
    classes[far & ~off] = RowClass.GOOD_LEVERAGE
    classes[far & off] = RowClass.BAD_LEVERAGE
    return classes


def distance_cutoff(variables: int) -> float:
    """The squared robust distance beyond which a row is a leverage point: the chi-square 0.975 quantile."""
    import scipy.stats

    return float(scipy.stats.chi2.ppf(DISTANCE_QUANTILE, variables))

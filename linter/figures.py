"""What the HTML report's figures draw: arrays and values gathered once from a run's statistics.

The pipeline fills these (:func:`prefit.pipeline.figure_data`) and the
:class:`~prefit.outcome.Report` carries them, so that the plot writer draws
from the report model alone and never reads the run's context. Each figure's
data is None when its figure has nothing to show. Arrays are read-only views:
the data is shared with the run, never copied or changed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .findings import RowLabel

MAX_MAP_ROWS = 300
"""Rows of the missing-value map (evenly spaced when the table is longer)."""
MAX_MAP_COLUMNS = 60
"""Columns of the missing-value map (target and predictors first)."""
MAX_MATRIX_COLUMNS = 25
"""Columns of the correlation matrix, bars of the inflation chart and predictors of the range chart."""
MAX_LABELS = 12
"""Row labels written beside the points of a scatter plot."""
ROW_FAMILIES = frozenset({"influence", "outliers"})
"""Rule families whose named rows are marked on the influence plot."""
COOK_CONTOURS = (0.5, 1.0)
"""Cook's distance levels drawn when no installed rule declares Cook's distance thresholds (common practice)."""
ROBUST_RULE = "influence.robust-distortion"
"""The rule whose run (neither failed nor inapplicable) brings the robust map into the report."""


def frozen_view(values: np.ndarray) -> np.ndarray:
    """A read-only view of ``values``: the figure data cannot change the run's arrays, nor they it."""
    view = values.view()
    view.setflags(write=False)
    return view


def evenly(indices: np.ndarray, limit: int) -> np.ndarray:
    """At most ``limit`` of ``indices``, evenly spaced, first and last included."""
    if indices.size <= limit:
        return indices
    return indices[np.linspace(0, indices.size - 1, limit).round().astype(np.int64)]


@dataclass(frozen=True, eq=False)
class InfluencePoints:
    """Leverage against externally studentized residual for every complete case, with Cook's distance levels.

    Attributes
    ----------
    hat, studentized, cooks : numpy.ndarray
        Per complete case: the hat value clipped to [0, 1], the externally studentized residual, Cook's distance.
    rank, df_resid : int
        Parameters and residual degrees of freedom of the fit (the contours depend on both).
    levels : tuple of (float, str)
        The Cook's distance levels drawn, weakest first, each with the grade word it stands for (or ``reference``).
    marked : numpy.ndarray
        Complete cases (indices into the arrays) marked in colour: rows named by influence or outlier findings,
        or, when none are, the rows at or beyond the first level.
    labelled : tuple of (str, int)
        The labels written beside points, each at the marked row of that label with the largest Cook's distance.
    """

    hat: np.ndarray
    studentized: np.ndarray
    cooks: np.ndarray
    rank: int
    df_resid: int
    levels: tuple[tuple[float, str], ...]
    marked: np.ndarray
    labelled: tuple[tuple[str, int], ...]


@dataclass(frozen=True, eq=False)
class RobustPoints:
    """Robust distance against the robust fit's standardized residual, with each complete case's class.

    Attributes
    ----------
    distance, residual : numpy.ndarray
        Per complete case: the robust (MCD or OGK) distance and the standardized residual of the MM fit.
    classes : numpy.ndarray
        Per complete case, the :class:`~prefit.stats.resistant.RowClass` value.
    cutoff : float
        The chi-square 0.975 quantile the squared distances are compared with.
    predictors : int
        The numeric predictors the distances are measured in.
    labelled : tuple of (int, RowLabel)
        Complete cases outside the regular class written with their label, largest absolute residual first.
    """

    distance: np.ndarray
    residual: np.ndarray
    classes: np.ndarray
    cutoff: float
    predictors: int
    labelled: tuple[tuple[int, RowLabel], ...]


@dataclass(frozen=True, eq=False)
class MissingMap:
    """Where the table's values are missing (null or NaN), on a sample of rows.

    Attributes
    ----------
    columns : tuple of str
        The columns mapped, model columns first, at most :data:`MAX_MAP_COLUMNS`.
    counts : tuple of int
        Missing values of each mapped column over every row.
    rows : numpy.ndarray
        The 0-based table rows mapped, evenly spaced, at most :data:`MAX_MAP_ROWS`.
    mask : numpy.ndarray
        True where a mapped row's value is missing (rows by columns).
    table_rows, table_columns : int
        The table's size.
    complete_cases : int
        Rows with the target and every predictor present.
    """

    columns: tuple[str, ...]
    counts: tuple[int, ...]
    rows: np.ndarray
    mask: np.ndarray
    table_rows: int
    table_columns: int
    complete_cases: int


@dataclass(frozen=True, eq=False)
class CollinearityView:
    """Correlations among the design's predictor columns and each term's variance inflation.

    Attributes
    ----------
    names : tuple of str
        The columns of the matrix's labels: kept predictor columns, then columns in an exact dependency.
    shown : int
        The first ``shown`` names, whose correlations are drawn.
    correlation : numpy.ndarray
        Pearson correlations of the first ``shown`` names over the complete cases.
    columns : int
        Every kept and exactly dependent predictor column, of which ``names`` shows the first.
    terms : tuple of str
        Design terms with an inflation, at most :data:`MAX_MATRIX_COLUMNS`.
    inflation : numpy.ndarray
        Each term's inflation as the VIF rule grades it (GVIF^(1/df)); infinite in an exact dependency.
    """

    names: tuple[str, ...]
    shown: int
    correlation: np.ndarray
    columns: int
    terms: tuple[str, ...]
    inflation: np.ndarray


@dataclass(frozen=True)
class RangeBar:
    """One numeric predictor's observed range and, when declared, its intended range.

    ``observed`` is (minimum, maximum, 5th percentile, 95th percentile) of its
    finite values, None when it has none.
    """

    name: str
    observed: tuple[float, float, float, float] | None
    intended: tuple[float, float] | None


@dataclass(frozen=True)
class FigureData:
    """Everything the HTML report's plots draw, one entry per figure (None or empty: the figure has nothing to show)."""

    influence: InfluencePoints | None = None
    robust: RobustPoints | None = None
    missing: MissingMap | None = None
    collinearity: CollinearityView | None = None
    ranges: tuple[RangeBar, ...] = ()

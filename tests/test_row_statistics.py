"""Blocked and selection-based row statistics, checked against numpy and statsmodels."""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import OLSInfluence

from prefit.context import RunContext
from prefit.options import CheckOptions
from prefit.reading import TableInfo
from prefit.roles import resolve_roles
from prefit.stats.robust import SELECTION_DIRECT, SELECTION_SAMPLE, median_and_mad, order_statistics


def numpy_median_and_mad(values: np.ndarray) -> tuple[float, float]:
    finite = values[np.isfinite(values)]
    median = float(np.median(finite))
    return median, float(np.median(np.abs(finite - median)))


@pytest.mark.parametrize(
    "values",
    [
        np.random.default_rng(1).normal(size=SELECTION_DIRECT * 3),
        np.random.default_rng(2).standard_cauchy(SELECTION_DIRECT * 3 + 1),
        np.sort(np.random.default_rng(3).gamma(2.0, size=SELECTION_DIRECT * 2 + 7)),
        np.random.default_rng(4).integers(0, 4, SELECTION_DIRECT * 2).astype(float),
        np.tile(np.arange(SELECTION_SAMPLE, dtype=float), 40),
        np.where(np.arange(SELECTION_DIRECT * 2) % 5 == 0, np.nan, np.linspace(-3.0, 9.0, SELECTION_DIRECT * 2)),
    ],
    ids=["normal", "cauchy-odd", "sorted", "ties", "periodic", "with-nan"],
)
def test_median_and_mad_equal_numpy(values: np.ndarray) -> None:
    # reference: numpy.median (full partition), bit for bit
    assert median_and_mad(values) == numpy_median_and_mad(values)


def test_order_statistics_fall_back_when_the_bracket_misses() -> None:
    n = SELECTION_DIRECT * 2
    stride = n // SELECTION_SAMPLE
    values = np.zeros(n)
    values[::stride] = 1.0  # the regular sample sees only ones, the bulk is zeros
    ranks = (n // 2 - 1, n // 2, n - 1)
    # reference: numpy.sort
    assert order_statistics(values, ranks) == [float(v) for v in np.sort(values)[list(ranks)]]


def test_dfbetas_of_chosen_rows_and_largest_match_statsmodels() -> None:
    rng = np.random.default_rng(11)
    n = 1_500
    X = rng.normal(size=(n, 4)) * [1.0, 50.0, 0.01, 3.0] + [0.0, 1e4, 0.0, -7.0]
    y = X @ [1.0, 0.02, 30.0, -1.0] + rng.standard_t(3, n)
    table = pa.table({**{f"x{j}": X[:, j] for j in range(4)}, "y": y})
    options = CheckOptions(target="y")
    ctx = RunContext(table, TableInfo("<test>", "memory", n, 5, None), resolve_roles(table, options), options)
    reference = OLSInfluence(sm.OLS(ctx.design.y, ctx.design.X).fit())
    rows = np.array([17, 3, 1_499, 0, 742])
    influence = ctx.influence
    # source: statsmodels OLSInfluence.dfbetas and hat_matrix_diag
    assert_allclose(influence.dfbetas_of(rows), reference.dfbetas[rows], rtol=1e-8, atol=1e-12)
    assert_allclose(influence.dfbetas_largest, np.max(np.abs(reference.dfbetas), axis=1), rtol=1e-8, atol=1e-12)
    assert_allclose(ctx.row_scores.hat, reference.hat_matrix_diag, rtol=1e-9)

"""Classical tests on the residuals of the preliminary fit, each an auxiliary regression on its QR factor.

Each function returns a :class:`ResidualTest` whose numbers equal those of the
usual statistics packages for a full-rank design with an intercept.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .auxiliary import AddedColumns, AddedFit, column_picker, lagged, regress_added
from .blas import one_blas_thread
from .factor import DesignFactor
from .mergeable import Moments
from .positions import hashed_share

RESET_POWERS = (2, 3)
# Rows times squared auxiliary columns for one White test: a few tenths of a second on one core.
WHITE_WORK = 1_000_000_000
ROWS_PER_COLUMN = 20
ROW_SEED = 20260601


@dataclass(frozen=True)
class ResidualTest:
    """A test statistic with its chi-squared reference (``df``) and the F form where there is one."""

    statistic: float
    df: int
    p_value: float
    f_statistic: float = float("nan")
    f_p_value: float = float("nan")
    effect: float = float("nan")


def _centred_total(values: np.ndarray) -> float:
    deviations = values - values.mean()
    return float(deviations @ deviations)


def _lagrange_multiplier(fit: AddedFit, total: float, df: int) -> ResidualTest:
    """``n R^2`` of an auxiliary regression with an intercept, with its F form."""
    from scipy import stats

    r_squared = 1.0 - fit.rss / total if total > 0 else float("nan")
    statistic = fit.n * r_squared
    df_resid = fit.n - fit.rank
    if df <= 0 or df_resid <= 0 or not np.isfinite(r_squared) or r_squared >= 1.0:
        return ResidualTest(statistic, df, float("nan"), effect=r_squared)
    f_value = (r_squared / df) / ((1.0 - r_squared) / df_resid)
    return ResidualTest(
        float(statistic),
        df,
        float(stats.chi2.sf(statistic, df)),
        float(f_value),
        float(stats.f.sf(f_value, df, df_resid)),
        effect=float(r_squared),
    )


def _constant_unless(intercept: bool, n: int) -> np.ndarray:
    return np.zeros((n, 0)) if intercept else np.ones((n, 1))


def scaled_squares(residual: np.ndarray) -> np.ndarray:
    """The squared residuals over the largest of them, in [0, 1].

    Every statistic built on ``e^2`` by regression (an R^2, ``n R^2``) is
    unchanged by scaling it, and residuals beyond 1.3e154 no longer square
    to infinity.
    """
    largest = float(np.max(np.abs(residual))) if residual.size else 0.0
    if not (np.isfinite(largest) and largest > 0):
        return np.square(residual)
    return np.square(residual / largest)


def breusch_pagan(factor: DesignFactor, X: np.ndarray, residual: np.ndarray, intercept: bool) -> ResidualTest:
    """Koenker's studentized Breusch-Pagan test: ``n R^2`` of ``e^2`` on the design (and a constant).

    ``effect`` is the auxiliary R^2.

    References
    ----------
    Breusch, T. S., Pagan, A. R. (1979). A simple test for heteroscedasticity
    and random coefficient variation. Econometrica 47(5).
    Koenker, R. (1981). A note on studentizing a test for heteroscedasticity.
    J. Econometrics 17(1).
    """
    return breusch_pagan_and_spread(factor, X, residual, intercept, keep_spread=False)[0]


def breusch_pagan_and_spread(
    factor: DesignFactor, X: np.ndarray, residual: np.ndarray, intercept: bool, keep_spread: bool = True
) -> tuple[ResidualTest, float]:
    """Koenker's Breusch-Pagan test and, from the same auxiliary fit, how far the residual spread moves.

    The spread ratio sorts the rows by the auxiliary regression's fitted
    squared residual (where the design says the spread is large) and divides
    the root mean square residual of the top fifth of rows by that of the
    bottom fifth (at least 1). It is NaN with ``keep_spread`` false, and
    below :data:`SPREAD_MIN_ROWS` rows per fifth, where two equal spreads
    differ twofold too often by chance.
    """
    squared = scaled_squares(residual)
    fit = regress_added(factor, X, squared, _constant_unless(intercept, X.shape[0]), keep_residual=keep_spread)
    test = _lagrange_multiplier(fit, _centred_total(squared), fit.rank - 1)
    fifth = residual.size // SPREAD_GROUPS
    if fit.residual is None or fifth < SPREAD_MIN_ROWS:
        return test, float("nan")
    order = np.argsort(squared - fit.residual, kind="stable")
    low = float(np.mean(squared[order[:fifth]]))
    high = float(np.mean(squared[order[-fifth:]]))
    if low <= 0.0 or high <= 0.0:
        return test, float("inf") if max(low, high) > 0.0 else float("nan")
    ratio = float(np.sqrt(high / low))
    return test, max(ratio, 1.0 / ratio)


SPREAD_GROUPS = 5
# With 20 rows in each fifth, two normal samples of equal spread differ in SD twofold (variance ratio 4, F(19, 19))
# with probability 0.4%, before the choice of fifths by fitted spread; the Breusch-Pagan test must agree as well.
SPREAD_MIN_ROWS = 20


def white_products(X: np.ndarray, intercept_column: int) -> AddedColumns:
    """Squares and cross products of the design columns other than the intercept (i <= j), built batch by batch."""
    others = np.asarray([j for j in range(X.shape[1]) if j != intercept_column], dtype=int)
    count = others.size
    columns = column_picker(others)

    def fill(start: int, stop: int, out: np.ndarray) -> None:
        block = X[start:stop, columns]
        at = 0
        for i in range(count):
            np.multiply(block[:, i : i + 1], block[:, i:], out=out[:, at : at + count - i])
            at += count - i

    return AddedColumns(count * (count + 1) // 2, fill, order="F")


def white(factor: DesignFactor, X: np.ndarray, residual: np.ndarray, intercept_column: int) -> ResidualTest:
    """White's test: ``n R^2`` of ``e^2`` on the design, its squares and cross products (needs an intercept).

    Products that repeat a column (the square of a 0/1 dummy) are counted
    once, so ``df`` is the rank of the auxiliary design minus one.

    References
    ----------
    White, H. (1980). A heteroskedasticity-consistent covariance matrix
    estimator and a direct test for heteroskedasticity. Econometrica 48(4).
    """
    squared = scaled_squares(residual)
    fit = regress_added(factor, X, squared, white_products(X, intercept_column), keep_residual=False)
    return _lagrange_multiplier(fit, _centred_total(squared), fit.rank - 1)


def white_columns(p: int) -> int:
    """Columns of White's auxiliary regression for a design of ``p`` columns with an intercept, ``e^2`` included."""
    return p + (p - 1) * p // 2 + 1


def hashed_rows(positions: np.ndarray, share: float, seed: int = ROW_SEED) -> np.ndarray:
    """Indices of the rows kept in a deterministic sample of about ``share`` of them, chosen by their position alone
    (:func:`prefit.stats.positions.hashed_share`)."""
    return hashed_share(positions, share, seed)


@dataclass(frozen=True)
class SampledTest:
    """A residual test and the rows it used: ``rows_used`` of ``rows``, the indices ``subset`` (None for all)."""

    test: ResidualTest
    rows_used: int
    rows: int
    subset: np.ndarray | None = None

    @property
    def sampled(self) -> bool:
        """Whether the test ran on a subset of the rows."""
        return self.rows_used < self.rows


def white_within_budget(
    factor: DesignFactor, X: np.ndarray, residual: np.ndarray, intercept_column: int, positions: np.ndarray
) -> SampledTest:
    """White's test on all rows, or on a hashed subset of rows when the auxiliary regression would cost too much.

    The auxiliary regression has ``k = p (p + 1) / 2 + 1`` columns and costs
    about ``n k^2`` operations: on all rows while ``n k^2`` is at most
    :data:`WHITE_WORK`, otherwise on the rows :func:`hashed_rows` keeps,
    about ``WHITE_WORK / k^2`` of them but at least
    :data:`ROWS_PER_COLUMN` per auxiliary column, so the chi-squared
    reference of ``n R^2`` still holds. ``positions`` are the rows'
    positions in the table. The test uses the subset's own design factor;
    with all rows it uses ``factor``.

    References
    ----------
    White, H. (1980). A heteroskedasticity-consistent covariance matrix
    estimator and a direct test for heteroskedasticity. Econometrica 48(4).
    Harrell, F. E. (2015). Regression Modeling Strategies, 2nd ed., sec. 4.4,
    pp. 72-73: about 15 rows per estimated parameter (as quoted by secondary
    sources; 10 to 20 is the common-practice range).
    """
    n = X.shape[0]
    width = white_columns(X.shape[1])
    wanted = max(WHITE_WORK // width**2, ROWS_PER_COLUMN * width)
    if n * width**2 <= WHITE_WORK or wanted >= n:
        return SampledTest(white(factor, X, residual, intercept_column), n, n)
    rows = hashed_rows(positions, wanted / n)
    chosen, left = X[rows], residual[rows]
    with one_blas_thread():
        own = DesignFactor.of(chosen, left)
    return SampledTest(white(own, chosen, left, intercept_column), int(rows.size), n, rows)


def reset(factor: DesignFactor, X: np.ndarray, residual: np.ndarray, fitted: np.ndarray, intercept: bool) -> ResidualTest:
    """Ramsey's RESET: Wald test that powers 2 and 3 of the fitted values add nothing.

    The fitted values are standardised first (centred only with an
    intercept), which leaves the augmented column space unchanged and keeps
    the powers well conditioned. ``effect`` is Cohen's f^2 of the added powers.

    References
    ----------
    Ramsey, J. B. (1969). Tests for specification errors in classical linear
    least-squares regression analysis. J. R. Stat. Soc. B 31(2).
    """
    from scipy import stats

    spread = float(np.std(fitted)) or 1.0
    base = (fitted - fitted.mean()) / spread if intercept else fitted / spread
    powers = np.empty((base.size, len(RESET_POWERS)))
    running = base.copy()
    for power in range(2, max(RESET_POWERS) + 1):
        running *= base
        if power in RESET_POWERS:
            powers[:, RESET_POWERS.index(power)] = running
    fit = regress_added(factor, X, residual, powers, keep_residual=False)
    wald = fit.f_statistic * fit.added_rank
    if not np.isfinite(wald):
        return ResidualTest(float("nan"), fit.added_rank, float("nan"))
    return ResidualTest(
        float(wald),
        fit.added_rank,
        float(stats.chi2.sf(wald, fit.added_rank)),
        float(fit.f_statistic),
        float(stats.f.sf(fit.f_statistic, fit.added_rank, fit.df_resid)),
        effect=fit.cohen_f_squared,
    )


def jarque_bera(residual: np.ndarray) -> tuple[ResidualTest, float, float]:
    """Jarque-Bera test from the residuals' moment skewness and kurtosis; returns (test, skewness, kurtosis).

    References
    ----------
    Jarque, C. M., Bera, A. K. (1980). Efficient tests for normality,
    homoscedasticity and serial independence of regression residuals.
    Economics Letters 6(3).
    """
    from scipy import stats

    residual = np.asarray(residual, dtype=np.float64)
    finite = np.abs(residual[np.isfinite(residual)])
    largest = float(finite.max()) if finite.size else 0.0
    # Skewness and kurtosis are scale-free: on residuals scaled to at most 1 their powers neither overflow nor underflow.
    moments = Moments.of(residual / largest if largest > 0 else residual)
    skewness, kurtosis = moments.skewness, moments.kurtosis
    statistic = moments.count / 6.0 * (skewness**2 + (kurtosis - 3.0) ** 2 / 4.0)
    return ResidualTest(float(statistic), 2, float(stats.chi2.sf(statistic, 2))), skewness, kurtosis


def default_lags(n: int, most: int = 10) -> int:
    """Lags for the Breusch-Godfrey test: ``min(most, n // 5)``."""
    return max(1, min(most, n // 5))


def breusch_godfrey(
    factor: DesignFactor, X: np.ndarray, residual: np.ndarray, lags: int, intercept: bool, groups: np.ndarray | None = None
) -> ResidualTest:
    """Breusch-Godfrey test for serial correlation up to ``lags``; rows of ``X`` and ``residual`` in time order.

    Lagged residuals before the first row are taken as zero; with ``groups``
    (rows of a group contiguous) each group's series starts afresh.

    References
    ----------
    Breusch, T. S. (1978). Testing for autocorrelation in dynamic linear
    models. Australian Economic Papers 17.
    Godfrey, L. G. (1978). Testing against general autoregressive and moving
    average error models when the regressors include lagged dependent
    variables. Econometrica 46(6).
    """
    from scipy import stats

    n = X.shape[0]
    constant = _constant_unless(intercept, n)
    base = regress_added(factor, X, residual, constant, keep_residual=False)
    full = regress_added(factor, X, residual, np.column_stack([constant, lagged(residual, lags, groups)]), keep_residual=False)
    added = full.added_rank - base.added_rank
    total = _centred_total(residual)
    r_squared = 1.0 - full.rss / total if total > 0 else float("nan")
    statistic = n * r_squared
    if added <= 0 or full.df_resid <= 0 or full.rss <= 0:
        return ResidualTest(float(statistic), added, float("nan"))
    f_value = (base.rss - full.rss) / added / (full.rss / full.df_resid)
    return ResidualTest(
        float(statistic),
        lags,
        float(stats.chi2.sf(statistic, lags)),
        float(f_value),
        float(stats.f.sf(f_value, added, full.df_resid)),
        effect=float(r_squared),
    )

"""Sample-size planning: minimum sizes for a prediction model with a continuous outcome, and F-test power.

Every function here is a closed-form or one-dimensional search over the
published formulas; none looks at data. ``p`` is the number of predictor
parameters without the intercept, as in the sources.

References
----------
Riley, R. D., Snell, K. I. E., Ensor, J., Burke, D. L., Harrell, F. E.,
Moons, K. G. M., Collins, G. S. (2019). Minimum sample size for developing a
multivariable prediction model: Part I - Continuous outcomes. Statistics in
Medicine 38(7), 1262-1275.
Riley, R. D., Ensor, J., Snell, K. I. E., et al. (2020). Calculating the sample
size required for developing a clinical prediction model. BMJ 368, m441.
Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences,
2nd ed., chapter 9 (F tests of variance proportions).
"""

from __future__ import annotations

import math
from typing import Callable

LARGEST_SEARCHED_N = 10**12


def _smallest(satisfied: Callable[[int], bool], start: int) -> int | None:
    """The smallest integer n >= start with ``satisfied(n)``, for a predicate that stays true once true."""
    if satisfied(start):
        return start
    low, high = start, max(start + 1, 2 * start)
    while not satisfied(high):
        low, high = high, 2 * high
        if high > LARGEST_SEARCHED_N:
            return None
    while high - low > 1:
        middle = (low + high) // 2
        if satisfied(middle):
            high = middle
        else:
            low = middle
    return high


def apparent_r_squared(r2_adjusted: float, n: int, p: int) -> float:
    """The apparent R^2 a fit on n rows with p predictor parameters shows when the adjusted R^2 is ``r2_adjusted``.

    Inverts R^2_adj = 1 - (1 - R^2_app)(n - 1)/(n - p - 1).
    """
    return (r2_adjusted * (n - p - 1) + p) / (n - 1)


def expected_shrinkage(r2_adjusted: float, n: int, p: int) -> float:
    """Expected uniform shrinkage of the predictor effects, 1 + (p - 2) / (n ln(1 - R^2_app)).

    References
    ----------
    Riley et al. (2019), Part I, criterion (i), after Copas (1983, 1997).
    """
    if n <= p + 1:
        return float("nan")
    r2_app = apparent_r_squared(r2_adjusted, n, p)
    if r2_app >= 1.0:
        return float("nan")
    return 1.0 + (p - 2) / (n * math.log1p(-r2_app))


def n_for_shrinkage(r2_adjusted: float, p: int, shrinkage: float = 0.9) -> int | None:
    """Criterion (i): the smallest n whose expected shrinkage is at least ``shrinkage``; None when unattainable.

    With p <= 2 the expected shrinkage is at least 1 for every n > p + 1.
    With p > 2 and R^2_adj <= 0 there is nothing to predict: at R^2_adj = 0
    the shrinkage tends to 2/p < 0.9, and below 0 the formula's premise (a
    positive anticipated R^2) fails; no n is returned.

    References
    ----------
    Riley et al. (2019), Part I, criterion (i).
    """
    if p <= 2:
        return p + 2
    if not 0.0 < r2_adjusted < 1.0:
        return None

    def reached(n: int) -> bool:
        value = expected_shrinkage(r2_adjusted, n, p)
        return not math.isnan(value) and value >= shrinkage

    return _smallest(reached, p + 2)


def n_for_r_squared_gap(r2_adjusted: float, p: int, gap: float = 0.05) -> int:
    """Criterion (ii): the smallest n with apparent minus adjusted R^2 at most ``gap``: ceil(1 + p(1 - R^2_adj)/gap).

    References
    ----------
    Riley et al. (2019), Part I, criterion (ii).
    """
    return max(p + 2, math.ceil(1.0 + p * (1.0 - r2_adjusted) / gap - 1e-9))


def sd_margin(df: int, level: float = 0.95) -> float:
    """Multiplicative margin of error of the residual SD estimated on ``df`` degrees of freedom.

    The larger of the two ratios between the ends of the chi-square
    confidence interval for sigma and sigma itself.
    """
    import scipy.stats

    tail = (1.0 - level) / 2.0
    upper = math.sqrt(df / scipy.stats.chi2.ppf(tail, df))
    lower = math.sqrt(scipy.stats.chi2.ppf(1.0 - tail, df) / df)
    return max(upper, lower)


def n_for_residual_sd(p: int, margin: float = 1.1, level: float = 0.95) -> int:
    """Criterion (iii): the smallest n whose residual SD is estimated within the multiplicative ``margin``.

    The residual degrees of freedom are n - p - 1.

    References
    ----------
    Riley et al. (2019), Part I, criterion (iii).
    """
    df = _smallest(lambda d: sd_margin(d, level) <= margin, 1)
    assert df is not None
    return df + p + 1


def mean_margin(n: int, p: int, r2_adjusted: float, mean: float, sd: float, level: float = 0.95) -> float:
    """Multiplicative margin of error of the mean outcome: (|mean| + half-width) / |mean|.

    The half-width is t(level, n - p - 1) * sqrt(sd^2 (1 - R^2_adj) / n), the
    confidence interval of the intercept with centred predictors.
    """
    import scipy.stats

    df = n - p - 1
    if df < 1:
        return float("inf")
    half = scipy.stats.t.ppf(0.5 + level / 2.0, df) * math.sqrt(sd * sd * (1.0 - r2_adjusted) / n)
    return (abs(mean) + half) / abs(mean)


def n_for_mean(r2_adjusted: float, p: int, mean: float, sd: float, margin: float = 1.1, level: float = 0.95) -> int | None:
    """Criterion (iv): the smallest n whose mean outcome is estimated within the multiplicative ``margin``.

    None when the mean is zero (a multiplicative margin is not defined).

    References
    ----------
    Riley et al. (2019), Part I, criterion (iv).
    """
    if mean == 0.0 or not math.isfinite(mean):
        return None
    return _smallest(lambda n: mean_margin(n, p, r2_adjusted, mean, sd, level) <= margin, p + 2)


def f_squared(r2: float) -> float:
    """Cohen's effect size f^2 = R^2 / (1 - R^2)."""
    return r2 / (1.0 - r2)


def f_test_power(f2: float, u: int, v: int, alpha: float = 0.05) -> float:
    """Power of the F test of u parameters with v error degrees of freedom for effect ``f2``.

    Noncentral F with noncentrality lambda = f^2 (u + v + 1).

    References
    ----------
    Cohen (1988), chapter 9, eq. 9.3.5.
    """
    import scipy.stats

    if u < 1 or v < 1:
        return float("nan")
    critical = scipy.stats.f.isf(alpha, u, v)
    noncentrality = max(f2, 0.0) * (u + v + 1)
    if noncentrality == 0.0:
        return float(alpha)
    return float(scipy.stats.ncf.sf(critical, u, v, noncentrality))


def detectable_f_squared(u: int, v: int, power: float = 0.8, alpha: float = 0.05) -> float:
    """The smallest f^2 the F test of u parameters with v error degrees of freedom detects with ``power``."""
    import scipy.optimize

    if u < 1 or v < 1:
        return float("nan")
    high = 0.01
    while f_test_power(high, u, v, alpha) < power:
        high *= 2.0
        if high > 1e12:
            return float("inf")
    return float(scipy.optimize.brentq(lambda f2: f_test_power(f2, u, v, alpha) - power, 0.0, high, xtol=1e-12, rtol=1e-10))

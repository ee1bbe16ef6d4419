"""How many rows a screening cutoff flags in a table that has nothing wrong with it.

Cutoffs that shrink with the sample size (4/n for Cook's distance, 2/sqrt(n)
for DFBETAS, 2p/n for leverage) are built to flag a share of the rows of any
table, so in a large clean table they always flag some. Under a correctly
specified model with normal errors each row's chance of crossing such a
cutoff is known exactly (the externally studentized residual is t with
n - k - 1 degrees of freedom; for Gaussian predictors the centred hat value
is Beta distributed). A :class:`ChanceCheck` compares the rows that crossed
with that expectation.

References
----------
Belsley, D. A., Kuh, E., Welsch, R. E. (1980). Regression Diagnostics, p. 17 (distribution of h_i) and p. 28.
Beckman, R. J., Cook, R. D. (1983). Outlier..........s (sic, the title). Technometrics 25(2), 119-149 (t distribution of the
externally studentized residual; Bonferroni bounds).
Cook, R. D., Weisberg, S. (1982). Residuals and Influence in Regression, sec. 2.2.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

EXPECTED_GRID = 20_000


@dataclass(frozen=True)
class ChanceCheck:
    """Rows beyond a cutoff against what chance gives in a clean table of the same size and design.

    ``expected`` is the sum over rows of each row's probability of crossing;
    ``count_p`` the Poisson tail probability of seeing ``crossed`` or more
    rows; ``single_p`` the Bonferroni bound on the chance that any row is as
    extreme as the most improbable row that crossed.
    """

    crossed: int
    expected: float
    count_p: float
    single_p: float

    def beyond_chance(self, level: float) -> bool:
        """Whether the crossings are more, or more extreme, than a clean table gives with probability ``level``.

        The count and the most extreme row are two tests of one table: each is
        held to ``level / 2`` (Bonferroni), so a clean table is reported with
        probability at most ``level``.
        """
        if self.crossed == 0:
            return False
        return self.count_p < level / 2.0 or self.single_p < level / 2.0

    def describe(self) -> str:
        """E.g. ``about 4.1 expected by chance in a clean table of this size``, and the most extreme row's chance when smaller."""
        text = f"about {self.expected:.3g} expected by chance in a clean table of this size"
        if self.single_p < self.count_p:
            text += f"; one row this extreme would occur by chance with probability {probability_text(self.single_p)}"
        return text


def probability_text(p: float) -> str:
    """A probability for a message: two significant digits, or ``< 0.0001``."""
    return "< 0.0001" if p < 1e-4 else f"{p:.2g}"


def chance_check(crossed: np.ndarray, expected: float, crossed_tail: np.ndarray) -> ChanceCheck:
    """Compare the rows that crossed with chance.

    Parameters
    ----------
    crossed
        Boolean per row: the row is beyond the cutoff.
    expected
        The number of rows a clean table crosses on average: the sum of each row's crossing probability
        (see :func:`expected_count`).
    crossed_tail
        For the rows that crossed, in order, the probability of a value at least as extreme as the row's own.
    """
    crossed = np.asarray(crossed, dtype=bool)
    return chance_check_counts(int(crossed.sum()), crossed.size, expected, crossed_tail)


def chance_check_counts(count: int, rows: int, expected: float, crossed_tail: np.ndarray) -> ChanceCheck:
    """:func:`chance_check` from the number of rows that crossed, ``count``, out of ``rows``."""
    import scipy.stats

    count_p = float(scipy.stats.poisson.sf(count - 1, expected)) if count else 1.0
    single = np.asarray(crossed_tail, dtype=float)
    single = single[np.isfinite(single)]
    single_p = float(min(1.0, rows * single.min())) if single.size else 1.0
    return ChanceCheck(count, float(expected), count_p, single_p)


def overdispersed_count_p(count: int, expected: float, dispersion: float) -> float:
    """``P(N >= count)`` for a count whose mean is ``expected`` and whose variance is ``expected + (dispersion * expected)^2``.

    Rows measured against one estimate share its error: when the estimate is
    a few percent off, every row's chance of crossing moves together, so the
    count varies more than a Poisson count. A negative binomial with that mean
    and variance carries both parts (Poisson sampling of the rows and the
    estimate's relative error ``dispersion``); ``dispersion`` 0 is the Poisson.
    """
    import scipy.stats

    if count <= 0:
        return 1.0
    if dispersion <= 0.0:
        return float(scipy.stats.poisson.sf(count - 1, expected))
    size = 1.0 / dispersion**2
    return float(scipy.stats.nbinom.sf(count - 1, size, size / (size + expected)))


def expected_count(values: np.ndarray, probability: Callable[[np.ndarray], np.ndarray], grid: int = EXPECTED_GRID) -> float:
    """``sum_i probability(values_i)``, from an evenly spaced grid of the sorted values when there are more than ``grid``.

    The crossing probability is a smooth, monotone function of one per-row
    number (a hat value), so its mean over the quantiles of that number gives
    the sum to well under one row in a thousand while costing O(grid) special
    function calls instead of O(n).
    """
    values = np.asarray(values, dtype=float)
    n = values.size
    if n == 0:
        return 0.0
    if n <= grid:
        return float(np.nansum(probability(values)))
    ordered = np.sort(values)
    picked = ordered[np.linspace(0, n - 1, grid).round().astype(np.int64)]
    return float(n * np.nanmean(probability(picked)))


def t_tail(value: np.ndarray | float, dof: float) -> np.ndarray:
    """Two-sided tail probability ``P(|T| >= value)`` of Student's t."""
    import scipy.stats

    return 2.0 * scipy.stats.t.sf(np.abs(value), dof)


def cooks_tail(cooks: np.ndarray, hat: np.ndarray, rank: int, dof_resid: int) -> np.ndarray:
    """``P(D_i >= cooks)`` for each row under normal errors: ``r_i^2 / (n - k)`` is Beta(1/2, (n - k - 1)/2).

    ``D_i = r_i^2 h_i / (k (1 - h_i))`` with ``r_i`` the internally studentized residual.

    References
    ----------
    Cook & Weisberg (1982), sec. 2.2.1 (distribution of the internally studentized residual).
    """
    import scipy.special

    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.asarray(cooks) * rank * (1.0 - hat) / (hat * dof_resid)
    share = np.clip(np.nan_to_num(share, nan=np.inf), 0.0, np.inf)
    out = np.where(share >= 1.0, 0.0, scipy.special.betaincc(0.5, (dof_resid - 1) / 2.0, np.minimum(share, 1.0)))
    return np.where(np.isfinite(hat) & (hat > 0), out, np.nan)


def hat_tail(hat: np.ndarray, n: int, rank: int, intercept: bool) -> np.ndarray:
    """``P(h_i >= hat)`` for rows of Gaussian predictors.

    With an intercept ``(n h_i - 1) / (n - 1)`` is Beta((k-1)/2, (n-k)/2);
    without, ``h_i`` is Beta(k/2, (n-k)/2).

    References
    ----------
    Belsley, Kuh & Welsch (1980), p. 17; Hoaglin, D. C., Welsch, R. E. (1978). The hat matrix in regression
    and ANOVA. The American Statistician 32(1), 17-22.
    """
    import scipy.special

    hat = np.asarray(hat, dtype=float)
    if intercept:
        a, value = (rank - 1) / 2.0, (n * hat - 1.0) / (n - 1.0)
    else:
        a, value = rank / 2.0, hat
    b = (n - rank) / 2.0
    if a <= 0 or b <= 0:
        return np.zeros_like(hat)
    return scipy.special.betaincc(a, b, np.clip(value, 0.0, 1.0))

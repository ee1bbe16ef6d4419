"""Statistics that compare a new extract with its baseline: unit changes, the Chow test, and multiple-test correction."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from .distribution import Distribution, ValuesAt, ks_distance
from .factor import DesignFactor
from .fit import PreliminaryFit
from .mergeable import Moments, TriangularFactor, triangular


@dataclass(frozen=True)
class UnitChange:
    """A conversion ``new = scale * old + offset`` between two units of one quantity."""

    name: str
    scale: float
    offset: float = 0.0


def _both_ways(name: str, back: str, scale: float, offset: float = 0.0) -> tuple[UnitChange, UnitChange]:
    return UnitChange(name, scale, offset), UnitChange(back, 1.0 / scale, -offset / scale)


UNIT_CHANGES: tuple[UnitChange, ...] = (
    *_both_ways("times 10", "divided by 10", 10.0),
    *_both_ways("times 100 (e.g. a share to a percentage)", "divided by 100 (e.g. a percentage to a share)", 100.0),
    *_both_ways("times 1000 (e.g. kWh to Wh, tonnes to kg)", "divided by 1000 (e.g. Wh to kWh, kg to tonnes)", 1000.0),
    *_both_ways("degrees Celsius to Fahrenheit (x 1.8 + 32)", "degrees Fahrenheit to Celsius ((x - 32) / 1.8)", 1.8, 32.0),
    *_both_ways("kilograms to pounds (x 2.2046)", "pounds to kilograms (/ 2.2046)", 2.2046),
    *_both_ways("feet to metres (x 0.3048)", "metres to feet (/ 0.3048)", 0.3048),
    *_both_ways("m/s to km/h, or kWh to MJ (x 3.6)", "km/h to m/s, or MJ to kWh (/ 3.6)", 3.6),
)
"""Unit conversions that a changed export setting produces (exact factors, NIST SP 811 appendix B; 2.2046 rounded)."""

SPREAD_TOLERANCE = 0.04
LOCATION_TOLERANCE = 0.25


@dataclass(frozen=True)
class UnitMatch:
    """A unit change that explains how a column moved: the conversion, and the KS distances before and after undoing it."""

    change: UnitChange
    distance_raw: float
    distance_converted: float
    spread_ratio: float


def match_unit_change(old: Moments, reference: Distribution, ordered: np.ndarray, new: Moments) -> UnitMatch | None:
    """The conversion of :data:`UNIT_CHANGES` whose inverse brings the new values back onto the baseline, if any.

    A candidate must match the spread ratio within :data:`SPREAD_TOLERANCE`
    (the nearest two factors, 3.6 and 1 / 0.3048, differ by 9%) and the
    converted baseline mean within :data:`LOCATION_TOLERANCE` new SDs, each
    widened to three standard errors of the estimate on small samples
    (``SE(ln s1/s2) ~ sqrt(1/2n1 + 1/2n2)`` for normal data, Kendall & Stuart
    1977, sec. 10.8; the mean difference ``sqrt(1/n1 + 1/n2)`` SDs); among
    those, the one whose converted baseline distribution lies closest (KS) to
    the new values (``ordered``: sorted, finite) wins, and it must halve the
    KS distance of no conversion.
    """
    if old.count < 2 or new.count < 2 or not (old.std > 0 and new.std > 0):
        return None
    ratio = new.std / old.std
    spread_tolerance = max(SPREAD_TOLERANCE, 3.0 * float(np.sqrt(0.5 / old.count + 0.5 / new.count)))
    location_tolerance = max(LOCATION_TOLERANCE, 3.0 * float(np.sqrt(1.0 / old.count + 1.0 / new.count)))
    best: UnitMatch | None = None
    for change in UNIT_CHANGES:
        if abs(np.log(ratio / change.scale)) > spread_tolerance:
            continue
        if abs(new.mean - (change.scale * old.mean + change.offset)) > location_tolerance * new.std:
            continue
        mapped = reference.mapped(change.scale, change.offset)
        converted = ks_distance(mapped, ValuesAt.of_sorted(ordered, mapped.points))
        if best is None or converted < best.distance_converted:
            best = UnitMatch(change, float("nan"), converted, ratio)
    if best is None:
        return None
    raw = ks_distance(reference, ValuesAt.of_sorted(ordered, reference.points))
    if not best.distance_converted < raw / 2:
        return None
    return UnitMatch(best.change, raw, best.distance_converted, ratio)


def augmented_rows(factor: DesignFactor) -> np.ndarray:
    """A (p+1) x (p+1) matrix ``B`` with ``B'B = [X | y]'[X | y]`` in design order and units, from a pivoted, scaled factor.

    ``[(X / s)[:, perm] | y] = Q [[r, Q'y], [0, rho]]``; scaling back and
    undoing the pivots gives rows whose cross-products are those of the data.
    """
    p = factor.p
    block = np.zeros((p + 1, p + 1))
    block[:p, :p] = factor.r
    block[:p, p] = factor.qty[:p]
    block[p, p] = np.sqrt(factor.rss_outside)
    out = np.zeros_like(block)
    out[:, factor.perm] = block[:, :p] * factor.scales[factor.perm]
    out[:, p] = block[:, p]
    return out


def factor_of_rows(rows: np.ndarray, n: int) -> DesignFactor:
    """The pivoted factor of the unit-length-scaled design from rows ``[X | y]`` whose cross-products are the data's."""
    r = triangular(rows)
    p = r.shape[1] - 1
    norms = np.sqrt(np.einsum("ij,ij->j", r[:, :p], r[:, :p]))
    scales = np.where(norms > 0, norms, 1.0)
    r[:, :p] /= scales
    return DesignFactor.from_triangular(TriangularFactor(r, n), scales)


@dataclass(frozen=True)
class ChowTest:
    """The Chow test of equal coefficients in two samples: F, its degrees of freedom and p-value, and the effect size.

    ``added_share`` is ``(RSS_pooled - RSS_1 - RSS_2) / RSS_pooled``: the
    share of the pooled fit's residual sum of squares that separate
    coefficients remove (a partial eta squared).

    References
    ----------
    Chow, G. C. (1960). Tests of equality between sets of coefficients in two linear regressions. Econometrica 28(3), 591-605.
    """

    f: float
    df_num: int
    df_den: int
    p_value: float
    rss_first: float
    rss_second: float
    rss_pooled: float

    @property
    def added_share(self) -> float:
        """Share of the pooled RSS explained by letting the coefficients differ."""
        return (self.rss_pooled - self.rss_first - self.rss_second) / self.rss_pooled if self.rss_pooled > 0 else float("nan")


def chow_test(first: PreliminaryFit, second: PreliminaryFit) -> ChowTest | None:
    """The Chow test between two fits of the same design columns, from their factors alone (no rows).

    The pooled fit's factor is the QR factor of both fits' stacked
    cross-product rows (:func:`augmented_rows`), so the pooled RSS needs no
    row of either sample. With full-rank fits of k columns,
    ``F = ((RSS_p - RSS_1 - RSS_2) / k) / ((RSS_1 + RSS_2) / (n_1 + n_2 - 2k))``;
    in general the numerator's degrees of freedom are the ranks' excess.
    """
    import scipy.stats

    pooled_factor = factor_of_rows(np.vstack([augmented_rows(first.factor), augmented_rows(second.factor)]), first.n + second.n)
    pooled = PreliminaryFit(pooled_factor, 0.0, first.has_intercept)
    unrestricted = first.rss + second.rss
    df_num = first.rank + second.rank - pooled.rank
    df_den = first.n + second.n - first.rank - second.rank
    if df_num <= 0 or df_den <= 0 or not unrestricted > 0:
        return None
    f = ((pooled.rss - unrestricted) / df_num) / (unrestricted / df_den)
    return ChowTest(float(f), df_num, df_den, float(scipy.stats.f.sf(f, df_num, df_den)), first.rss, second.rss, pooled.rss)


def holm(p_values: Sequence[float]) -> list[float]:
    """Holm's step-down adjusted p-values (NaN stays NaN): each at most 1, monotone in the ordered p-values.

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J. Statist. 6(2), 65-70.
    """
    values = np.asarray(p_values, dtype=np.float64)
    finite = np.flatnonzero(np.isfinite(values))
    adjusted = np.full(values.size, np.nan)
    order = finite[np.argsort(values[finite], kind="stable")]
    m = order.size
    running = 0.0
    for rank, index in enumerate(order):
        running = max(running, min(1.0, (m - rank) * values[index]))
        adjusted[index] = running
    return [float(v) for v in adjusted]


def cohens_h(first: float, second: float) -> float:
    """Cohen's h between two proportions, ``2 asin(sqrt(p2)) - 2 asin(sqrt(p1))`` (Cohen 1988, sec. 6.2)."""
    return float(2 * np.arcsin(np.sqrt(second)) - 2 * np.arcsin(np.sqrt(first)))

"""Outlier rules: rows far from the fitted line, from the bulk of one column, or from the bulk of the predictors."""

from __future__ import annotations

from typing import Any, Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import MAX_LISTED_ROWS, Finding, Grade
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold, fmt, meaningful_ratio
from prefit.stats.chance import chance_check, chance_check_counts, probability_text, t_tail
from prefit.stats.robust import (
    MODIFIED_Z_FACTOR,
    MODIFIED_Z_LIMIT,
    beyond_modified_z,
)

from ._rowfindings import (
    CHANCE,
    beyond_chance,
    chance_details,
    impact_message,
    rows_text,
    single_row_impacts,
)

BONFERRONI_SOURCE = (
    "Bonferroni-adjusted outlier test: n times the two-sided t(n-p-1) p-value of the externally studentized "
    "residual (Cook & Weisberg 1982, Residuals and Influence in Regression, sec. 2.2.3)"
)
MODIFIED_Z_SOURCE = "Iglewicz & Hoaglin (1993), How to Detect and Handle Outliers: |modified z| > 3.5"
MCD_SOURCE = (
    "Rousseeuw & van Zomeren (1990), JASA 85: robust squared distance from the MCD estimate beyond the 0.975 "
    "quantile of chi-square with as many degrees of freedom as predictors"
)
SLIP_POWERS = (1, 2, 3)
SLIP_GAP = float(np.sqrt(10.0))
SLIP_ISOLATION = 2.0
CLUSTER = 1.5
MIN_SPREAD_VALUES = 3


# ---------------------------------------------------------------- studentized residuals


def _p(p: float) -> str:
    text = probability_text(p)
    return text if text.startswith("<") else f"= {text}"


def _studentized(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    fit = ctx.fit
    if not ctx.target_is_numeric or fit.rank == 0 or fit.df_resid <= 1 or not fit.sigma > 0:
        return
    infl = ctx.influence
    n, dof = ctx.design.n, fit.df_resid - 1
    t = np.nan_to_num(infl.studentized, nan=0.0)
    size = np.abs(t)
    strong_limit, weak_limit = settings.threshold("misleads"), settings.threshold("weakens")
    bonferroni_t = float(scipy.stats.t.isf(strong_limit.value / (2.0 * n), dof))
    strong = size > bonferroni_t
    bonferroni = np.ones(n)
    bonferroni[strong] = np.minimum(1.0, n * t_tail(size[strong], dof))
    strong &= bonferroni < strong_limit.value
    screened = size > weak_limit.value
    check = chance_check(screened, n * float(t_tail(weak_limit.value, dof)), t_tail(np.array([size.max()]), dof))
    target = ctx.roles.target
    details: dict[str, Any] = {"degrees_of_freedom": dof, **chance_details(check)}
    if strong.any():
        rows = np.flatnonzero(strong)
        impacts = single_row_impacts(ctx, rows, t[rows])
        details["impact"] = impacts
        details["bonferroni_p"] = float(bonferroni[rows].min())
        labels, values, total = ctx.listed_rows(ctx.design.positions[rows], t[rows])
        yield settings.finding(
            Grade.MISLEADS,
            f"{rows_text(total)} {'lies' if total == 1 else 'lie'} too far from the fitted line to be chance: externally studentized residual up to "
            f"{fmt(float(size[rows].max()))} (Bonferroni p {_p(float(bonferroni[rows].min()))} with {n:,} rows tested)"
            f"{impact_message(impacts)}",
            columns=[target],
            rows=labels,
            row_values=values,
            row_count=total,
            value=float(bonferroni[rows].min()),
            threshold=strong_limit,
            details=details,
        )
        return
    if not beyond_chance(settings, check):
        return
    rows = np.flatnonzero(screened)
    labels, values, total = ctx.listed_rows(ctx.design.positions[rows], t[rows])
    yield settings.finding(
        Grade.WEAKENS,
        f"{rows_text(total)} {'has' if total == 1 else 'have'} |externally studentized residual| above {weak_limit.value:g} (largest "
        f"{fmt(float(size[rows].max()))}; {check.describe()}): heavier tails than normal errors give",
        columns=[target],
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(size[rows].max()),
        threshold=weak_limit,
        details=details,
    )


# ---------------------------------------------------------------- univariate


def _isolated(value: float, ordered: np.ndarray, upward: bool) -> bool:
    """Whether the nearest values outside ``value``'s own cluster (within a factor CLUSTER) are SLIP_ISOLATION away."""
    if upward:
        below = ordered[: np.searchsorted(ordered, value / CLUSTER, side="right")]
        return below.size > 0 and value >= SLIP_ISOLATION * below[-1]
    above = ordered[np.searchsorted(ordered, value * CLUSTER, side="left") :]
    return above.size > 0 and value * SLIP_ISOLATION <= above[0]


def _slip(value: float, median: float, mad: float, limit: float, ordered: np.ndarray) -> str | None:
    """``10x`` (or ``1/10``) when the value is a power of ten away from the column's ordinary values.

    The value must sit at least half an order of magnitude (``SLIP_GAP``)
    beyond the farthest value the modified z-score still calls ordinary,
    stand apart from the rest of the column (no value within a factor
    ``SLIP_ISOLATION`` outside its own cluster), and land among the ordinary
    values when scaled back by that power of ten: a long continuous tail is
    not a slip.
    """
    if median <= 0 or value <= 0:
        return None
    reach = limit * mad / MODIFIED_Z_FACTOR
    upper, lower = median + reach, median - reach
    for power in SLIP_POWERS:
        factor = 10.0**power
        if value >= SLIP_GAP * upper and abs(MODIFIED_Z_FACTOR * (value / factor - median) / mad) <= limit:
            return f"{factor:,.0f}x" if _isolated(value, ordered, upward=True) else None
        if lower > 0 and value * SLIP_GAP <= lower and abs(MODIFIED_Z_FACTOR * (value * factor - median) / mad) <= limit:
            return f"1/{factor:,.0f}" if _isolated(value, ordered, upward=False) else None
    return None


def _against_median(value: float, median: float, mad: float) -> str:
    """``12.5x the median``, or ``the median being about 0`` when it lies within one MAD of zero."""
    ratio = meaningful_ratio(value, median, mad)
    return f"{fmt(ratio)}x the median" if ratio is not None else "the median being about 0"


def _univariate(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    limit = settings.threshold("weakens")
    columns = ctx.value_screened_columns
    normal_cross = float(2.0 * scipy.stats.norm.sf(limit.value))
    for column in columns:
        values = ctx.values(column)
        finite = np.isfinite(values)
        present = int(finite.sum())
        if present < MIN_SPREAD_VALUES:
            continue
        median, mad = ctx.median_and_mad(column)
        if not np.isfinite(mad) or mad == 0:
            continue
        rows, row_scores = beyond_modified_z(values, median, mad, limit.value)
        if rows.size == 0:
            continue
        size = np.abs(row_scores)
        check = chance_check_counts(rows.size, present, present * normal_cross, 2.0 * scipy.stats.norm.sf(np.array([size.max()])))
        if not beyond_chance(settings, check):
            continue
        ordered = np.sort(values[finite])
        slips = {int(r): s for r in rows if (s := _slip(float(values[r]), median, mad, limit.value, ordered)) is not None}
        labels, row_values, total = ctx.listed_rows(rows, row_scores)
        strongest = int(np.argmax(size))
        extreme = rows[strongest]
        text = (
            f"{column}: {total:,} value{'' if total == 1 else 's'}{_label_groups(ctx, rows)} with |modified z| above {limit.value:g} (median {fmt(median)}, MAD {fmt(mad)}; "
            f"most extreme {fmt(float(values[extreme]))}, {_against_median(float(values[extreme]), median, mad)}, "
            f"z = {fmt(float(row_scores[strongest]))}; {check.describe()})"
        )
        if slips:
            by_factor: dict[str, list[Any]] = {}
            for row, factor in slips.items():
                by_factor.setdefault(factor, []).append(ctx.row_label(row))
            parts = [
                f"{len(labels_):,} value{'' if len(labels_) == 1 else 's'} about {factor} the usual size (rows {', '.join(str(x) for x in labels_[:5])}"
                f"{', ...' if len(labels_) > 5 else ''})"
                for factor, labels_ in sorted(by_factor.items())
            ]
            text += "; suspected unit or decimal slips: " + "; ".join(parts)
        yield settings.finding(
            Grade.WEAKENS,
            text,
            columns=[column],
            rows=labels,
            row_values=row_values,
            row_count=total,
            value=float(size.max()),
            threshold=limit,
            details={
                "median": median,
                "mad": mad,
                "suspected_slips": [{"row": ctx.row_label(r), "factor": f} for r, f in sorted(slips.items())][:MAX_LISTED_ROWS],
                **chance_details(check),
            },
            remedy=(
                f"check the listed {column} values at the source; correct unit or decimal slips (divide by the "
                "factor named) and entry errors; keep genuine extremes and check their influence"
                if slips
                else None
            ),
        )


# ---------------------------------------------------------------- multivariate


def _label_groups(ctx: RunContext, positions: np.ndarray) -> str:
    """`` (from 6 site_id values)`` when the rows share few labels: whole groups of rows, not single rows."""
    if ctx.roles.id is None:
        return ""
    distinct = len({ctx.row_label(int(p)) for p in positions})
    return f" (from {distinct:,} {ctx.roles.id} value{'' if distinct == 1 else 's'})" if distinct < positions.size else ""


def _multivariate(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    chosen = ctx.robust_columns
    columns, data, median, mad = chosen.names, chosen.data, chosen.median, chosen.mad
    q, n = len(columns), data.shape[0]
    if q < 2 or n < settings.limit("rows_per_variable") * q:
        return
    robust = ctx.robust
    if robust is None:
        return
    limit = settings.threshold("weakens")
    cutoff = float(scipy.stats.chi2.ppf(limit.value, q))
    squared = robust.squared
    crossed = squared > cutoff
    if not crossed.any():
        return
    check = chance_check(crossed, n * (1.0 - limit.value), scipy.stats.chi2.sf(np.array([squared.max()]), q))
    if not beyond_chance(settings, check):
        return
    rows = np.flatnonzero(crossed)
    scores = MODIFIED_Z_FACTOR * (data[rows] - median) / mad
    single = (np.abs(scores) > settings.limit("univariate")).any(axis=1)
    only_combined = int((~single).sum())
    labels, values, total = ctx.listed_rows(ctx.design.positions[rows], squared[rows])
    sampled = "" if robust.sampled == n else f", estimated on a fixed sample of {robust.sampled:,} rows"
    groups = _label_groups(ctx, ctx.design.positions[rows])
    yield settings.finding(
        Grade.WEAKENS,
        f"{total:,} of {n:,} complete rows{groups} lie beyond the chi-square({q}) 0.975 quantile {fmt(cutoff)} in robust squared "
        f"distance from the bulk of {', '.join(columns)} (largest {fmt(float(squared[rows].max()))}; {check.describe()}"
        f"{sampled}); {only_combined:,} of them are unremarkable in every single column and unusual only in combination",
        columns=list(columns),
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(squared[rows].max()),
        threshold=cutoff,
        source=limit.source,
        details={
            "cutoff": cutoff,
            "only_in_combination": only_combined,
            "estimated_on_rows": robust.sampled,
            **chance_details(check),
        },
    )


RULES = [
    Rule(
        id="outliers.studentized-residual",
        summary="Rows whose target lies far from the fitted line (externally studentized residuals).",
        why="Least squares weighs squared residuals, so one row far from the line pulls the slopes and inflates the "
        "residual variance, which widens every confidence interval. A residual too large to be chance among n rows "
        "is usually a recording error or a row from a different process.",
        remedy="check the listed rows' target values at the source (units, decimal point, counter resets); correct "
        "errors, and fit with and without genuine extremes",
        check=_studentized,
        thresholds=(
            Threshold("misleads", 0.05, BONFERRONI_SOURCE, Grade.MISLEADS, "<"),
            Threshold("weakens", 3, COMMON_PRACTICE + ": |externally studentized residual| > 3", Grade.WEAKENS, ">"),
            CHANCE,
        ),
        needs=frozenset({"rows", "fit"}),
    ),
    Rule(
        id="outliers.univariate",
        summary="Values far from the bulk of their own column (modified z-score from the median and MAD).",
        why="An extreme value in the target becomes a large residual; in a predictor it becomes a high-leverage row "
        "that can decide a slope. Values about 10, 100 or 1000 times the usual size are typically unit or decimal "
        "slips made while entering or exporting data.",
        remedy="check the listed values at the source; correct unit or decimal slips and entry errors; keep genuine "
        "extremes and check their influence",
        check=_univariate,
        thresholds=(Threshold("weakens", MODIFIED_Z_LIMIT, MODIFIED_Z_SOURCE, Grade.WEAKENS, ">"), CHANCE),
        needs=frozenset({"rows"}),
    ),
    Rule(
        id="outliers.multivariate",
        summary="Rows unusual in the combination of numeric predictors (robust Mahalanobis distance from the MCD).",
        why="A row can be ordinary in every column and still unlike any other row in combination (a small site with "
        "a huge pallet count). Such rows are leverage points; the classical Mahalanobis distance misses groups of "
        "them because they inflate the mean and covariance it is measured from, the robust one does not.",
        remedy="check the listed rows' predictor values together; correct entry errors, and fit with and without "
        "genuine but unusual rows",
        check=_multivariate,
        heavy=True,
        thresholds=(
            Threshold("weakens", 0.975, MCD_SOURCE + " (value is the quantile's probability)", Grade.WEAKENS, ">"),
            Threshold("univariate", MODIFIED_Z_LIMIT, MODIFIED_Z_SOURCE + " (to tell rows unusual only in combination)"),
            Threshold(
                "rows_per_variable",
                5,
                "Rousseeuw & Van Driessen (1999), Technometrics 41: the MCD is meant for n/p above 5 (from memory)",
            ),
            CHANCE,
        ),
        needs=frozenset({"rows"}),
    ),
]

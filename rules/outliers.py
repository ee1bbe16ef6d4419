"""Outlier rules: rows far from the fitted line, from the bulk of one column, or from the bulk of the predictors."""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, Iterator

import numpy as np

from prefit.context import RunContext
from prefit.findings import MAX_LISTED_ROWS, Finding, Grade
from prefit.rule import (
    COMMON_PRACTICE,
    LISTED_NAMES,
    Cutoffs,
    NotApplicable,
    Repair,
    RowScreen,
    Rule,
    RuleSettings,
    ScreenScale,
    Threshold,
    capped_names,
    fmt,
)
from prefit.stats.chance import chance_check, overdispersed_count_p, probability_text, t_tail
from prefit.stats.robust import ESTIMATE_ROWS_PER_COLUMN, MCD_SAMPLE_ROWS, MODIFIED_Z_FACTOR, MODIFIED_Z_LIMIT, bulk_quantile
from prefit.stats.skewed import FENCE_MULTIPLE, NORMAL_SHARE_BEYOND, AdjustedFences

from ._rowfindings import (
    CHANCE,
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
ADJUSTED_BOXPLOT_SOURCE = (
    "Hubert & Vandervieren (2008), CSDA 52(12), eq. 5: adjusted boxplot fences Q1 - 1.5 e^{-4 MC} IQR and "
    "Q3 + 1.5 e^{3 MC} IQR (mirrored for MC < 0), MC the medcouple (Brys, Hubert & Struyf 2004); a column is reported "
    "when more values lie beyond them than the 0.70% of a normal column (Poisson count, Holm 1979 over columns)"
)
SLIP_SOURCE = (
    "prefit: a value at least sqrt(10) times beyond the fence on its side, isolated from the rest of the column, "
    "that lands within the fences when divided (or multiplied) by 10, 100 or 1,000 (a unit or decimal slip)"
)
MCD_SOURCE = (
    "Rousseeuw & van Zomeren (1990), JASA 85: robust squared distance from the reweighted MCD estimate (the OGK of "
    "Maronna & Zamar 2002, Technometrics 44, in many columns or few rows per column) beyond the 0.975 quantile of "
    "chi-square with as many degrees of freedom as predictors, after a small-sample correction of the scatter "
    "(Pison, Van Aelst & Willems 2002, Metrika 55; Hardin & Rocke 2005, JCGS 14)"
)
SLIP_CLUSTER_SOURCE = (
    "prefit: values 10^k times the usual size form a second cluster (many slipped rows, not one isolated value) when, "
    "on the log10 scale, more of the column lies above the column's lower quartile shifted up by k decades than in "
    "the window one interquartile range wide just below it, beyond chance against a share of 0.4 (binomial test at "
    "this level): a power-law (Pareto) tail puts exactly 1/3 of the two windows' values above, any lighter tail less "
    "(the log of a Pareto value is exponential: e^{-rate IQR} = 1/3); the shift must put the window beyond the "
    "slip gap and the window below it beyond the upper quartile, and at least five values must lie above"
)
SLIP_POWERS = (1, 2, 3)
#: Binomial share of the upper window under the null of a tail (above the 1/3 of a Pareto tail), and the fewest values above.
CLUSTER_NULL_SHARE, CLUSTER_MIN_VALUES = 0.4, 5
SLIP_GAP = float(np.sqrt(10.0))
SLIP_ISOLATION = 3.0
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
    # A single row's evidence is the Bonferroni test above; below its level only the count of rows beyond the limit counts.
    if not (check.crossed and check.count_p < settings.limit("chance") / 2.0):
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
        return below.size > 0 and value > SLIP_ISOLATION * below[-1]
    above = ordered[np.searchsorted(ordered, value * CLUSTER, side="left") :]
    return above.size > 0 and value * SLIP_ISOLATION < above[0]


def _slip(value: float, fences: AdjustedFences, ordered: np.ndarray, gap: float) -> str | None:
    """``10x`` (or ``1/10``) when the value is a power of ten away from the column's ordinary values.

    The value must sit ``gap`` times beyond the fence on its side (half an
    order of magnitude by default), stand apart from the rest of the column
    (no value within a factor ``SLIP_ISOLATION`` outside its own cluster),
    and land within the fences when scaled back by that power of ten: a long
    continuous tail is not a slip. The gap is measured from the wider of the
    adjusted and Tukey's plain upper fence: a short column's medcouple varies
    widely (two standard errors is about 0.3 at 50 values), and a negative one
    pulls the adjusted upper fence towards the upper quartile, which made
    ordinary normal values "10x" slips in one column of 10,000 such columns. A value too small must come from a column
    of positive values whose ordinary range stays a factor ``gap`` from zero
    (Tukey's plain lower fence at least the upper quartile over ``gap``), lie
    ``gap`` times below that fence, and land between the quartiles when
    scaled up: small values are common in any tail towards zero.
    """
    if value <= 0:
        return None
    upper, lower = fences.upper, fences.lower
    tukey_upper = max(upper, fences.q3 + FENCE_MULTIPLE * (fences.q3 - fences.q1))
    positive = ordered[0] > 0
    for power in SLIP_POWERS:
        factor = 10.0**power
        if upper > 0 and value >= gap * tukey_upper and lower <= value / factor <= upper:
            return f"{factor:,.0f}x" if _isolated(value, ordered, upward=True) else None
        tukey_lower = min(lower, fences.q1 - FENCE_MULTIPLE * (fences.q3 - fences.q1))
        if positive and tukey_lower * gap >= fences.q3 and value * gap <= tukey_lower and fences.q1 <= value * factor <= fences.q3:
            return f"1/{factor:,.0f}" if _isolated(value, ordered, upward=False) else None
    return None


def _slip_clusters(ordered: np.ndarray, fences: AdjustedFences, gap: float, level: float) -> tuple[int, ...]:
    """The powers of ten ``k`` at which a positive column has a second cluster of values ``10^k`` times its usual size.

    A slip of many rows (a batch entered in cents, a file exported in the wrong unit) makes a copy of part of the
    column ``k`` decades up; its values are not isolated from each other, and the copy's lower tail meets the
    column's upper tail, so the value-by-value isolation test misses them. On the log scale the copy is a second
    mode: the share of the column above the shifted lower quartile exceeds what any tail thinning out from the
    bulk gives next to the window just below (see ``SLIP_CLUSTER_SOURCE``).
    """
    import scipy.stats

    if ordered.size == 0 or not ordered[0] > 0:
        return ()
    logs = np.log10(ordered)
    q1, q3 = (float(v) for v in np.quantile(logs, [0.25, 0.75]))
    width = q3 - q1
    if not width > 0:
        return ()
    found = []
    for power in SLIP_POWERS:
        start = q1 + power
        below = start - width
        if below < q3 or 10.0**start < gap * fences.upper:
            continue
        above = int(logs.size - np.searchsorted(logs, start, side="right"))
        window = int(np.searchsorted(logs, start, side="right") - np.searchsorted(logs, below, side="right"))
        if above >= CLUSTER_MIN_VALUES and scipy.stats.binom.sf(above - 1, above + window, CLUSTER_NULL_SHARE) < level:
            found.append(power)
    return tuple(found)


def _cluster_slip(value: float, fences: AdjustedFences, gap: float, powers: tuple[int, ...]) -> str | None:
    """``100x`` when the value lies beyond the slip gap and lands within the fences scaled back by a clustered power."""
    if value < gap * fences.upper:
        return None
    for power in powers:
        factor = 10.0**power
        if fences.lower <= value / factor <= fences.upper:
            return f"{factor:,.0f}x"
    return None


@dataclass(frozen=True)
class _ColumnOutliers:
    """One column's values beyond its adjusted-boxplot fences."""

    column: str
    rows: np.ndarray
    scores: np.ndarray
    present: int
    expected: float
    count_p: float
    fences: AdjustedFences
    slips: dict[int, str]


def _column_outliers(ctx: RunContext, column: str, fence: float, gap: float, cluster_level: float = 0.001) -> _ColumnOutliers | None:
    import scipy.special

    fences = ctx.fences(column)
    if fences is None:
        return None
    values = ctx.values(column)
    scores = fences.scores(values)
    rows = np.flatnonzero(np.nan_to_num(scores, nan=0.0) > fence)
    if rows.size == 0:
        return None
    finite = values[np.isfinite(values)]
    expected = finite.size * NORMAL_SHARE_BEYOND
    count_p = float(scipy.special.pdtrc(rows.size - 1, expected))  # Poisson P(count >= rows), as scipy.stats.poisson.sf(rows - 1)
    ordered = np.sort(finite)
    powers = _slip_clusters(ordered, fences, gap, cluster_level)
    slips = {
        int(r): s
        for r in rows
        if (s := _slip(float(values[r]), fences, ordered, gap) or _cluster_slip(float(values[r]), fences, gap, powers)) is not None
    }
    return _ColumnOutliers(column, rows, scores[rows], int(finite.size), expected, count_p, fences, slips)


def holm_rejected(p_values: list[float], level: float) -> list[bool]:
    """Holm's step-down procedure: which hypotheses are rejected at family-wise error ``level``.

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J. Statist. 6(2), 65-70.
    """
    order = sorted(range(len(p_values)), key=lambda i: (p_values[i], i))
    rejected = [False] * len(p_values)
    for rank, i in enumerate(order):
        if p_values[i] > level / (len(p_values) - rank):
            break
        rejected[i] = True
    return rejected


def _column_text(ctx: RunContext, found: _ColumnOutliers) -> str:
    strongest = int(np.argmax(found.scores))
    extreme = float(ctx.values(found.column)[found.rows[strongest]])
    count = found.rows.size
    text = (
        f"{found.column}: {count:,} value{'' if count == 1 else 's'}{_label_groups(ctx, found.rows)} outside "
        f"[{fmt(found.fences.lower)}, {fmt(found.fences.upper)}] (about {found.expected:.3g} expected in a normal column; "
        f"most extreme {fmt(extreme)})"
    )
    if found.slips:
        by_factor: dict[str, list[Any]] = {}
        for row, factor in found.slips.items():
            by_factor.setdefault(factor, []).append(ctx.row_label(row))
        parts = [
            f"{len(labels_):,} value{'' if len(labels_) == 1 else 's'} about {factor} the usual size (rows {', '.join(str(x) for x in labels_[:5])}"
            f"{', ...' if len(labels_) > 5 else ''})"
            for factor, labels_ in sorted(by_factor.items())
        ]
        text += ", suspected unit or decimal slips: " + "; ".join(parts)
    return text


def _slip_factor(name: str) -> float:
    """What a slip's value must be multiplied by to undo it: 1/10 for ``10x``, 100 for ``1/100``."""
    if name.startswith("1/"):
        return float(name[2:].replace(",", ""))
    return 1.0 / float(name.rstrip("x").replace(",", ""))


def _slips_scaled_back(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the finding's suspected slips divided (or multiplied) back by their power of ten."""
    by_column = finding.details.get("columns", {})
    slipped = [column for column, found in by_column.items() if found.get("suspected_slips")]
    if not slipped or finding.threshold is None:
        return None
    import pyarrow as pa

    fence, gap = finding.threshold, SLIP_GAP
    table, touched = ctx.table, 0
    for column in slipped:
        found = _column_outliers(ctx, column, fence, gap, finding.details.get("cluster_level", 0.001))
        if found is None or not found.slips:
            continue
        repaired = ctx.values(column).copy()
        for row, name in found.slips.items():
            repaired[row] *= _slip_factor(name)
        table = table.set_column(table.column_names.index(column), column, pa.array(repaired, from_pandas=True))
        touched += len(found.slips)
    if not touched:
        return None
    return Repair(f"{touched:,} suspected slip(s) scaled back", rows=touched, table=table)


def _univariate(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    fence = settings.threshold("note")
    columns = ctx.value_screened_columns
    ctx.prepare_fences(columns)
    level = settings.limit("cluster")
    found = [f for c in columns if (f := _column_outliers(ctx, c, fence.value, settings.limit("weakens"), level)) is not None]
    if not found:
        return
    significant = holm_rejected([f.count_p for f in found], settings.limit("chance"))
    slipped = [f for f in found if f.slips]
    reported = slipped if slipped else [f for f, keep in zip(found, significant) if keep]
    if not reported:
        return
    grade = Grade.WEAKENS if slipped else Grade.NOTE
    rows = np.unique(np.concatenate([f.rows for f in reported]))
    largest = np.zeros(ctx.table.num_rows)
    for f in reported:
        np.maximum.at(largest, f.rows, f.scores)
    labels, row_values, total = ctx.listed_rows(rows, largest[rows])
    described = reported if len(reported) <= LISTED_NAMES else sorted(reported, key=lambda f: f.count_p)[: LISTED_NAMES - 2]
    text = "; ".join(_column_text(ctx, f) for f in described)
    if len(described) < len(reported):
        text += f"; and {len(reported) - len(described):,} more columns (every one in the details)"
    if slipped:
        message = f"values a power of ten away from the rest of their column, beyond the adjusted boxplot's fences: {text}"
    else:
        message = (
            f"more values beyond the adjusted boxplot's fences than a normal column gives, in {len(reported)} of "
            f"{len(found)} column{'' if len(found) == 1 else 's'} with values beyond them (Holm-adjusted over columns): {text}"
        )
    yield settings.finding(
        grade,
        message,
        columns=[f.column for f in reported],
        rows=labels,
        row_values=row_values,
        row_count=total,
        value=float(largest[rows].max()),
        threshold=fence,
        details={
            "cluster_level": level,
            "columns": {
                f.column: {
                    **f.fences.to_dict(),
                    "beyond_fences": int(f.rows.size),
                    "expected_in_normal_column": f.expected,
                    "count_probability": f.count_p,
                    "suspected_slips": [{"row": ctx.row_label(r), "factor": s} for r, s in sorted(f.slips.items())][:MAX_LISTED_ROWS],
                }
                for f in reported
            },
        },
        remedy=(
            "check the listed values at the source; correct unit or decimal slips (divide by the factor named) and entry "
            "errors; keep genuine extremes and check their influence"
            if slipped
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

    chosen = ctx.robust_columns
    columns, data, median, mad = chosen.names, chosen.data, chosen.median, chosen.mad
    q, n = len(columns), data.shape[0]
    per_variable = settings.limit("rows_per_variable")
    if q < 2 or n < per_variable * q or n < settings.limit("min_rows"):
        return
    if min(n, MCD_SAMPLE_ROWS) < ESTIMATE_ROWS_PER_COLUMN * q:
        raise NotApplicable(
            f"{q:,} numeric predictors: the robust estimate is computed on at most {MCD_SAMPLE_ROWS:,} rows and needs "
            f"{ESTIMATE_ROWS_PER_COLUMN} of them per column, so robust distances are measured in at most "
            f"{MCD_SAMPLE_ROWS // ESTIMATE_ROWS_PER_COLUMN:,} columns (the design's leverage, influence.leverage, covers every column)"
        )
    robust = ctx.robust
    if robust is None:
        return
    limit = settings.threshold("weakens")
    cutoff = robust.cutoff(limit.value)
    squared = robust.squared
    crossed = squared > cutoff
    if not crossed.any():
        return
    expected = n * (1.0 - limit.value)
    check = chance_check(crossed, expected, robust.tail(np.array([squared.max()])))
    # Every row is measured against one estimate from robust.sampled rows: its error moves all crossings together.
    dispersion = settings.limit("dispersion") / np.sqrt(robust.sampled)
    check = replace(check, count_p=overdispersed_count_p(check.crossed, expected, dispersion))
    material = check.crossed >= settings.limit("excess") * expected
    if not (check.single_p < settings.limit("single") or (material and check.count_p < settings.limit("chance") / 2.0)):
        return
    skew_limit, moment_limit = settings.limit("skewness"), settings.limit("moment-skewness")
    skewed = [
        c
        for c in columns
        if ((f := ctx.fences(c)) is not None and abs(f.medcouple) > skew_limit) or abs(ctx.summary(c).moments.skewness) > moment_limit
    ]
    rows = np.flatnonzero(crossed)
    scores = MODIFIED_Z_FACTOR * (data[rows] - median) / mad
    single = (np.abs(scores) > settings.limit("univariate")).any(axis=1)
    only_combined = int((~single).sum())
    labels, values, total = ctx.listed_rows(ctx.design.positions[rows], squared[rows])
    sampled = "" if robust.sampled == n else f", estimated on a fixed sample of {robust.sampled:,} rows"
    groups = _label_groups(ctx, ctx.design.positions[rows])
    reference = f"the chi-square({q}) 0.975 quantile" if robust.bulk is None else "the 0.975 quantile of the distances' own bulk"
    corrected = "corrected for the sample size" if robust.bulk is None else f"compared with {robust.reference}"
    message = (
        f"{total:,} of {n:,} complete rows{groups} lie beyond {reference} {fmt(cutoff)} in robust squared "
        f"distance ({robust.method}, {corrected}) from the bulk of {capped_names(columns)} (largest "
        f"{fmt(float(squared[rows].max()))}; {check.describe()}{sampled}); {only_combined:,} of them are unremarkable in "
        "every single column and unusual only in combination"
    )
    grade = Grade.WEAKENS
    distinct = len({ctx.row_label(int(p)) for p in ctx.design.positions[rows]}) if ctx.roles.id is not None else total
    if 2 * distinct <= total:
        grade = Grade.NOTE
        message += (
            f"; the rows beyond come from only {distinct:,} {ctx.roles.id} value{'' if distinct == 1 else 's'}: facts repeated "
            "on every row of a group are not the independent rows the chi-square reference assumes"
        )
    elif skewed:
        grade = Grade.NOTE
        message += (
            f"; the chi-square reference assumes roughly symmetric predictors, and {', '.join(skewed)} "
            f"{'is' if len(skewed) == 1 else 'are'} skewed (|medcouple| above {skew_limit:g} or |moment skewness| above {moment_limit:g}), "
            "so part of this is the long tail"
        )
    yield settings.finding(
        grade,
        message,
        columns=list(columns),
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(squared[rows].max()),
        threshold=cutoff,
        source=limit.source,
        details={
            "cutoff": cutoff,
            "estimator": robust.method,
            "reference": "chi-square" if robust.bulk is None else "own bulk (Wilson-Hilferty cube roots, median and MAD)",
            "only_in_combination": only_combined,
            "estimated_on_rows": robust.sampled,
            "skewed_columns": skewed,
            **chance_details(check),
        },
    )


def _studentized_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts |externally studentized residuals| beyond the weakens limit (3) and the Bonferroni limit at the misleads level."""
    import scipy.stats

    weak, level = settings.limit("weakens"), settings.limit("misleads")
    dof = scale.df_resid - 1
    bonferroni = float(scipy.stats.t.isf(level / (2 * scale.rows), dof)) if dof > 0 else float("inf")
    return ((f"{weak:g}", weak), (f"bonferroni {level:g}", bonferroni))


def _fence_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts every value's fence score beyond the note limit (the IQR multiple of the adjusted boxplot)."""
    multiple = settings.limit("note")
    return ((f"{multiple:g} IQR", multiple),)


def _robust_distance_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts squared robust distances beyond the weakens probability's (0.975) quantile of the sample's reference.

    The reference is chi-square, or in many columns the distances' own bulk (see :class:`RobustDistances`).
    """
    import scipy.stats

    probability = settings.limit("weakens")
    if scale.robust_bulk is not None:
        return ((f"own bulk {probability:g}", bulk_quantile(scale.robust_bulk, probability)),)
    return ((f"chi-square {probability:g}", float(scipy.stats.chi2.ppf(probability, scale.robust_columns))),)


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
            Threshold(
                "misleads",
                0.01,
                BONFERRONI_SOURCE + "; level 0.01 from prefit's calibration study: at 0.05 the test alone fails 5% of "
                "clean tables by construction, above the 2% a gate may fail",
                Grade.MISLEADS,
                "<",
            ),
            Threshold("weakens", 3, COMMON_PRACTICE + ": |externally studentized residual| > 3", Grade.WEAKENS, ">"),
            CHANCE,
        ),
        needs=frozenset({"rows", "fit"}),
        screen=RowScreen("studentized_residual", _studentized_cutoffs),
    ),
    Rule(
        id="outliers.univariate",
        summary="Values beyond their column's skewness-adjusted boxplot fences: one finding listing the columns.",
        why="An extreme value in the target becomes a large residual; in a predictor it becomes a high-leverage row "
        "that can decide a slope. Values about 10, 100 or 1000 times the usual size are typically unit or decimal "
        "slips made while entering or exporting data. The fences widen on the long side of a skewed column (the "
        "medcouple-adjusted boxplot), so the ordinary tail of an amount or a count is not listed as errors.",
        remedy="check the listed values at the source; correct unit or decimal slips and entry errors; keep genuine "
        "extremes and check their influence",
        check=_univariate,
        thresholds=(
            Threshold("note", FENCE_MULTIPLE, ADJUSTED_BOXPLOT_SOURCE + " (value is the IQR multiple)", Grade.NOTE, ">"),
            Threshold("weakens", SLIP_GAP, SLIP_SOURCE + " (value is the gap factor)", Grade.WEAKENS, ">="),
            Threshold("cluster", 0.001, SLIP_CLUSTER_SOURCE + " (value is the test's level)"),
            CHANCE,
        ),
        needs=frozenset({"rows"}),
        repair=_slips_scaled_back,
        screen=RowScreen("fence_score", _fence_cutoffs),
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
        grades=(Grade.NOTE,),
        thresholds=(
            Threshold("weakens", 0.975, MCD_SOURCE + " (value is the quantile's probability)", Grade.WEAKENS, ">"),
            Threshold("univariate", MODIFIED_Z_LIMIT, MODIFIED_Z_SOURCE + " (to tell rows unusual only in combination)"),
            Threshold(
                "rows_per_variable",
                5,
                "the MCD assumes at least 5 rows per variable, as its authors' group documents it (LIBRA's mcdcov, the "
                "FAST-MCD of Rousseeuw & Van Driessen 1999, Technometrics 41; robustbase's detMcd); the small-sample "
                "factor is calibrated from there on",
            ),
            Threshold(
                "min_rows",
                20,
                "simulation (tests/test_outliers.py): with the small-sample correction the pooled 0.975 quantile of the "
                "squared robust distances of multivariate normal rows is within 10% of chi-square(p)'s at n/p = 5 from "
                "20 rows on (0.99 at n = 20, p = 4; 1.00 at n = 100, p = 20), but 1.14 at n = 15, p = 3",
            ),
            Threshold(
                "skewness",
                0.2,
                COMMON_PRACTICE + ": a predictor with |medcouple| above 0.2 (an exponential has 0.33) is clearly skewed, and "
                "rows beyond the chi-square cutoff are then graded note (Hubert & Van der Veeken 2008, Outlier detection for "
                "skewed data, J. Chemometrics 22(3-4), 235-246)",
            ),
            Threshold(
                "excess",
                1.5,
                COMMON_PRACTICE + ": beyond the most extreme row's test, the count of rows beyond the cutoff matters only at "
                "1.5 times the 2.5% a clean table gives (a scatter a few percent off moves the count of a 100,000-row table "
                "beyond chance; the calibration study's large normal tables)",
            ),
            Threshold(
                "dispersion",
                5.0,
                "simulation (the calibration study's normal design): the count of rows beyond the cutoff varies more than a "
                "Poisson count because all rows share one estimate; its relative spread from that estimate was 0.06 to 0.38 "
                "over n = 300 to 3,000 and p = 3 to 10 (100 tables each), about 5 / sqrt(rows the estimate rests on), and the "
                "count is tested against a negative binomial with that extra spread",
            ),
            Threshold(
                "single",
                0.005,
                "simulation (the calibration study's normal design): the most extreme row's Bonferroni chi-square bound fell "
                "below 0.025 in 2% to 9% of clean tables of 300 to 5,000 rows (the estimate's error lengthens the tail), "
                "below 0.005 in at most 2.7%",
            ),
            Threshold(
                "moment-skewness",
                0.5,
                COMMON_PRACTICE + ": |skewness| of 0.5 or more is at least moderate skew (Bulmer 1979, Principles of Statistics, "
                "p. 63, as quoted in secondary sources); catches skewed counts whose medcouple is 0",
            ),
            CHANCE,
        ),
        needs=frozenset({"rows"}),
        screen=RowScreen("robust_distance", _robust_distance_cutoffs),
    ),
]

"""Influence rules: rows whose position or deletion decides the least-squares fit.

All measures come from the shared preliminary fit (``RunContext.influence``),
in closed form and O(n p^2); no n x n matrix and no refits.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.design import INTERCEPT
from prefit.findings import Finding, Grade, RowLabel
from prefit.rule import Cutoffs, NotApplicable, Repair, RowScreen, Rule, RuleSettings, ScreenScale, Threshold, fmt
from prefit.stats.chance import (
    chance_check,
    cooks_tail,
    expected_count,
    overdispersed_count_p,
    t_tail,
)
from prefit.stats.influence import group_deletion, rows_deleted
from prefit.stats.resistant import DISTANCE_QUANTILE, RESIDUAL_LIMIT, RowClass, classify, resistant_stands_aside

from ._rowfindings import (
    CHANCE,
    beyond_chance,
    chance_details,
    group_message,
    impact_message,
    movement,
    rows_text,
    single_row_impacts,
)

LEVERAGE_SOURCE = "Hoaglin & Welsch (1978), The American Statistician 32(1); Velleman & Welsch (1981), The American Statistician 35(4)"
COOK_MEDIAN_SOURCE = (
    "Cook & Weisberg (1982), Residuals and Influence in Regression, sec. 3.4: D_i beyond the median of F(p, n-p); "
    "misleads only when such rows are more, or more extreme, than a clean table of this design gives (chance level)"
)
COOK_FOUR_SOURCE = "common practice: Cook's distance above 4/n"
BKW_SOURCE = "Belsley, Kuh & Welsch (1980), Regression Diagnostics, sec. 2.1 (size-adjusted cutoffs)"
GROUP_CAP = 200
LEVERAGE_GROUP_MULTIPLE = 3


def _ratio(top: np.ndarray, bottom: np.ndarray) -> np.ndarray:
    """``top / bottom`` with infinity where ``bottom`` is zero (the cutoff cannot be crossed)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(bottom > 0, top / np.where(bottom > 0, bottom, 1.0), np.inf)


def _usable(ctx: RunContext) -> bool:
    fit = ctx.fit
    return ctx.target_is_numeric and fit.rank > 0 and fit.df_resid > 1 and np.isfinite(fit.sigma) and fit.sigma > 0


def _listed(ctx: RunContext, rows: np.ndarray, measures: np.ndarray) -> tuple[list[RowLabel], list[float | None], int]:
    return ctx.listed_rows(ctx.design.positions[rows], measures)


# ---------------------------------------------------------------- leverage


def _leverage(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric or ctx.fit.rank == 0 or ctx.design.n <= ctx.fit.rank:
        return
    hat = ctx.row_scores.hat
    n, k = ctx.design.n, ctx.fit.rank
    relative = hat * n / k
    high_limit, moving_limit = settings.threshold("note"), settings.threshold("weakens")
    high = _crossed(high_limit, relative)
    if not high.any():
        return
    cutoff = high_limit.value * k / n
    rows = np.flatnonzero(high)
    details: dict[str, object] = {"cutoff_multiple_of_p_over_n": high_limit.value, "high_leverage_rows": int(rows.size)}
    moving = np.zeros(0, dtype=np.int64)
    if _usable(ctx):
        dof = ctx.fit.df_resid - 1
        t = np.nan_to_num(ctx.influence.studentized[rows], nan=0.0)
        bonferroni = np.minimum(1.0, rows.size * t_tail(t, dof))
        moving = rows[bonferroni < moving_limit.value]
        details["smallest_bonferroni_p"] = float(bonferroni.min())
    if moving.size:
        labels, values, total = _listed(ctx, moving, hat[moving])
        impacts = single_row_impacts(ctx, moving, hat[moving])
        details["impact"] = impacts
        yield settings.finding(
            Grade.WEAKENS,
            f"{rows_text(total)} of high leverage (h above {high_limit.value:g}p/n = {fmt(cutoff)}, largest "
            f"{fmt(float(hat[moving].max()))}) {'lies' if total == 1 else 'lie'} off the fitted line beyond chance "
            f"(externally studentized residual, Bonferroni over the {rows.size:,} high-leverage rows): such rows pull "
            f"the fit towards themselves{impact_message(impacts)}",
            rows=labels,
            row_values=values,
            row_count=total,
            value=float(hat[moving].max()),
            threshold=cutoff,
            source=high_limit.source + "; " + moving_limit.source,
            details=details,
        )
        return
    labels, values, total = _listed(ctx, rows, hat[rows])
    yield settings.finding(
        Grade.NOTE,
        f"{total:,} of {n:,} complete rows {'has' if total == 1 else 'have'} leverage above {high_limit.value:g}p/n = "
        f"{fmt(cutoff)} (largest h = {fmt(float(hat[rows].max()))}, {fmt(float(relative[rows].max()))} times the "
        "average p/n): these rows sit far from the rest in predictor space and decide the slopes more than others; none "
        "of them lies off the fitted line beyond chance, so they do no harm to this fit",
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(hat[rows].max()),
        threshold=cutoff,
        source=high_limit.source,
        details=details,
    )


_ARRAY_COMPARISONS = {">": np.greater, ">=": np.greater_equal, "<": np.less, "<=": np.less_equal}


def _crossed(threshold: Threshold, values: np.ndarray) -> np.ndarray:
    """Per row, whether the value is on the bad side of the threshold (NaN never is)."""
    return _ARRAY_COMPARISONS[threshold.compare](values, threshold.value) & np.isfinite(values)


# ---------------------------------------------------------------- Cook's distance


def _cooks(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    if not _usable(ctx):
        return
    fit, infl = ctx.fit, ctx.influence
    n, k = ctx.design.n, fit.rank
    cooks = infl.cooks
    median_limit = settings.threshold("misleads")
    four_limit = settings.threshold("weakens")
    f_median = float(scipy.stats.f.ppf(median_limit.value, k, fit.df_resid))
    four_cutoff = four_limit.value / n
    finite = np.nan_to_num(cooks, nan=-np.inf)
    crossing = finite >= f_median
    strong = crossing.copy()
    strong_check = None
    if crossing.any():
        strongest = int(np.argmax(finite))
        strong_expected = expected_count(infl.hat, lambda h: cooks_tail(np.full(h.shape, f_median), h, k, fit.df_resid))
        strong_check = chance_check(crossing, strong_expected, cooks_tail(cooks[[strongest]], infl.hat[[strongest]], k, fit.df_resid))
        strong &= beyond_chance(settings, strong_check)
    screened = _crossed(four_limit, finite * n)
    expected = expected_count(infl.hat, lambda h: cooks_tail(np.full(h.shape, four_cutoff), h, k, fit.df_resid))
    with np.errstate(divide="ignore", invalid="ignore"):
        residual_share = np.where(screened, finite * (1.0 - infl.hat) / infl.hat, -np.inf)
    extreme = int(np.argmax(residual_share))
    check = chance_check(screened, expected, cooks_tail(cooks[[extreme]], infl.hat[[extreme]], k, fit.df_resid))
    group_rows = _group(ctx, screened, cooks)
    group = group_deletion(fit, ctx.design.X[group_rows], ctx.row_scores.residual[group_rows]) if group_rows.size >= 2 else None
    masked = group is not None and not crossing.any() and group.cooks >= f_median and _group_off_line(ctx, settings)
    if not crossing.any() and not masked and not beyond_chance(settings, check):
        return
    details: dict[str, object] = {
        "f_median": f_median,
        "four_over_n": four_cutoff,
        "rows_beyond_f_median": int(crossing.sum()),
        **chance_details(check),
    }
    if strong_check is not None:
        details["f_median_chance"] = chance_details(strong_check)
    group_text = ""
    if group is not None:
        moved = movement(ctx, group.shift, group.se_after)
        details["group_deletion"] = {"rows": group.rows, "cooks_distance": group.cooks, "rss_drop": group.rss_drop, **moved.as_details()}
        group_text = f"; {group_message(ctx, group)}"
    if strong.any():
        rows = np.flatnonzero(strong)
        impacts = single_row_impacts(ctx, rows, cooks[rows])
        details["impact"] = impacts
        labels, values, total = _listed(ctx, rows, cooks[rows])
        message = (
            f"{rows_text(total)} {'has' if total == 1 else 'have'} Cook's distance beyond the median of F({k}, {fit.df_resid}) = {fmt(f_median)} "
            f"(largest D = {fmt(float(cooks[rows].max()))}): each alone moves the coefficients to the edge of their "
            f"50% confidence region{impact_message(impacts)}{group_text}"
        )
        grade, limit, source = Grade.MISLEADS, f_median, median_limit.source
    elif crossing.any() and strong_check is not None:
        rows = np.flatnonzero(crossing)
        labels, values, total = _listed(ctx, rows, cooks[rows])
        message = (
            f"{rows_text(total)} {'has' if total == 1 else 'have'} Cook's distance beyond the median of F({k}, {fit.df_resid}) = {fmt(f_median)} "
            f"(largest D = {fmt(float(cooks[rows].max()))}), but a clean table of this size and design shows as much by chance "
            f"({strong_check.describe()}){group_text}"
        )
        grade, limit, source = Grade.WEAKENS, f_median, median_limit.source
    elif masked:
        rows = group_rows
        labels, values, total = _listed(ctx, rows, cooks[rows])
        message = (
            f"no row alone has Cook's distance beyond the median of F({k}, {fit.df_resid}) = {fmt(f_median)}, but "
            f"{total:,} high-leverage or high-influence rows together decide the fit (masking: each hides the others)"
            f"{group_text}"
        )
        grade, limit, source = Grade.MISLEADS, f_median, median_limit.source + "; applied to the group (sec. 3.6)"
    else:
        rows = np.flatnonzero(screened)
        labels, values, total = _listed(ctx, rows, cooks[rows])
        message = (
            f"{rows_text(total)} {'has' if total == 1 else 'have'} Cook's distance above 4/n = {fmt(four_cutoff)} (largest D = {fmt(float(cooks[rows].max()))}; "
            f"{check.describe()}){group_text}"
        )
        grade, limit, source = Grade.WEAKENS, four_cutoff, four_limit.source
    yield settings.finding(
        grade,
        message,
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(group.cooks) if masked and group is not None else float(np.nanmax(cooks[rows])),
        threshold=limit,
        source=source,
        details=details,
    )


def _group_off_line(ctx: RunContext, settings: RuleSettings) -> bool:
    """Whether the high-leverage rows, deleted together, lower the residual sum of squares beyond chance.

    The rows are chosen by their leverage alone, so under the model the drop
    is the mean-shift outlier test of the group: ``(drop / m) / ((RSS - drop)
    / (n - k - m))`` is F(m, n - k - m). Deleting the most extreme rows of a
    clean table always moves its fit; only a group that also lies off the
    line is masking a problem.

    References
    ----------
    Cook & Weisberg (1982), Residuals and Influence in Regression, sec. 2.2.4 (outlier test for a group of rows).
    """
    import scipy.stats

    fit = ctx.fit
    n, k = ctx.design.n, fit.rank
    hat = ctx.row_scores.hat
    high = np.flatnonzero(hat > LEVERAGE_GROUP_MULTIPLE * k / n)
    high = high[np.lexsort((high, -hat[high]))][:GROUP_CAP]
    remaining = n - k - high.size
    if high.size < 2 or remaining <= 0:
        return False
    group = group_deletion(fit, ctx.design.X[high], ctx.row_scores.residual[high])
    left = fit.rss - group.rss_drop
    if not (np.isfinite(group.rss_drop) and left > 0):
        return False
    statistic = (group.rss_drop / high.size) / (left / remaining)
    return bool(scipy.stats.f.sf(statistic, high.size, remaining) < settings.limit("chance"))


def _group(ctx: RunContext, screened: np.ndarray, cooks: np.ndarray) -> np.ndarray:
    """Rows to delete together: high-leverage rows (beyond the leverage rule's 3p/n) first, then rows by Cook's D.

    At most ``GROUP_CAP`` rows, so that only a small block of the hat matrix is formed.
    """
    n, k = ctx.design.n, ctx.fit.rank
    hat = ctx.row_scores.hat
    high = np.flatnonzero(hat > LEVERAGE_GROUP_MULTIPLE * k / n)
    high = high[np.lexsort((high, -hat[high]))][:GROUP_CAP]
    influential = np.setdiff1d(np.flatnonzero(screened), high)
    influential = influential[np.lexsort((influential, -cooks[influential]))][: GROUP_CAP - high.size]
    return np.concatenate([high, influential]).astype(np.int64)


# ---------------------------------------------------------------- DFFITS


def _dffits(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _usable(ctx):
        return
    fit, infl = ctx.fit, ctx.influence
    n, k = ctx.design.n, fit.rank
    limit = settings.threshold("weakens")
    cutoff = limit.value * np.sqrt(k / n)
    size = np.abs(np.nan_to_num(infl.dffits, nan=0.0))
    crossed = size > cutoff
    if not crossed.any():
        return
    dof = fit.df_resid - 1
    expected = expected_count(infl.hat, lambda h: t_tail(_ratio(cutoff * np.sqrt(1.0 - h), np.sqrt(h)), dof))
    check = chance_check(crossed, expected, t_tail(np.nanmax(np.abs(infl.studentized[crossed])), dof))
    if not beyond_chance(settings, check):
        return
    rows = np.flatnonzero(crossed)
    labels, values, total = _listed(ctx, rows, infl.dffits[rows])
    yield settings.finding(
        Grade.WEAKENS,
        f"{rows_text(total)} {'has' if total == 1 else 'have'} |DFFITS| above 2*sqrt(p/n) = {fmt(cutoff)} (largest {fmt(float(size[rows].max()))}; "
        f"{check.describe()}): deleting any one of them shifts its own fitted value by more than the cutoff in standard errors",
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(size[rows].max()),
        threshold=cutoff,
        source=limit.source,
        details=chance_details(check),
    )


# ---------------------------------------------------------------- DFBETAS


def _dfbetas(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _usable(ctx):
        return
    fit, infl, design = ctx.fit, ctx.influence, ctx.design
    n = design.n
    strong_limit, weak_limit = settings.threshold("misleads"), settings.threshold("weakens")
    weak_cutoff = weak_limit.value / np.sqrt(n)
    largest = np.nan_to_num(infl.dfbetas_largest, nan=0.0) if design.p else np.zeros(n)
    crossing = _crossed(strong_limit, largest)
    screened = largest > weak_cutoff
    dof = fit.df_resid - 1
    strong_check = None
    if crossing.any():
        strong_expected = expected_count(
            infl.dfbetas_reach, lambda reach: t_tail(_ratio(np.full(reach.shape, strong_limit.value), reach), dof)
        )
        strong_check = chance_check(crossing, strong_expected, t_tail(np.nanmax(np.abs(infl.studentized[crossing])), dof))
    strong = crossing if strong_check is not None and beyond_chance(settings, strong_check) else np.zeros_like(crossing)
    expected = expected_count(infl.dfbetas_reach, lambda reach: t_tail(_ratio(np.full(reach.shape, weak_cutoff), reach), dof))
    check = chance_check(screened, expected, t_tail(np.nanmax(np.abs(infl.studentized[screened]), initial=0.0), dof))
    if strong.any():
        grade, cutoff, limit, selected = Grade.MISLEADS, strong_limit.value, strong_limit, strong
    elif crossing.any() and strong_check is not None:
        grade, cutoff, limit, selected = Grade.WEAKENS, strong_limit.value, strong_limit, crossing
        check = strong_check
    elif beyond_chance(settings, check):
        grade, cutoff, limit, selected = Grade.WEAKENS, weak_cutoff, weak_limit, screened
    else:
        return
    rows = np.flatnonzero(selected)
    names, sources = design.column_names, design.column_sources
    chosen = infl.dfbetas_of(rows)
    size = np.nan_to_num(np.abs(chosen), nan=0.0)
    moved_columns = [j for j in range(design.p) if (size[:, j] > cutoff).any()]
    coefficient_names = [names[j] for j in moved_columns]
    columns = list(dict.fromkeys(sources[j] for j in moved_columns if sources[j] != INTERCEPT))
    signed = chosen[np.arange(rows.size), np.argmax(size, axis=1)]
    labels, values, total = _listed(ctx, rows, signed)
    details = {"coefficients": coefficient_names, "cutoff": cutoff, **chance_details(check)}
    counts = {names[j]: int((size[:, j] > cutoff).sum()) for j in moved_columns}
    moved_text = ", ".join(f"{name} ({rows_text(count)})" for name, count in counts.items())
    if cutoff == strong_limit.value:
        impacts = single_row_impacts(ctx, rows, largest[rows])
        details["impact"] = impacts
    if grade is Grade.MISLEADS:
        message = (
            f"{rows_text(total)} {'moves' if total == 1 else 'each move'} a coefficient by more than {fmt(cutoff)} standard error when deleted "
            f"(largest |DFBETAS| = {fmt(float(largest[rows].max()))}); coefficients moved: {moved_text}{impact_message(impacts)}"
        )
    elif cutoff == strong_limit.value:
        message = (
            f"{rows_text(total)} {'moves' if total == 1 else 'each move'} a coefficient by more than {fmt(cutoff)} standard error when deleted "
            f"(largest |DFBETAS| = {fmt(float(largest[rows].max()))}), but a clean table of this size and design shows as much by chance "
            f"({check.describe()}); coefficients moved: {moved_text}{impact_message(impacts)}"
        )
    else:
        message = (
            f"{rows_text(total)} {'has' if total == 1 else 'have'} |DFBETAS| above 2/sqrt(n) = {fmt(cutoff)} (largest {fmt(float(largest[rows].max()))}; "
            f"{check.describe()}); coefficients moved: {moved_text}"
        )
    yield settings.finding(
        grade,
        message,
        columns=columns,
        rows=labels,
        row_values=values,
        row_count=total,
        value=float(largest[rows].max()),
        threshold=cutoff,
        source=limit.source,
        details=details,
    )


# ---------------------------------------------------------------- robust distortion

ROBUST_SOURCE = (
    "Rousseeuw & van Zomeren (1990), JASA 85: |standardized residual| > 2.5 from a high-breakdown fit, robust "
    "squared distance beyond the chi-square 0.975 quantile"
)
DISTORTION_SOURCE = (
    "Belsley, Kuh & Welsch (1980), sec. 2.1: a coefficient moved by a whole standard error is a material change "
    "(the DFBETAS > 1 limit), applied to deleting the rows together (Cook & Weisberg 1982, sec. 3.6)"
)


def robust_classes(ctx: RunContext, residual_limit: float = RESIDUAL_LIMIT) -> tuple[np.ndarray, float] | None:
    """Each complete row's :class:`RowClass` under the MM fit and the MCD distances, with the squared-distance cutoff; None without both."""
    resistant = ctx.resistant
    robust = ctx.robust if resistant is not None else None
    if resistant is None or robust is None:
        return None
    cutoff = robust.cutoff(DISTANCE_QUANTILE)
    return classify(resistant.residual, robust.squared, cutoff, residual_limit), cutoff


def _hidden_distorting(ctx: RunContext, classes: np.ndarray, least_squares_limit: float) -> np.ndarray:
    """Per complete row: a vertical outlier or bad leverage point whose least-squares studentized residual stays within the limit."""
    studentized = np.abs(np.nan_to_num(ctx.influence.studentized, nan=0.0))
    distorting = (classes == RowClass.VERTICAL) | (classes == RowClass.BAD_LEVERAGE)
    return distorting & (studentized <= least_squares_limit)


def _distorting_rows_removed(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the target of the finding's rows set missing: the fit without the rows that distort it."""

    classified = robust_classes(ctx, float(finding.details["residual_limit"]))
    if classified is None:
        return None
    hidden = _hidden_distorting(ctx, classified[0], float(finding.details["least_squares_limit"]))
    target = ctx.roles.target
    values = np.array(ctx.values(target), dtype=float)
    values[ctx.design.positions[hidden]] = np.nan
    table = ctx.with_target(values)
    return Repair(f"{int(hidden.sum()):,} distorting rows left out", rows=int(hidden.sum()), table=table)


def _beyond_chance_moves(ctx: RunContext, rows: np.ndarray, shift: np.ndarray, level: float) -> np.ndarray:
    """``shift`` where a coefficient moves more than deleting these rows moves it when their residuals are noise; NaN elsewhere.

    Deleting m rows chosen for their large residuals moves coefficient j by
    about ``sum_i c_ij e_i`` (``c_i = (X'X)^-1 x_i``); with independent
    errors of either sign that sum has standard deviation
    ``sqrt(sum_i c_ij^2 e_i^2)``. Leaving out 1% of a clean table's rows moves
    some of ten coefficients by about one standard error this way, so only a
    move beyond the Bonferroni normal limit over the estimable coefficients
    (at the rule's chance level) is the rows' own pull; a masked group pulls
    every member the same way and moves far beyond it.
    """
    import scipy.stats

    fit = ctx.fit
    X, y = fit.X, fit.y
    if X is None or y is None or rows.size == 0:
        return shift
    residual = y[rows] - X[rows] @ np.nan_to_num(fit.coef)
    reach = X[rows] @ np.nan_to_num(fit.cov_unscaled)
    spread = np.sqrt((residual**2) @ reach**2)
    limit = float(scipy.stats.norm.isf(level / (2.0 * max(fit.rank, 1))))
    return np.where(np.abs(shift) > limit * spread, shift, np.nan)


def _robust_distortion(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    if not _usable(ctx):
        return
    aside = resistant_stands_aside(ctx.design.n, ctx.fit.rank)
    if aside is not None:
        raise NotApplicable(aside)
    residual_limit = settings.limit("residual")
    classified = robust_classes(ctx, residual_limit)
    resistant = ctx.resistant
    if classified is None or resistant is None:
        return
    classes, cutoff = classified
    studentized = np.abs(np.nan_to_num(ctx.influence.studentized, nan=0.0))
    hidden = _hidden_distorting(ctx, classes, settings.limit("least-squares"))
    if not hidden.any():
        return
    n = ctx.design.n
    size = np.abs(resistant.residual)
    tail = 2.0 * scipy.stats.norm.sf(residual_limit)
    expected = n * tail
    check = chance_check(hidden, expected, 2.0 * scipy.stats.norm.sf(np.array([size[hidden].max()])))
    # Every residual is divided by one robust scale from resistant.sampled rows: its error moves all crossings together.
    dispersion = settings.limit("dispersion") / np.sqrt(resistant.sampled)
    check = replace(check, count_p=overdispersed_count_p(check.crossed, expected, dispersion))
    material = check.crossed >= settings.limit("excess") * expected
    if not (check.single_p < settings.limit("chance") / 2.0 or (material and check.count_p < settings.limit("chance") / 2.0)):
        return
    rows = np.flatnonzero(hidden)
    group = rows_deleted(ctx.fit, hidden)
    moved = movement(ctx, _beyond_chance_moves(ctx, rows, group.shift, settings.limit("chance")), group.se_after)
    largest = moved.largest()
    shift = abs(largest[1]) if largest is not None else (float("inf") if not np.isfinite(group.cooks) else 0.0)
    graded = settings.grade_of(shift)
    if graded is None:
        return
    grade, limit = graded
    bad = int(np.count_nonzero(classes[rows] == RowClass.BAD_LEVERAGE))
    good = int(np.count_nonzero(classes == RowClass.GOOD_LEVERAGE))
    labels, values, total = _listed(ctx, rows, resistant.residual[rows])
    sampled = "" if resistant.sampled == n else f"; the robust fit was estimated on a fixed sample of {resistant.sampled:,} rows"
    yield settings.finding(
        grade,
        f"{rows_text(total)} ({bad:,} bad leverage point{'' if bad == 1 else 's'}, {total - bad:,} vertical outlier"
        f"{'' if total - bad == 1 else 's'}) lie beyond {residual_limit:g} robust SDs of a high-breakdown (MM) fit, yet "
        f"the least-squares residuals hide them (|studentized residual| at most {fmt(float(studentized[rows].max()))}): "
        f"they pull the least-squares line onto themselves; {group_message(ctx, group)}; {good:,} good leverage "
        f"point{'' if good == 1 else 's'} lie far out in the predictors but on the robust line ({check.describe()}{sampled})",
        rows=labels,
        row_values=values,
        row_count=total,
        value=shift,
        threshold=limit,
        details={
            "bad_leverage": bad,
            "vertical_outliers": total - bad,
            "good_leverage": good,
            "robust_scale": resistant.scale,
            "distance_cutoff": cutoff,
            "estimated_on_rows": resistant.sampled,
            "residual_limit": residual_limit,
            "least_squares_limit": settings.limit("least-squares"),
            "group_deletion": {"rows": group.rows, "cooks_distance": group.cooks, **moved.as_details()},
            **chance_details(check),
        },
    )


def _leverage_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts hat values beyond 2p/n and beyond the note limit (3p/n by default)."""
    n, k = scale.rows, scale.rank
    note = settings.limit("note")
    return (("2p/n", 2 * k / n), (f"{note:g}p/n", note * k / n))


def _cooks_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts Cook's distances beyond the weakens limit (4/n by default) and the misleads quantile of F(p, n-p)."""
    import scipy.stats

    n, k = scale.rows, scale.rank
    weak, quantile = settings.limit("weakens"), settings.limit("misleads")
    name = "median F(p, n-p)" if quantile == 0.5 else f"F(p, n-p) quantile {quantile:g}"
    return ((f"{weak:g}/n", weak / n), (name, float(scipy.stats.f.ppf(quantile, k, n - k)) if n > k else float("inf")))


def _dffits_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts |DFFITS| beyond the weakens limit (2 sqrt(p/n) by default)."""
    weak = settings.limit("weakens")
    return ((f"{weak:g} sqrt(p/n)", float(weak * np.sqrt(scale.rank / scale.rows))),)


def _dfbetas_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts the largest |DFBETAS| of each row beyond the weakens limit (2/sqrt(n) by default) and the misleads limit (1)."""
    weak, strong = settings.limit("weakens"), settings.limit("misleads")
    return ((f"{weak:g}/sqrt(n)", float(weak / np.sqrt(scale.rows))), (f"{strong:g}", strong))


def _robust_residual_cutoffs(scale: ScreenScale, settings: RuleSettings) -> Cutoffs:
    """Pass 2 counts |standardized robust residuals| beyond the residual limit."""
    limit = settings.limit("residual")
    return ((f"{limit:g}", limit),)


RULES = [
    Rule(
        id="influence.leverage",
        summary="Rows far from the others in predictor space (hat values h_ii above 3p/n), and whether they also lie off the line.",
        why="A row's leverage h_ii is the weight its own target value has on its fitted value. High-leverage rows "
        "decide the slopes almost alone: if such a row is also off the line (a wrong reading, a different kind of "
        "site) it drags the whole fit; if it lies on the line it only makes the slopes look more precise than the "
        "bulk of the data can support.",
        remedy="check the listed rows' predictor values for entry errors; if they are genuine, confirm that the model "
        "should cover that range, or fit with and without them and compare",
        check=_leverage,
        thresholds=(
            Threshold("note", 3, LEVERAGE_SOURCE + ": h_ii > 3p/n (a description of the design: no chance model)", Grade.NOTE, ">"),
            Threshold(
                "weakens",
                0.01,
                "a high-leverage row graded weakens only when it also lies off the line: Bonferroni-adjusted outlier test "
                "over the high-leverage rows (Cook & Weisberg 1982, sec. 2.2.3); level 0.01 from prefit's calibration "
                "study: at 0.05 the test fires on 5% of clean tables with high-leverage rows by construction (6.7% measured), "
                "above the 5% a rule may fire",
                Grade.WEAKENS,
                "<",
            ),
        ),
        needs=frozenset({"rows", "fit"}),
        screen=RowScreen("leverage", _leverage_cutoffs),
    ),
    Rule(
        id="influence.cooks-distance",
        summary="Rows whose deletion moves the whole coefficient vector (Cook's distance), alone or as a group.",
        why="Cook's distance measures how far all coefficients move, jointly, when one row is left out. A row beyond "
        "the median of F(p, n-p) alone moves the estimates as far as the edge of their 50% confidence region: the "
        "fit describes that row more than the table. Several such rows together can hide each other (masking): "
        "deleting one changes little because the others hold the fit in place.",
        remedy="inspect the listed rows for entry or unit errors and correct them; if they are genuine, report the fit "
        "with and without them, or use a robust regression",
        check=_cooks,
        thresholds=(
            Threshold("misleads", 0.5, COOK_MEDIAN_SOURCE, Grade.MISLEADS, ">="),
            Threshold("weakens", 4, COOK_FOUR_SOURCE + " (value is the numerator of 4/n)", Grade.WEAKENS, ">"),
            CHANCE,
        ),
        needs=frozenset({"rows", "fit"}),
        screen=RowScreen("cooks_distance", _cooks_cutoffs),
    ),
    Rule(
        id="influence.dffits",
        summary="Rows whose deletion shifts their own fitted value by many standard errors (DFFITS).",
        why="DFFITS is the change in a row's fitted value when the row is left out, in standard errors. Large values "
        "mean the fit bends towards the row: predictions near it rest on that one row.",
        remedy="inspect the listed rows; correct errors, or check the fit with and without them",
        check=_dffits,
        thresholds=(Threshold("weakens", 2, BKW_SOURCE + ": |DFFITS| > 2*sqrt(p/n)", Grade.WEAKENS, ">"), CHANCE),
        needs=frozenset({"rows", "fit"}),
        screen=RowScreen("dffits", _dffits_cutoffs),
    ),
    Rule(
        id="influence.dfbetas",
        summary="Rows that move individual coefficients by a large share of their standard error (DFBETAS).",
        why="DFBETAS is the change in one coefficient when a row is left out, in standard errors. A row that moves a "
        "slope by a whole standard error changes what the model says about that predictor: its size, its "
        "significance, sometimes its sign.",
        remedy="inspect the listed rows and the named coefficients; correct errors, or report the fit with and "
        "without the rows",
        check=_dfbetas,
        thresholds=(
            Threshold(
                "misleads",
                1,
                BKW_SOURCE + ": |DFBETAS| > 1; misleads only when such rows are more, or more extreme, than a clean table "
                "of this design gives (chance level), weakens otherwise",
                Grade.MISLEADS,
                ">",
            ),
            Threshold("weakens", 2, BKW_SOURCE + ": |DFBETAS| > 2/sqrt(n) (value is the numerator)", Grade.WEAKENS, ">"),
            CHANCE,
        ),
        needs=frozenset({"rows", "fit"}),
        screen=RowScreen("dfbetas", _dfbetas_cutoffs),
    ),
    Rule(
        id="influence.robust-distortion",
        summary="Rows a high-breakdown fit calls bad leverage points or vertical outliers while the least-squares residuals hide them.",
        why="A group of wrong rows far out in the predictors pulls the least-squares line onto itself: their own "
        "residuals look ordinary and the good rows look odd instead (masking and swamping), so every diagnostic "
        "computed from the least-squares fit points at the wrong rows. A fit that half the rows cannot break shows "
        "which rows disagree with the bulk, and the robust distance which of them sit far out in the predictors.",
        remedy="check the listed rows at the source; correct or remove wrong rows, and compare the least-squares fit "
        "with a robust (MM) fit before trusting either",
        check=_robust_distortion,
        heavy=True,
        repair=_distorting_rows_removed,
        thresholds=(
            Threshold("misleads", 2.0, "common practice: two standard errors, twice the weakens limit: the coefficient leaves its own 95% interval", Grade.MISLEADS, ">="),
            Threshold("weakens", 1.0, DISTORTION_SOURCE, Grade.WEAKENS, ">="),
            Threshold("residual", RESIDUAL_LIMIT, ROBUST_SOURCE),
            Threshold("least-squares", 3.0, "common practice: |externally studentized residual| > 3, the limit outliers.studentized-residual flags at"),
            Threshold(
                "excess",
                1.5,
                "common practice: beyond the most extreme row's test, the count of rows beyond the residual limit matters "
                "only at 1.5 times what a clean table gives, as for outliers.multivariate (the calibration study's large "
                "mixed-design tables crossed 1.4 to 1.9 times the expected count)",
            ),
            Threshold(
                "dispersion",
                7.0,
                "the count beyond 2.5 robust SDs moves 7 times as fast as the robust scale (d log P(|z| > 2.5) / d log sigma "
                "= 2.5 phi(2.5) / P(z > 2.5) = 7.0), and a high-breakdown scale from m rows is off by about 1 / sqrt(m) "
                "(from memory), so the count is tested against a negative binomial with relative spread 7 / sqrt(m)",
            ),
            CHANCE,
        ),
        needs=frozenset({"rows", "fit"}),
        screen=RowScreen("robust_residual", _robust_residual_cutoffs),
    ),
]

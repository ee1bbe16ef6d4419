"""Grouped rows (one row per site and day, per customer and month): what the groups do to a least-squares fit.

A table of site-days holds fewer independent pieces of information than
rows: site facts repeat on every day of a site, and days of one site share
whatever the model leaves out about that site. These rules read the
per-group factors of the design (``RunContext.group_factors``, merged over
row batches by the stream and Dask engines) and the preliminary fit. They run
when rows are grouped: ``--group COL``, or a repeating ``--id`` column.
"""

from __future__ import annotations

from typing import Any, Iterator

import numpy as np

from prefit.context import RunContext
from prefit.design import INTERCEPT
from prefit.findings import Finding, Grade
from prefit.rule import COMMON_PRACTICE, NotApplicable, Repair, Rule, RuleSettings, Threshold, capped_names, fmt
from prefit.stats.chance import chance_check_counts
from prefit.stats.grouping import (
    GroupFactors,
    IntraclassCorrelation,
    cr1_covariance,
    group_deletions,
    one_way_icc,
    two_level_slopes,
    within_group_residual,
)
from prefit.stats.robust import MODIFIED_Z_LIMIT, median_and_mad, modified_z, robust_distances

from ._rowfindings import CHANCE, beyond_chance, chance_details, coefficient_phrase
from .assumptions import worst_se_ratio

ALPHA = Threshold("alpha", 0.01, "common practice: 1% significance level, as each grouping check is one of several tests")
PER_PARAMETER_SOURCE = (
    "common practice: at least 10 observations per estimated parameter (the lower end of 10 to 20: the one-in-ten "
    "rule, one in twenty where shrinkage matters: Harrell, Lee & Mark 1996, Stat. Med. 15; Peduzzi et al. 1996, "
    "J. Clin. Epidemiol. 49; Harrell 2015, Regression Modeling Strategies, 2nd ed., sec. 4.4, pp. 72-73, about 15 per "
    "parameter of the limiting sample size, as quoted by secondary sources), with groups as the observations of a "
    "group-level predictor"
)
KISH = "Kish (1965), Survey Sampling, sec. 5.4: design effect 1 + (m - 1) ICC"
MCD_ROWS_SOURCE = (
    "the MCD assumes at least 5 rows per variable, as its authors' group documents it (LIBRA's mcdcov, the FAST-MCD of "
    "Rousseeuw & Van Driessen 1999, Technometrics 41; robustbase's detMcd)"
)
CAMERON_MILLER = "Cameron & Miller (2015), A practitioner's guide to cluster-robust inference, J. Human Resources 50(2), sec. VI"
MUNDLAK = "Mundlak (1978), Econometrica 46(1): the within and between slopes differ when group effects correlate with the predictor"
NO_GROUPS = "rows are not grouped: name the group column with --group (or give a repeating --id)"


def _grouped(ctx: RunContext) -> GroupFactors:
    factors = ctx.group_factors
    if factors is None:
        raise NotApplicable(NO_GROUPS)
    return factors


def _fit_ready(ctx: RunContext) -> bool:
    if not ctx.target_is_numeric:
        return False
    fit = ctx.fit
    return fit.rank >= 1 and fit.df_resid >= 3 and fit.rss > 0


def _group_name(ctx: RunContext) -> str:
    return str(ctx.roles.group)


# ---------------------------------------------------------------- between-group predictors


def _between_predictors(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    factors = _grouped(ctx)
    between = ctx.between_group_columns
    if not between or not ctx.target_is_numeric:
        return
    design = ctx.design
    parameters = {name: design.term(name).df for name in between}
    counted = sum(parameters.values())
    if counted == 0:
        return
    groups = factors.count
    ratio = groups / counted
    graded = settings.grade_of(ratio)
    if graded is None:
        return
    grade, limit = graded
    group = _group_name(ctx)
    listing = ", ".join(f"{name} {df}" for name, df in parameters.items())
    yield settings.finding(
        grade,
        f"{len(between)} predictor{'s are' if len(between) > 1 else ' is'} constant within each {group} ({', '.join(between)}): "
        f"their effective sample size is the {groups:,} groups, not the {design.n:,} rows; {groups:,} groups for {counted} "
        f"group-level parameters ({listing}) is {fmt(ratio)} per parameter, below {limit.value:g}",
        columns=list(between),
        value=ratio,
        threshold=limit,
        remedy=f"collect more {group} groups, or estimate fewer group-level parameters (drop or merge {', '.join(between)}); "
        f"more rows per {group} do not help these slopes",
        details={"groups": groups, "rows": design.n, "group_level_parameters": parameters, "groups_per_parameter": ratio},
    )


# ---------------------------------------------------------------- residual correlation


def residual_icc(ctx: RunContext) -> IntraclassCorrelation:
    """The intraclass correlation of the preliminary fit's residuals within groups (one-way ANOVA)."""
    factors = _grouped(ctx)
    means, within = factors.residual_sums(ctx.fit.coef)
    return one_way_icc(factors.counts, means, within)


def cluster_se_ratio(ctx: RunContext) -> np.ndarray:
    """Per design column, the cluster-robust (CR1) standard error over the usual one (NaN where undefined)."""
    factors = _grouped(ctx)
    fit = ctx.fit
    robust = np.sqrt(np.diag(cr1_covariance(fit, factors.scores(fit.coef))))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.asarray(robust / fit.se)


def _correlated(ctx: RunContext, settings: RuleSettings) -> IntraclassCorrelation | None:
    """The residual ICC when it is positive and significant at the rule's ``alpha`` (one-way ANOVA F test), else None."""
    factors = _grouped(ctx)
    if not _fit_ready(ctx) or factors.count < 2:
        return None
    icc = residual_icc(ctx)
    if not (np.isfinite(icc.p_value) and icc.p_value < settings.limit("alpha") and icc.icc > 0):
        return None
    return icc


def _group_effects_allowed_for(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the target replaced, on the complete rows, by the fitted values plus the residuals of the fit with one intercept per group.

    Those residuals are orthogonal to the design, so least squares of the
    repaired target on the unchanged design has exactly them as residuals
    (Frisch-Waugh-Lovell): the row diagnostics re-run on it see the fit with
    the groups' shared offsets allowed for. Rows that stop being outlying or
    influential were whole groups standing apart, not rows gone wrong.
    """

    rows = ctx.group_rows
    if rows is None or not _fit_ready(ctx):
        return None
    design = ctx.design
    residual = ctx.row_scores.residual
    within = within_group_residual(design.X, design.y, rows)
    target = ctx.roles.target
    repaired = np.array(ctx.values(target), dtype=float)
    repaired[design.positions] = design.y - residual + within
    table = ctx.with_target(repaired)
    return Repair(f"one intercept per {_group_name(ctx)}", rows=design.n, table=table)


def _influential_groups_left_out(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the target of the named groups' rows set missing: the fit without the groups that decide it."""

    rows = ctx.group_rows
    if rows is None or not finding.rows:
        return None
    named = set(finding.rows)
    chosen = np.array([label in named for label in rows.labels], dtype=bool)
    left_out = chosen[rows.codes]
    target = ctx.roles.target
    values = np.array(ctx.values(target), dtype=float)
    values[ctx.design.positions[left_out]] = np.nan
    table = ctx.with_target(values)
    return Repair(f"{len(named):,} {_group_name(ctx)} groups left out", rows=int(left_out.sum()), table=table)


def _residual_correlation(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    icc = _correlated(ctx, settings)
    if icc is None:
        return
    design = ctx.design
    ratio = cluster_se_ratio(ctx)
    compared = worst_se_ratio(design.column_names, ratio)
    if compared is None:
        return
    candidates, worst, change = compared
    graded = settings.grade_of(change)
    if graded is None:
        return
    grade, limit = graded
    group, name = _group_name(ctx), design.column_names[worst]
    sources = dict(zip(design.column_names, design.column_sources))
    direction = "too small" if ratio[worst] > 1 else "too large"
    yield settings.finding(
        grade,
        f"residuals of one {group} move together: intraclass correlation {fmt(icc.icc, 2)} (one-way ANOVA, F = {fmt(icc.f_statistic)}, "
        f"{_p(icc.p_value)}); design effect 1 + ({icc.mean_size:.4g} - 1) x {fmt(icc.icc, 2)} = {fmt(icc.design_effect)}, so "
        f"{design.n:,} rows carry about as much information as {fmt(icc.effective_rows)} independent rows; the usual standard error "
        f"of {coefficient_phrase(name, sources[name])} is {direction}: cluster-robust (CR1, by {group}) gives {fmt(float(ratio[worst]))} times it"
        f"{_next_ratios(design.column_names, ratio, candidates, worst)}",
        columns=[sources[name]],
        value=change,
        threshold=limit,
        remedy=f"report cluster-robust standard errors by {group} (CR1; with few groups a wild cluster bootstrap), or fit a mixed model "
        f"with a random intercept per {group}; better still, measure the {group} fact the shared residual stands for and add it",
        details={
            "icc": icc.icc,
            "f_statistic": icc.f_statistic,
            "p_value": icc.p_value,
            "groups": icc.groups,
            "mean_group_size": icc.mean_size,
            "design_effect": icc.design_effect,
            "effective_rows": icc.effective_rows,
            "se_ratio_cr1_to_usual": {design.column_names[j]: float(ratio[j]) for j in candidates},
            "alpha": settings.limit("alpha"),
        },
    )


def _next_ratios(names: tuple[str, ...], ratio: np.ndarray, candidates: list[int], worst: int, shown: int = 3) -> str:
    """``; then floor_area_m2 5.62, pallets_stored 5.36`` for the next coefficients furthest from the usual standard error."""
    others = sorted((j for j in candidates if j != worst), key=lambda j: (-max(ratio[j], 1 / ratio[j]), j))[:shown]
    return "; then " + ", ".join(f"{names[j]} {fmt(float(ratio[j]))}" for j in others) if others else ""


def _p(value: float) -> str:
    return f"p = {value:.2g}" if value >= 1e-4 else "p < 0.0001"


# ---------------------------------------------------------------- few groups


def _few_groups(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    factors = _grouped(ctx)
    icc = _correlated(ctx, settings)
    if icc is None:
        return
    graded = settings.grade_of(float(factors.count))
    if graded is None:
        return
    grade, limit = graded
    group = _group_name(ctx)
    between = ctx.between_group_columns
    fewer = f"fewer {group}-level predictors (now {', '.join(between)})" if between else f"fewer {group}-level predictors"
    yield settings.finding(
        grade,
        f"only {factors.count:,} {group} groups, and their residuals are correlated: cluster-robust standard errors lean on the "
        f"groups as their observations and are unreliable below roughly 40 to 50 groups (too small, tests reject too often)",
        columns=[group],
        value=float(factors.count),
        threshold=limit,
        remedy=f"use a wild cluster bootstrap (Webb or Rademacher weights) by {group} for tests and intervals; estimate {fewer}; "
        f"or fit a mixed model with a random intercept per {group}",
        details={"groups": factors.count, "icc": icc.icc},
    )


# ---------------------------------------------------------------- within and between slopes


def _within_between(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    factors = _grouped(ctx)
    if not _fit_ready(ctx):
        return
    design = ctx.design
    names = design.column_names
    intercept = names.index(INTERCEPT) if INTERCEPT in names else None
    slopes = two_level_slopes(factors, intercept)
    numeric = set(ctx.numeric_predictors)
    tested = [
        int(j) for j in np.flatnonzero(slopes.both_ways)
        if names[j] in numeric and np.all(np.isfinite([slopes.within[j], slopes.between[j], slopes.within_se[j], slopes.between_se[j]]))
    ]
    if not tested:
        return
    z = slopes.contrast[tested]
    p = 2.0 * scipy.stats.norm.sf(np.abs(z))
    holm = _holm(p)
    alpha = settings.limit("alpha")
    flagged: list[tuple[int, float, float]] = []
    for j, p_adjusted in zip(tested, holm):
        larger = max(abs(slopes.within[j]), abs(slopes.between[j]))
        gap = abs(slopes.between[j] - slopes.within[j]) / larger if larger > 0 else 0.0
        if p_adjusted < alpha and settings.grade_of(gap) is not None:
            flagged.append((int(j), float(gap), float(p_adjusted)))
    if not flagged:
        return
    flagged.sort(key=lambda item: (-item[1], item[0]))
    graded = settings.grade_of(flagged[0][1])
    assert graded is not None
    grade, limit = graded
    group = _group_name(ctx)
    parts = []
    for j, gap, p_adjusted in flagged:
        reversed_sign = np.sign(slopes.within[j]) != np.sign(slopes.between[j])
        parts.append(
            f"{names[j]}: within each {group} {fmt(float(slopes.within[j]))} (SE {fmt(float(slopes.within_se[j]), 2)}), between {group} "
            f"groups {fmt(float(slopes.between[j]))} (SE {fmt(float(slopes.between_se[j]), 2)}){', opposite signs' if reversed_sign else ''}; "
            f"contrast z = {fmt(float(slopes.contrast[j]))}, Holm {_p(p_adjusted)}; pooled slope {fmt(float(ctx.fit.coef[j]))}"
        )
    columns = [names[j] for j, _, _ in flagged]
    yield settings.finding(
        grade,
        "the pooled slope mixes two different effects: " + "; ".join(parts),
        columns=columns,
        value=flagged[0][1],
        threshold=limit,
        remedy=f"centre {capped_names(columns)} on each {group}'s mean and add the {group} means as predictors (within and between slopes "
        f"side by side), or fit {group} fixed effects for the within slope; decide which of the two the question is about",
        details={
            names[j]: {
                "within": float(slopes.within[j]),
                "within_se": float(slopes.within_se[j]),
                "between": float(slopes.between[j]),
                "between_se": float(slopes.between_se[j]),
                "pooled": float(ctx.fit.coef[j]),
                "contrast_z": float(slopes.contrast[j]),
                "relative_gap": gap,
                "holm_p": p_adjusted,
            }
            for j, gap, p_adjusted in flagged
        },
    )


def _holm(p: np.ndarray) -> np.ndarray:
    """Holm's step-down adjusted p-values (Holm 1979, Scand. J. Statist. 6)."""
    order = np.argsort(p, kind="stable")
    m = p.size
    adjusted = np.maximum.accumulate(np.minimum(1.0, (m - np.arange(m)) * p[order]))
    out = np.empty(m)
    out[order] = adjusted
    return out


# ---------------------------------------------------------------- one point per group


def _group_outliers(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    factors = _grouped(ctx)
    design = ctx.design
    columns = [c for c in ctx.between_group_columns if c in ctx.numeric_predictors]
    if not columns or factors.count < settings.limit("rows_per_variable") * len(columns):
        return
    indices = [design.column_names.index(c) for c in columns]
    values = factors.means[:, indices]
    groups = factors.count
    if len(columns) == 1:
        median, mad = median_and_mad(values[:, 0])
        if not (np.isfinite(mad) and mad > 0):
            return
        scores, _, _ = modified_z(values[:, 0], (median, mad))
        size = np.abs(scores)
        cutoff = MODIFIED_Z_LIMIT
        chance_tail = 2.0 * scipy.stats.norm.sf(cutoff)
        tails = 2.0 * scipy.stats.norm.sf(size)
        measure = "|modified z|"
    else:
        try:
            estimate = robust_distances(values, tuple(columns))
        except np.linalg.LinAlgError:
            return
        size = estimate.squared
        cutoff = float(scipy.stats.chi2.ppf(settings.limit("weakens"), len(columns)))
        chance_tail = 1.0 - settings.limit("weakens")
        tails = scipy.stats.chi2.sf(size, len(columns))
        measure = f"robust squared distance (chi-square({len(columns)}) 0.975 quantile)"
    crossed = size > cutoff
    if not crossed.any():
        return
    check = chance_check_counts(int(crossed.sum()), groups, groups * chance_tail, tails[crossed])
    if not beyond_chance(settings, check):
        return
    far = np.flatnonzero(crossed)
    far = far[np.lexsort((far, -size[far]))]
    labels = [factors.labels[g] for g in far]
    group = _group_name(ctx)
    yield settings.finding(
        Grade.WEAKENS,
        f"{len(far):,} of {groups:,} {group} groups lie far from the other groups in {capped_names(columns)} (one point per group, as "
        f"these predictors are constant within each): {measure} above {fmt(cutoff)}, largest {fmt(float(size[far[0]]))} "
        f"({', '.join(labels[:5])}{', ...' if len(labels) > 5 else ''}; {check.describe()})",
        columns=columns,
        rows=labels[:50],
        row_values=[float(size[g]) for g in far[:50]],
        row_count=len(far),
        value=float(size[far[0]]),
        threshold=cutoff,
        source=settings.threshold("weakens").source,
        remedy=f"check the listed {group} groups' {capped_names(columns)} at the source; if genuine, see grouping.group-influence for whether "
        "they decide the fit",
        details={"groups": groups, "cutoff": cutoff, "measure": measure, **chance_details(check)},
    )


# ---------------------------------------------------------------- deleting whole groups


def _group_influence(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    import scipy.stats

    factors = _grouped(ctx)
    if not _fit_ready(ctx) or factors.count < 3:
        return
    fit, design = ctx.fit, ctx.design
    cluster_se = np.sqrt(np.diag(cr1_covariance(fit, factors.scores(fit.coef))))
    deleted = group_deletions(factors, fit)
    k = fit.rank
    f_median = float(scipy.stats.f.ppf(0.5, k, fit.df_resid))
    move_limit = settings.threshold("misleads")
    names, sources = design.column_names, design.column_sources
    with np.errstate(invalid="ignore", divide="ignore"):
        moves = -deleted.shift / cluster_se
    size = np.nan_to_num(np.abs(moves), nan=-np.inf)
    largest = np.argmax(size, axis=1) if design.p else np.zeros(factors.count, dtype=np.int64)
    crossed = np.flatnonzero(size[np.arange(factors.count), largest] > move_limit.value)
    flagged: list[dict[str, Any]] = []
    for g in crossed:
        finite = [j for j in range(design.p) if np.isfinite(moves[g, j])]
        top = max(finite, key=lambda j: (abs(moves[g, j]), names[j] != INTERCEPT, -j))
        after = fit.coef - deleted.shift[g]
        flips = [names[j] for j in finite if names[j] != INTERCEPT and np.sign(after[j]) != np.sign(fit.coef[j]) and abs(moves[g, j]) > move_limit.value]
        flagged.append({
            "group": factors.labels[g],
            "rows": int(factors.counts[g]),
            "cooks_distance": float(deleted.cooks[g]),
            "largest_move": names[top],
            "largest_move_se": float(moves[g, top]),
            "moves_se": {names[j]: float(moves[g, j]) for j in finite},
            "flips_sign": flips,
        })
    if not flagged:
        return
    flagged.sort(key=lambda item: (-abs(item["largest_move_se"] or 0.0), -item["cooks_distance"], item["group"]))
    group = _group_name(ctx)
    first = flagged[0]
    top = first["largest_move"]
    phrase = coefficient_phrase(top, dict(zip(names, sources))[top]) if top is not None else "no coefficient"
    flip = f" and flips the sign of {', '.join(first['flips_sign'])}" if first["flips_sign"] else ""
    others = f"; {len(flagged) - 1} more {group} group{'s' if len(flagged) > 2 else ''} as well ({', '.join(f['group'] for f in flagged[1:6])}{', ...' if len(flagged) > 6 else ''})" if len(flagged) > 1 else ""
    moved_columns = list(dict.fromkeys(dict(zip(names, sources))[f["largest_move"]] for f in flagged if f["largest_move"] not in (None, INTERCEPT)))
    yield settings.finding(
        Grade.MISLEADS,
        f"{group} {first['group']} decides {phrase}: deleting its {first['rows']:,} rows together moves it by "
        f"{fmt(abs(first['largest_move_se'] or 0.0), 2)} cluster-robust SE{flip} (group Cook's D = {fmt(first['cooks_distance'])}; "
        f"the median of F({k}, {fit.df_resid}) is {fmt(f_median)}){others}",
        columns=moved_columns,
        rows=[f["group"] for f in flagged][:50],
        row_values=[f["largest_move_se"] for f in flagged][:50],
        row_count=len(flagged),
        value=abs(first["largest_move_se"] or 0.0),
        threshold=move_limit,
        remedy=f"check {group} {first['group']} at the source; if it is genuine but unlike the others, report the fit with and without it, "
        f"or model what sets it apart (a {group}-level predictor)",
        details={"groups": flagged[:50], "f_median": f_median, "unit": "cluster-robust (CR1) standard errors of the full fit"},
    )


RULES = [
    Rule(
        id="grouping.between-predictors",
        summary="Predictors constant within groups (site facts on every site-day): groups, not rows, per group-level parameter.",
        why="A predictor that takes one value per site is measured once per site, however many days the table repeats it. "
        "Its slope is learned from the sites alone: with 40 sites and 12 site-level parameters the fit chases noise in "
        "site facts even with thousands of rows, and the usual standard errors, which count rows, overstate its precision.",
        remedy="collect more groups, or estimate fewer group-level parameters",
        check=_between_predictors,
        thresholds=(
            Threshold("misleads", 5, COMMON_PRACTICE + ": fewer than 5 groups per group-level parameter, half the lower end of " + PER_PARAMETER_SOURCE, Grade.MISLEADS, "<"),
            Threshold("weakens", 10, PER_PARAMETER_SOURCE, Grade.WEAKENS, "<"),
        ),
        needs=frozenset({"fit"}),
    ),
    Rule(
        id="grouping.residual-correlation",
        summary="Residuals that move together within groups: ICC, design effect and cluster-robust against usual standard errors.",
        why="The usual standard errors treat every row as an independent draw. When the days of one site share something the "
        "model leaves out (insulation, a door seal, a careless operator), their residuals move together; the table then holds "
        "the information of far fewer rows (the design effect 1 + (m - 1) ICC), and standard errors are too small, most of all "
        "for site-level predictors, so effects look more certain than they are.",
        remedy="report cluster-robust standard errors by group, or fit a mixed model with a random intercept per group",
        check=_residual_correlation,
        repair=_group_effects_allowed_for,
        thresholds=(
            ALPHA,
            Threshold(
                "weakens",
                1.2,
                "common practice: a standard error 20% too small turns a nominal 95% interval into about 90% coverage (normal quantiles); "
                "CR1 as in " + CAMERON_MILLER.replace("sec. VI", "sec. II.C") + "; " + KISH,
                Grade.WEAKENS,
            ),
            Threshold(
                "misleads",
                2.0,
                "common practice: a standard error half its true size turns a nominal 95% interval into about 67% coverage (normal quantiles)",
                Grade.MISLEADS,
            ),
        ),
        needs=frozenset({"fit"}),
    ),
    Rule(
        id="grouping.few-groups",
        summary="Too few groups for cluster-robust standard errors, when the residuals within groups are correlated.",
        why="Cluster-robust standard errors estimate the spread of the coefficients from the groups, one score per group. With "
        "few groups they are themselves noisy and biased downwards, and t tests built on them reject too often; the remedy for "
        "correlated residuals then needs a remedy of its own.",
        remedy="use a wild cluster bootstrap, fewer group-level predictors, or a mixed model",
        check=_few_groups,
        thresholds=(
            ALPHA,
            Threshold("note", 50, CAMERON_MILLER + ": below roughly 40 to 50 clusters cluster-robust inference is unreliable", Grade.NOTE, "<"),
            Threshold(
                "weakens",
                20,
                CAMERON_MILLER + ": with few clusters cluster-robust Wald tests over-reject (Cameron, Gelbach & Miller 2008, "
                "Rev. Econ. Stat. 90(3), 414-427: with five to thirty clusters, rejection rates near 10% at a nominal 5%)",
                Grade.WEAKENS,
                "<",
            ),
        ),
        needs=frozenset({"fit"}),
    ),
    Rule(
        id="grouping.within-between",
        summary="Predictors whose slope within groups differs from their slope between groups (the Mundlak contrast).",
        why="A predictor that varies both between sites and from day to day within a site has two slopes: how a site's energy "
        "moves on its warmer days, and how warm-climate sites differ from cool ones. They can differ, even in sign (warm sites "
        "are better insulated, yet a warm day costs more); the pooled slope is then a weighted mix of the two that describes "
        "neither. The contrast is equivalent to a Hausman test of fixed against random group effects.",
        remedy="centre the predictor on its group means and add the group means (both slopes side by side), or fit group fixed effects",
        check=_within_between,
        thresholds=(
            ALPHA,
            Threshold("weakens", 0.5, COMMON_PRACTICE + ": the two slopes differ by half the larger one; " + MUNDLAK, Grade.WEAKENS),
            Threshold("misleads", 1.0, COMMON_PRACTICE + ": a difference as large as the larger slope, as when the signs are opposite; " + MUNDLAK, Grade.MISLEADS),
        ),
        needs=frozenset({"fit"}),
    ),
    Rule(
        id="grouping.group-outliers",
        summary="Groups far from the others in the predictors constant within groups, measured one point per group.",
        why="A site fact repeated on each of a site's 90 days is one observation, not 90: measured row by row, an edge site "
        "looks like 90 unusual rows and a robust ellipse over rows over-flags it. Measured one point per group, a site is "
        "unusual only when it stands apart from the other sites.",
        remedy="check the listed groups' values at the source; if genuine, check whether they decide the fit",
        check=_group_outliers,
        thresholds=(
            Threshold(
                "weakens",
                0.975,
                "Rousseeuw & van Zomeren (1990), JASA 85: robust squared distance from the MCD estimate beyond the 0.975 quantile of "
                "chi-square (value is the quantile's probability); with one such predictor |modified z| > 3.5 (Iglewicz & Hoaglin 1993)",
                Grade.WEAKENS,
                ">",
            ),
            Threshold("rows_per_variable", 5, MCD_ROWS_SOURCE),
            CHANCE,
        ),
        needs=frozenset({"rows"}),
    ),
    Rule(
        id="grouping.group-influence",
        summary="Groups whose deletion moves a coefficient by more than two cluster-robust standard errors (with the group's Cook's distance).",
        why="When one site contributes many rows, deleting any one of its days changes little, because the site's other days "
        "hold the fit in place; deleting the whole site can change a slope completely. A slope decided by one site describes "
        "that site, not the others. Moves are measured in cluster-robust standard errors: with correlated residuals every "
        "site moves the fit further than the usual standard errors (and the group Cook's distance built on them) allow for.",
        remedy="check the named group at the source; report the fit with and without it, or model what sets it apart",
        check=_group_influence,
        repair=_influential_groups_left_out,
        thresholds=(
            Threshold(
                "misleads",
                2.0,
                "Belsley, Kuh & Welsch (1980), Regression Diagnostics: the absolute cutoff |DFBETAS| > 2 (as quoted by the olsrr and "
                "SAS documentation), applied "
                "to deleting a group (Cook & Weisberg 1982, sec. 3.6), in cluster-robust standard errors",
                Grade.MISLEADS,
                ">",
            ),
        ),
        needs=frozenset({"fit"}),
    ),
]

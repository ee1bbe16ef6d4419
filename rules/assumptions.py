"""Assumption previews: what the preliminary fit's residuals already say about the usual standard errors.

Every preview needs both a small p-value and an effect large enough to
matter: with thousands of rows a test detects departures too small to change
any conclusion, so a finding reports the p-value beside a measure of damage
(how far the usual standard errors are off, how much variance a bend
explains, how strongly neighbouring residuals move together).

Every preview reads all complete cases, except White's test on a large,
wide table: its auxiliary regression has ``p (p + 1) / 2`` columns and
costs ``n`` times their square, so when that exceeds a fixed budget it runs
on a subset of rows chosen by a seeded hash of their table position (see
:func:`prefit.stats.residual_tests.white_within_budget`); the finding then
says how many rows it used and why, while the Breusch-Pagan test and the
HC3-against-usual standard errors that grade the finding use every row.
"""

from __future__ import annotations

from dataclasses import asdict
from typing import Iterator, Sequence

import numpy as np

from prefit.context import RunContext
from prefit.design import INTERCEPT
from prefit.findings import Finding, Grade
from prefit.roles import Kind
from prefit.rule import NotApplicable, Repair, Rule, RuleSettings, Threshold, fmt
from prefit.stats.auxiliary import (
    autocorrelations,
    durbin_watson,
    hc3_standard_errors,
    r_squared_on_each,
    regress_added,
)
from prefit.stats.curvature import CurvatureCheck, square_columns
from prefit.stats.factor import DesignFactor
from prefit.stats.residual_tests import (
    ResidualTest,
    SampledTest,
    breusch_godfrey,
    breusch_pagan,
    breusch_pagan_and_spread,
    default_lags,
    jarque_bera,
    reset,
    scaled_squares,
    white_columns,
    white_within_budget,
)

ALPHA = Threshold("alpha", 0.01, "common practice: 1% significance level, as each preview is one of several tests")
WHITE_MAX_PRODUCTS = 500
SMALL_EFFECT = 0.02
COHEN_SMALL = "Cohen (1988), Statistical Power Analysis for the Behavioral Sciences, 2nd ed., sec. 9.2.2: f^2 = 0.02 is a small effect"
MEDIUM_EFFECT = 0.15
COHEN_MEDIUM = "Cohen (1988), sec. 9.2.2: f^2 = 0.15 is a medium effect; a bend that large decides the fit"
MISS_LIMIT_SD = 2.0
MISS_SOURCE = (
    "common practice: a straight line that misses the curve by two residual standard deviations or more "
    "misplaces predictions there by more than a 95% prediction interval allows (misleads)"
)


def _fit_ready(ctx: RunContext) -> bool:
    """A preliminary fit with residual degrees of freedom and at least one predictor column."""
    if not ctx.target_is_numeric:
        return False
    design, fit = ctx.design, ctx.fit
    return fit.rank >= 1 and fit.df_resid >= 3 and fit.rss > 0 and design.p > int(design.intercept)


def _p(value: float, name: str = "p") -> str:
    """``p = 0.0032``, or ``p < 0.0001`` for smaller values."""
    return f"{name} = {value:.2g}" if value >= 1e-4 else f"{name} < 0.0001"


def _intercept_column(ctx: RunContext) -> int | None:
    names = ctx.design.column_names
    return names.index(INTERCEPT) if INTERCEPT in names else None


def _spread_share_by_term(ctx: RunContext, squared: np.ndarray) -> dict[str, float]:
    """For each predictor, the R^2 of the squared residuals on that predictor alone (with a constant)."""
    design = ctx.design
    start, sources, groups = 0, [], []
    for term in design.terms:
        width = term.df
        if term.kind is not None and width:
            sources.append(term.source)
            groups.append(range(start, start + width))
        start += width
    return dict(zip(sources, r_squared_on_each(design.X, squared, groups)))


def _residual_after_bends(ctx: RunContext) -> tuple[np.ndarray, list[str], int]:
    """Residuals once the predictors that bend (default nonlinearity limits) have a square term each.

    A missed bend leaves large residuals at the ends of a predictor's range
    (and, for a seasonal predictor, runs of same-signed residuals), which
    spread, serial-correlation and normality tests would report as problems
    of their own; testing after allowing for the bend keeps the findings apart.
    """
    design, residual = ctx.design, ctx.row_scores.residual
    bent = [c.predictor for c in _bending(ctx.curvature, ALPHA.value, SMALL_EFFECT)]
    if not bent:
        return residual, [], 0
    fit = regress_added(ctx.factor, design.X, residual, square_columns(design, bent))
    assert fit.residual is not None
    return fit.residual, bent, fit.added_rank


def _se_ratios(ctx: RunContext, residual: np.ndarray, df_resid: int) -> tuple[np.ndarray, list[int], int, float]:
    """HC3 over usual standard errors from ``residual``: per column, the slopes compared, the worst slope and its change."""
    fit, design = ctx.fit, ctx.design
    usual = np.sqrt(np.diag(fit.cov_unscaled) * float(residual @ residual) / df_resid)
    ratio = hc3_standard_errors(fit, design.X, residual, ctx.row_scores.hat) / usual
    compared = worst_se_ratio(design.column_names, ratio)
    if compared is None:
        return ratio, [], -1, float("nan")
    candidates, worst, change = compared
    return ratio, candidates, worst, change


def _heteroscedasticity(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _fit_ready(ctx):
        return
    design, fit, scores = ctx.design, ctx.fit, ctx.row_scores
    X = design.X
    residual, bent, extra = _residual_after_bends(ctx)
    df_resid = fit.df_resid - extra
    if df_resid <= 0:
        return
    koenker, spread_ratio = breusch_pagan_and_spread(ctx.factor, X, residual, design.intercept)
    intercept = _intercept_column(ctx)
    others = design.p - 1
    sampled: SampledTest | None = None
    if intercept is not None and others * (others + 1) // 2 <= WHITE_MAX_PRODUCTS:
        sampled = white_within_budget(ctx.factor, X, residual, intercept, design.positions)
    general = sampled.test if sampled else None
    p_value = min(koenker.p_value, general.p_value if general else 1.0)
    before = None
    if not p_value < settings.limit("alpha"):
        if not bent:
            return
        # The spread test after allowing for a bend is quiet; the model as specified (without the bend) may still
        # have usual standard errors far off. Report that when the spread test before allowing for the bend agrees.
        residual, df_resid = scores.residual, fit.df_resid
        ratio, candidates, worst, change = _se_ratios(ctx, residual, df_resid)
        if not candidates or not settings.threshold("misleads").crossed(change):
            return
        before = breusch_pagan(ctx.factor, X, residual, design.intercept)
        if not before.p_value < settings.limit("alpha"):
            return
        spread_ratio = float("nan")
    else:
        ratio, candidates, worst, change = _se_ratios(ctx, residual, df_resid)
        if not candidates:
            return
    by_errors = settings.grade_of(change, ("misleads", "weakens"))
    by_spread = settings.grade_of(spread_ratio, ("spread-ratio",)) if np.isfinite(spread_ratio) else None
    graded = max((g for g in (by_errors, by_spread) if g is not None), key=lambda g: (int(g[0]), g is by_errors), default=None)
    if graded is None:
        return
    grade, limit = graded
    value = change if graded is by_errors else spread_ratio
    shares = _spread_share_by_term(ctx, scaled_squares(residual))
    leader = max(shares, key=lambda name: (shares[name], name))
    coefficient = design.column_names[worst]
    direction = "too small" if ratio[worst] > 1 else "too large"
    white_text = f"; White LM = {fmt(general.statistic)} (df {general.df}, {_p(general.p_value)}{_on_rows(sampled, design.p)})" if general else ""
    after = f" (after allowing for the bend in {', '.join(bent)})" if bent else ""
    tested = (
        f"Breusch-Pagan (Koenker) LM = {fmt(koenker.statistic)} (df {koenker.df}, {_p(koenker.p_value)}){white_text}"
        if before is None
        else f"Breusch-Pagan (Koenker) LM = {fmt(before.statistic)} for the model as specified (df {before.df}, "
        f"{_p(before.p_value)}; {_p(koenker.p_value)} once the bend in {', '.join(bent)} is allowed for)"
    )
    spread_text = (
        f"; the residual SD where the spread is largest (a fifth of the rows) is {fmt(spread_ratio)} times that where it is smallest, "
        "so one pooled SD gives prediction intervals too narrow there and weighted least squares would estimate the slopes more precisely"
        if np.isfinite(spread_ratio)
        else ""
    )
    yield settings.finding(
        grade,
        f"residual spread is not constant{after if before is None else ''}: {tested}; the spread moves most with {leader} "
        f"(R^2 of squared residuals on it {fmt(shares[leader], 2)}); the usual standard error of {coefficient} is {direction}: "
        f"HC3 gives {fmt(float(ratio[worst]))} times it{spread_text}",
        columns=[leader],
        value=value,
        threshold=limit,
        remedy=f"report heteroscedasticity-consistent (HC3) standard errors; or stabilise the variance (log of {ctx.roles.target}); "
        f"or fit weighted least squares with {_weights_for(ctx, leader)}",
        details={
            "graded_by": "se_ratio" if graded is by_errors else "spread_ratio",
            "breusch_pagan": _test_details(koenker),
            "breusch_pagan_before_bends": _test_details(before) if before is not None else None,
            "white": _white_details(sampled, design.p) if sampled else None,
            "se_ratio_hc3_to_usual": {design.column_names[j]: float(ratio[j]) for j in candidates},
            "spread_ratio": spread_ratio if np.isfinite(spread_ratio) else None,
            "spread_r_squared_by_predictor": shares,
            "alpha": settings.limit("alpha"),
            "after_bends_in": bent,
        },
    )


def worst_se_ratio(names: Sequence[str], ratio: np.ndarray) -> tuple[list[int], int, float] | None:
    """The slopes with a finite positive ratio of a robust to the usual standard error, the one furthest from 1, and
    how far (the ratio or its inverse, whichever is larger); None when no slope has one."""
    candidates = [j for j, name in enumerate(names) if name != INTERCEPT and np.isfinite(ratio[j]) and ratio[j] > 0]
    if not candidates:
        return None
    worst = max(candidates, key=lambda j: (max(ratio[j], 1 / ratio[j]), -j))
    return candidates, worst, float(max(ratio[worst], 1 / ratio[worst]))


def _row_sample_reason(sampled: SampledTest, p: int) -> str | None:
    """Why White's test ran on a subset of the rows, or None when it used them all."""
    if not sampled.sampled:
        return None
    columns = white_columns(p) - 1
    return (
        f"its auxiliary regression has {columns} columns, so on all {sampled.rows:,} rows it would cost about "
        f"{sampled.rows:,} x {columns}^2 operations; {sampled.rows_used:,} rows chosen by a seeded hash of their position "
        "keep its chi-squared reference, and the standard errors compared use all rows"
    )


def _on_rows(sampled: SampledTest | None, p: int) -> str:
    if sampled is None or not sampled.sampled:
        return ""
    return (
        f", on {sampled.rows_used:,} of {sampled.rows:,} rows chosen by a seeded hash, as its "
        f"{white_columns(p) - 1}-column auxiliary regression on every row would be slow"
    )


def _white_details(sampled: SampledTest, p: int) -> dict[str, object]:
    reason = _row_sample_reason(sampled, p)
    return _test_details(sampled.test) | {"rows_used": sampled.rows_used, "rows": sampled.rows, "row_sample": reason}


def _test_details(test: ResidualTest) -> dict[str, float]:
    return {"statistic": test.statistic, "df": test.df, "p_value": test.p_value, "f_statistic": test.f_statistic, "f_p_value": test.f_p_value}


def _bending(curvatures: Sequence[CurvatureCheck], alpha: float, least: float) -> list[CurvatureCheck]:
    """The curvature checks that pass both the (Holm-adjusted) significance and the effect-size limits."""
    return [c for c in curvatures if c.p_holm < alpha and c.f_squared >= least]


def _nonlinearity(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _fit_ready(ctx):
        return
    design, residual = ctx.design, ctx.row_scores.residual
    alpha, least = settings.limit("alpha"), settings.threshold("weakens").value
    model = reset(ctx.factor, design.X, residual, design.y - residual, design.intercept)
    bends = _bending(ctx.curvature, alpha, least)
    model_bends = np.isfinite(model.p_value) and model.p_value < alpha and model.effect >= least
    if not bends and not model_bends:
        return
    effect = max([c.f_squared for c in bends] + ([model.effect] if model_bends else []))
    graded = settings.grade_of(effect)
    if graded is None:
        return
    grade, limit = graded
    residual_sd = float(np.sqrt(ctx.fit.rss / ctx.fit.df_resid))
    misses = {c.predictor: c.largest_shift / residual_sd if residual_sd > 0 else float("inf") for c in bends}
    miss_limit = settings.threshold("misses-sd")
    if grade < Grade.MISLEADS and any(miss_limit.crossed(m) for m in misses.values()):
        grade, limit = Grade.MISLEADS, miss_limit
    target = ctx.roles.target
    parts = [
        f"{c.predictor} bends {'upward (its slope grows' if c.t > 0 else 'downward (its slope shrinks'} as it rises; "
        f"square term t = {fmt(c.t)}, {_p(c.p_holm, 'Holm p')}, f^2 = {fmt(c.f_squared, 2)}; "
        f"a straight line misses by up to {fmt(c.largest_shift)} {target}, {fmt(misses[c.predictor], 2)} residual SD)"
        for c in bends
    ]
    where = "; ".join(parts) if parts else "no single predictor bends on its own: look for interactions or a transformed target"
    names = [c.predictor for c in bends]
    yield settings.finding(
        grade,
        f"the straight-line form does not fit: RESET Wald = {fmt(model.statistic)} (df {model.df}, {_p(model.p_value)}, "
        f"f^2 = {fmt(model.effect, 2)}); {where}",
        columns=names,
        value=effect if limit is not miss_limit else max(misses.values()),
        threshold=limit,
        remedy=(
            f"add a curved term for {', '.join(names)} (a square, a spline, or a piecewise line with a break) and plot residuals against it"
            if names
            else "add interactions between the strongest predictors or model a transformed target, then re-check the residuals"
        ),
        details={"reset": _test_details(model) | {"f_squared": model.effect}, "curvature": [asdict(c) for c in ctx.curvature], "alpha": alpha,
                 "f_squared": effect, "misses_in_residual_sd": misses},
    )


def _bend_allowed_for(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the target replaced, on the complete rows, by the straight-line fitted values plus the residuals of the fit with a square per bending predictor.

    A least-squares fit of the repaired target on the unchanged design has
    exactly the curved fit's residuals (Frisch-Waugh-Lovell), so the row
    diagnostics re-run on it see the fit with the bend allowed for, on the
    same design columns and leverage.
    """

    design = ctx.design
    bent = [column for column in finding.columns if column in design.column_names]
    if not bent or not _fit_ready(ctx):
        return None
    residual = ctx.row_scores.residual
    curved = regress_added(ctx.factor, design.X, residual, square_columns(design, bent))
    assert curved.residual is not None
    target = ctx.roles.target
    repaired = np.array(ctx.values(target), dtype=float)
    repaired[design.positions] = design.y - residual + curved.residual
    table = ctx.with_target(repaired)
    return Repair(f"a square term for {', '.join(bent)}", rows=design.n, table=table)


def _residual_normality(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _fit_ready(ctx):
        return
    residual, bent, _ = _residual_after_bends(ctx)
    test, skewness, kurtosis = jarque_bera(residual)
    excess = kurtosis - 3.0
    skewed = abs(skewness) >= settings.limit("skewness")
    tailed = abs(excess) >= settings.limit("excess-kurtosis")
    if not (test.p_value < settings.limit("alpha") and (skewed or tailed)):
        return
    n = residual.size
    small = settings.threshold("weakens")
    grade = Grade.WEAKENS if small.crossed(n) else Grade.NOTE
    shape = " and ".join(
        text
        for text, present in (
            (f"skewed ({'right' if skewness > 0 else 'left'}, skewness {fmt(skewness, 2)})", skewed),
            (f"{'heavy' if excess > 0 else 'light'}-tailed (excess kurtosis {fmt(excess, 2)})", tailed),
        )
        if present
    )
    consequence = (
        f"with {n:,} complete cases t-based intervals and p-values may be off, and so may prediction intervals"
        if grade is Grade.WEAKENS
        else f"with {n:,} complete cases the coefficients' intervals are protected by the central limit theorem, but prediction intervals are not"
    )
    yield settings.finding(
        grade,
        f"residuals{' (after allowing for the bend in ' + ', '.join(bent) + ')' if bent else ''} are {shape}: Jarque-Bera = {fmt(test.statistic)} ({_p(test.p_value)}); {consequence}",
        columns=[ctx.roles.target],
        value=float(n),
        threshold=small,
        remedy="look at the largest residuals first (a few bad rows often cause this); "
        + (f"for a right-skewed {ctx.roles.target} try its logarithm; " if skewed and skewness > 0 else "")
        + "otherwise use bootstrap intervals",
        details={
            "jarque_bera": test.statistic,
            "p_value": test.p_value,
            "skewness": skewness,
            "kurtosis": kurtosis,
            "complete_cases": n,
            "after_bends_in": bent,
        },
    )


def order_column(ctx: RunContext) -> str | None:
    """The column giving the rows' order: the configured one, else the first date/time column."""
    if ctx.options.order is not None:
        return ctx.options.order
    for name in ctx.table.column_names:
        if name != ctx.roles.target and ctx.roles.kinds[name] is Kind.DATETIME:
            return name
    return None


def _series_order(ctx: RunContext, when: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Complete cases with an order value, in time order, and the series code of each.

    With grouped rows (``--group``, or a repeating ``--id``) each group is its
    own series: rows are ordered by group, then time, so that neighbours are
    the same site on consecutive days and no lag crosses a group boundary.
    Without grouping, when the row labels repeat and several rows share a
    time, each label is its own series likewise.
    """
    placed = np.flatnonzero(np.isfinite(when))
    grouped = ctx.group_rows
    if grouped is not None:
        codes = grouped.codes[placed]
        order = np.lexsort((when[placed], codes))
        return placed[order], codes[order]
    if ctx.roles.id is not None and np.unique(when[placed]).size < placed.size:
        labels = np.array([str(ctx.row_label(int(p))) for p in ctx.design.positions[placed]])
        codes = np.unique(labels, return_inverse=True)[1]
        if np.unique(codes).size < placed.size:
            order = np.lexsort((when[placed], codes))
            return placed[order], codes[order]
    return placed[np.argsort(when[placed], kind="stable")], None


def _autocorrelation(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    column = order_column(ctx)
    if column is None:
        raise NotApplicable("no time order: name the order column with --order (or include a date column)")
    if not _fit_ready(ctx):
        return
    design = ctx.design
    residual, bent, _ = _residual_after_bends(ctx)
    order, groups = _series_order(ctx, ctx.values(column)[design.positions])
    if order.size < 10:
        return
    X, e = design.X[order], residual[order]
    if ctx.group_rows is not None and groups is not None:
        # A shared group effect is not serial correlation: the order within each group is read from deviations from its mean.
        e = e - (np.bincount(groups, weights=e) / np.bincount(groups))[groups]
    factor = ctx.factor if order.size == design.n else DesignFactor.of(X, e)
    lags = default_lags(order.size, int(settings.limit("lags")))
    test = breusch_godfrey(factor, X, e, lags, design.intercept, groups)
    if not (np.isfinite(test.p_value) and test.p_value < settings.limit("alpha")):
        return
    correlations = autocorrelations(e, lags, groups)
    strongest = int(np.argmax(np.abs(correlations)))
    effect = float(abs(correlations[strongest]))
    graded = settings.grade_of(effect)
    if graded is None:
        return
    grade, limit = graded
    watson = durbin_watson(e, groups)
    series_by = ctx.roles.group or ctx.roles.id
    series = f" within each {series_by}" if groups is not None else ""
    after = f" (after allowing for the bend in {', '.join(bent)})" if bent else ""
    yield settings.finding(
        grade,
        f"residuals in {column} order{series}{after} are autocorrelated: Durbin-Watson = {fmt(watson)}, lag-1 autocorrelation = "
        f"{fmt(float(correlations[0]), 2)}, strongest at lag {strongest + 1} ({fmt(float(correlations[strongest]), 2)}); "
        f"Breusch-Godfrey LM = {fmt(test.statistic)} ({lags} lags, {_p(test.p_value)}); the usual standard errors "
        f"{'are too small' if correlations[strongest] > 0 else 'are off'}",
        columns=[column],
        value=effect,
        threshold=limit,
        remedy=f"use autocorrelation-robust (Newey-West) or, for several series, cluster-robust standard errors; add lagged or "
        f"seasonal terms in {column}; or model the errors (generalised least squares with autoregressive errors)",
        details={
            "order_column": column,
            "series_by": series_by if groups is not None else None,
            "series": int(np.unique(groups).size) if groups is not None else 1,
            "durbin_watson": watson,
            "autocorrelations": [float(c) for c in correlations],
            "breusch_godfrey": _test_details(test),
            "rows_ordered": int(order.size),
            "rows_without_order": int(design.n - order.size),
            "after_bends_in": bent,
        },
    )


AUTOCORRELATION_SOURCE = (
    "common practice: Durbin-Watson below about 1.4 (lag-1 autocorrelation 0.3); for a slowly changing predictor the "
    "variance of its slope grows by (1 + rho) / (1 - rho), 1.86 at rho = 0.3 (AR(1) error formula)"
)


def _weights_for(ctx: RunContext, term: str) -> str:
    """How weights should follow the term the spread moves with: by group for a two-valued one, else falling as it grows."""
    column = ctx.design.X[:, ctx.design.column_names.index(term)] if term in ctx.design.column_names else None
    if column is not None and np.unique(column).size <= 2:
        return f"a separate residual variance (and weight) for each of the two values of {term}"
    return f"weights that fall as {term} grows"

RULES = [
    Rule(
        id="assumptions.heteroscedasticity",
        summary="Residual spread that changes with the predictors (Breusch-Pagan and White tests), when it moves the usual "
        "standard errors (HC3 against usual) or the spread differs twofold between rows; a large standard-error ratio is "
        "reported even when the test after allowing for bends is not significant.",
        why="The usual standard errors assume every row's error has the same variance. When the spread grows with a "
        "predictor (bigger sites vary more), least squares still gives unbiased coefficients, but the usual standard "
        "errors are wrong, so confidence intervals and p-values are too narrow or too wide, and rows with large "
        "spread pull the fit more than they deserve.",
        remedy="report heteroscedasticity-consistent (HC3) standard errors, stabilise the variance with a transform of the target, or fit weighted least squares",
        check=_heteroscedasticity,
        heavy=True,
        thresholds=(
            ALPHA,
            Threshold(
                "misleads",
                2.0,
                "common practice: a standard error half its HC3 value turns a nominal 95% interval into about 68% coverage (normal "
                "quantiles); HC3 as in Long & Ervin (2000), Am. Stat. 54(3)",
                Grade.MISLEADS,
            ),
            Threshold(
                "weakens",
                1.2,
                "common practice: a standard error 20% too small turns a nominal 95% interval into about 90% coverage (normal quantiles); "
                "HC3 as in Long & Ervin (2000), Am. Stat. 54(3)",
                Grade.WEAKENS,
            ),
            Threshold(
                "spread-ratio",
                2.0,
                "common practice: group SDs within a factor of 2 (variances within 4) are tolerated by the pooled-variance "
                "analysis (Moore, McCabe & Craig, Introduction to the Practice of Statistics, 9th ed., ch. 12: ANOVA can "
                "be performed when the largest sample SD is less than twice the smallest)",
                Grade.WEAKENS,
            ),
        ),
        needs=frozenset({"fit", "rows"}),
    ),
    Rule(
        id="assumptions.nonlinearity",
        summary="A response that bends: Ramsey's RESET for the model and an added square per numeric predictor.",
        why="A straight line fitted to a curved relation is wrong at both ends of the range and too steep or too flat "
        "in the middle; the slope then describes no part of the data well, residuals carry the missed curve, and "
        "predictions at the extremes (a heat wave) are biased.",
        remedy="add a curved term (square, spline, piecewise line) for the predictor that bends, or transform it",
        check=_nonlinearity,
        thresholds=(
            ALPHA,
            Threshold("weakens", SMALL_EFFECT, COHEN_SMALL, Grade.WEAKENS),
            Threshold("misleads", MEDIUM_EFFECT, COHEN_MEDIUM, Grade.MISLEADS),
            Threshold("misses-sd", MISS_LIMIT_SD, MISS_SOURCE),
        ),
        needs=frozenset({"fit", "rows"}),
        repair=_bend_allowed_for,
    ),
    Rule(
        id="assumptions.residual-normality",
        summary="Skewed or heavy-tailed residuals (Jarque-Bera with skewness and kurtosis); serious only for small samples.",
        why="t-based intervals and p-values assume normal errors. With many rows the central limit theorem makes the "
        "coefficients nearly normal anyway, so skewed residuals matter little for them; with few rows the intervals "
        "can be badly off. Prediction intervals rely on the error distribution at any sample size.",
        remedy="inspect the largest residuals, consider a log of a right-skewed target, or use bootstrap intervals",
        check=_residual_normality,
        thresholds=(
            ALPHA,
            Threshold("skewness", 0.5, "common practice: |skewness| of 0.5 or more is at least moderate skew (Bulmer 1979, Principles of Statistics, p. 63, as quoted in secondary sources)"),
            Threshold("excess-kurtosis", 1.0, "common practice"),
            Threshold(
                "weakens",
                100,
                "common practice: a hundred or more rows usually let the central limit theorem protect the coefficients "
                "(Lumley, Diehr, Emerson & Chen 2002, Annu. Rev. Public Health 23, 151-169: valid in large samples for any distribution)",
                Grade.WEAKENS,
                "<",
            ),
        ),
        grades=(Grade.NOTE,),
        needs=frozenset({"fit", "rows"}),
    ),
    Rule(
        id="assumptions.autocorrelation",
        summary="Residuals that move together in time order (Durbin-Watson, Breusch-Godfrey), with --order or a date column.",
        why="The usual standard errors assume each row brings independent information. When neighbouring days' "
        "residuals move together, the table holds fewer independent pieces of information than rows, so standard "
        "errors are too small and effects look more certain than they are.",
        remedy="use autocorrelation-robust (Newey-West) standard errors, add lagged or seasonal terms, or model the error process",
        check=_autocorrelation,
        thresholds=(
            ALPHA,
            Threshold("lags", 10, "common practice: min(10, n / 5) lags for Breusch-Godfrey (the statsmodels default)"),
            Threshold(
                "weakens",
                0.1,
                "common practice: a residual autocorrelation of 0.1 already inflates the variance of a slowly changing "
                "predictor's slope by (1 + rho) / (1 - rho) = 1.22 (AR(1) error formula at rho = 0.1)",
                Grade.WEAKENS,
            ),
            Threshold("misleads", 0.3, AUTOCORRELATION_SOURCE, Grade.MISLEADS),
        ),
        needs=frozenset({"fit", "rows"}),
    ),
]

"""Sample-size rules: enough complete cases for the parameters, published minimum sizes, and power."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.design import Design
from prefit.findings import Finding, Grade
from prefit.rule import Repair, Rule, RuleSettings, Threshold, capped_names, fmt
from prefit.stats import planning

RILEY_SOURCE = (
    "Riley et al. (2019), Minimum sample size for developing a multivariable prediction model: Part I - Continuous "
    "outcomes, Statistics in Medicine 38(7); Riley et al. (2020), BMJ 368:m441"
)
PER_PARAMETER_SOURCE = (
    "common practice: 10 to 20 observations per estimated parameter (the one-in-ten rule, one in twenty where shrinkage "
    "matters: Harrell, Lee & Mark 1996, Stat. Med. 15; Peduzzi et al. 1996, J. Clin. Epidemiol. 49; Harrell 2015, "
    "Regression Modeling Strategies, 2nd ed., sec. 4.4, pp. 72-73, about 15 per parameter of the limiting sample size, "
    "as quoted by secondary sources)"
)
EXPLAIN_SOURCE = (
    "Austin & Steyerberg (2015), The number of subjects per variable required in linear regression analyses, "
    "Journal of Clinical Epidemiology 68(6), 627-636: about two subjects per variable gave coefficients with relative "
    "bias under 10%, accurate standard errors and about nominal confidence-interval coverage; counted here with the intercept"
)
PREDICT_GRADES = ("blocks", "misleads", "weakens")
EXPLAIN_GRADES = ("blocks", "explain-misleads", "explain-weakens")


def predicting(ctx: RunContext) -> bool:
    """Whether the model is meant to score new rows (``purpose = "predict"``) rather than to be read (``explain``)."""
    return ctx.options.purpose == "predict"


def counted_parameters(design: Design) -> list[str]:
    """What each term costs, e.g. ``intercept 1``, ``1 each: a, b``, ``compressor_type 3 (dummies for 4 levels, reference screw)``."""
    parts = ["intercept 1"] if design.intercept else []
    singles = [t.source for t in design.terms if t.kind is not None and t.reference is None and t.df == 1]
    if len(singles) == 1:
        parts.append(f"{singles[0]} 1")
    elif singles:
        parts.append(f"1 each: {capped_names(singles)}")
    for term in design.terms:
        if term.reference is not None and term.df:
            parts.append(f"{term.source} {term.df} (dummies for {term.df + 1} levels, reference {term.reference})")
    return parts


def _per_parameter(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric:
        return
    design = ctx.design
    n, p = design.n, design.p
    if p == 0:
        return
    ratio = n / p
    graded = settings.grade_of(ratio, PREDICT_GRADES if predicting(ctx) else EXPLAIN_GRADES)
    if graded is None:
        return
    grade, limit = graded
    counted = ", ".join(counted_parameters(design))
    if grade is Grade.BLOCKS:
        message = f"{n:,} complete cases for {p} parameters ({counted}): least squares needs more rows than parameters (n > p)"
    else:
        message = f"{n:,} complete cases for {p} parameters ({counted}): {fmt(ratio)} per parameter, below {limit.value:g}"
    costly = [t for t in design.terms if t.reference is not None and t.df > 1]
    merge = f" (of {', '.join(t.source for t in costly)})" if costly else ""
    yield settings.finding(
        grade,
        message,
        columns=_predictor_columns(design),
        value=ratio,
        threshold=limit,
        details={
            "complete_cases": n,
            "parameters": p,
            "purpose": ctx.options.purpose,
            "parameters_by_term": {t.source: t.df for t in design.terms if t.df},
            "dummies": {
                t.source: {"parameters": t.df, "levels": [t.reference, *t.levels], "reference": t.reference}
                for t in design.terms
                if t.reference is not None and t.df
            },
        },
        remedy=f"collect more complete rows, or estimate fewer parameters: drop weak predictors, merge rare category levels{merge}, "
        "fill holes that cost rows",
    )


def _predictor_columns(design: Design) -> list[str]:
    return [t.source for t in design.terms if t.df and t.kind is not None]


@dataclass(frozen=True)
class Anticipated:
    """The R-squared a plan assumes, and where it came from.

    ``f_p_value`` is the overall F test's p-value when the R-squared is the
    preliminary fit's (None when configured): at or above
    :data:`EVIDENCE_ALPHA` the fit shows no effect to plan for (``evidenced``
    is false).
    """

    r2: float
    origin: str
    f_p_value: float | None = None

    @property
    def evidenced(self) -> bool:
        """Configured, or the preliminary fit's overall F test rejects at :data:`EVIDENCE_ALPHA`."""
        return self.f_p_value is None or self.f_p_value < EVIDENCE_ALPHA

    def no_effect(self) -> str:
        """Why the fit's R-squared plans nothing: its overall F test."""
        return f"the preliminary fit shows no effect to plan for (overall F test p = {fmt(self.f_p_value or 1.0)})"


HIGHEST_R2 = 1.0 - 1e-9
EVIDENCE_ALPHA = 0.05
POST_HOC_SOURCE = (
    "Hoenig & Heisey (2001), The abuse of power, The American Statistician 55(1), 19-24: power computed from the "
    "observed effect only restates the test's p-value; Cohen (1988), sec. 9.2.2: f-squared 0.02 is a small effect"
)


def overall_f_p_value(ctx: RunContext) -> float:
    """The preliminary fit's overall F test p-value (all slopes zero), NaN when it cannot be computed."""
    import scipy.stats

    fit = ctx.fit
    u = fit.rank - int(ctx.design.intercept)
    v = fit.df_resid
    r2 = fit.r_squared
    if u < 1 or v < 1 or not math.isfinite(r2):
        return float("nan")
    if r2 >= 1.0:
        return 0.0
    return float(scipy.stats.f.sf((r2 / u) / ((1.0 - r2) / v), u, v))


def _anticipated(ctx: RunContext) -> Anticipated:
    """The configured R-squared, else the preliminary fit's adjusted one (NaN when the fit has none), kept below 1."""
    if ctx.options.anticipated_r2 is not None:
        return Anticipated(ctx.options.anticipated_r2, "configured (anticipated-r2)")
    fitted = ctx.fit.adjusted_r_squared
    p_value = overall_f_p_value(ctx)
    return Anticipated(
        min(fitted, HIGHEST_R2) if math.isfinite(fitted) else fitted,
        "the preliminary fit's adjusted R-squared (set anticipated-r2 to plan with a prior value)",
        p_value if math.isfinite(p_value) else None,
    )


def _parameters(p: int) -> str:
    return f"{p} predictor parameter" + ("" if p == 1 else "s")


def _predictor_parameters(design: Design) -> int:
    return design.p - 1 if design.intercept else design.p


def required_sizes(ctx: RunContext, settings: RuleSettings, r2: float) -> tuple[dict[str, int | None], dict[str, str]]:
    """The n each of Riley et al.'s four criteria requires (None: no n suffices), and why any was not computed."""
    design = ctx.design
    p = _predictor_parameters(design)
    required: dict[str, int | None] = {}
    skipped: dict[str, str] = {}
    if not math.isfinite(r2):
        skipped["shrinkage"] = skipped["r2-gap"] = skipped["mean"] = "no anticipated R-squared (the preliminary fit gives none)"
    else:
        required["shrinkage"] = planning.n_for_shrinkage(r2, p, settings.limit("shrinkage"))
        required["r2-gap"] = planning.n_for_r_squared_gap(r2, p, settings.limit("r2-gap"))
    required["residual-sd"] = planning.n_for_residual_sd(p, settings.limit("sd-margin"))
    y = design.y
    if not design.intercept:
        skipped["mean"] = "the model has no intercept"
    elif not (np.all(y > 0) or np.all(y < 0)):
        skipped["mean"] = "a multiplicative margin needs an outcome on one side of zero"
    elif "mean" not in skipped:
        required["mean"] = planning.n_for_mean(r2, p, float(np.mean(y)), float(np.std(y, ddof=1)), settings.limit("mean-margin"))
    return required, skipped


def _minimum(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric:
        return
    design = ctx.design
    p = _predictor_parameters(design)
    n = design.n
    if p < 1 or n < 2:
        return
    anticipated = _anticipated(ctx)
    r2 = anticipated.r2
    required, skipped = required_sizes(ctx, settings, r2)
    listing = ", ".join(
        f"{CRITERIA[k]} {'none suffices' if required[k] is None else format(required[k], ',')}" for k in CRITERION_ORDER if k in required
    )
    details = {
        "anticipated_r2": r2,
        "anticipated_r2_from": anticipated.origin,
        "predictor_parameters": p,
        "complete_cases": n,
        "required_by_criterion": {k: required[k] for k in CRITERION_ORDER if k in required},
        "not_computed": skipped,
    }
    columns = _predictor_columns(design)
    informs = "" if predicting(ctx) else INFORMS_ONLY
    details["purpose"] = ctx.options.purpose
    details["f_p_value"] = anticipated.f_p_value
    if any(v is None for v in required.values()):
        yield settings.finding(
            _for_purpose(ctx, Grade.MISLEADS, anticipated),
            f"no sample size meets the minimum for {_parameters(p)}: with anticipated R-squared {fmt(r2)} "
            f"from {anticipated.origin}, expected shrinkage never reaches {settings.limit('shrinkage'):g} ({listing}){informs}"
            f"{_unevidenced(ctx, anticipated)}",
            columns=columns,
            value=1.0,
            threshold=settings.threshold("misleads"),
            details={**details, "binding": "shrinkage", "required": None},
            remedy="set anticipated-r2 from earlier studies of the same process, or reduce the predictor parameters; "
            "if the predictors truly explain nothing, a prediction model is not warranted",
        )
        return
    sizes = {k: int(v) for k, v in required.items() if v is not None}
    binding = max(sizes, key=lambda k: (sizes[k], -CRITERION_ORDER.index(k)))
    needed = sizes[binding]
    if n >= needed:
        return
    shortfall = (needed - n) / needed
    graded = settings.grade_of(shortfall)
    if graded is None:
        return
    grade, limit = graded
    yield settings.finding(
        _for_purpose(ctx, grade, anticipated),
        f"{n:,} complete cases, {needed - n:,} short of the {needed:,} needed for {_parameters(p)} "
        f"(binding: {CRITERIA[binding]}; per criterion: {listing}); anticipated R-squared {fmt(r2)} from {anticipated.origin}{informs}"
        f"{_unevidenced(ctx, anticipated)}",
        columns=columns,
        value=shortfall,
        threshold=limit,
        source=f"{limit.source}; criteria: {RILEY_SOURCE}" if limit.source != RILEY_SOURCE else RILEY_SOURCE,
        details={**details, "binding": binding, "required": needed, "shortfall_rows": needed - n},
        remedy=f"collect at least {needed - n:,} more complete rows, or reduce the predictor parameters "
        "(drop weak predictors, merge rare levels) and plan again; if neither is possible, fit with a penalised regression",
    )


INFORMS_ONLY = (
    "; purpose explain: these prediction-model criteria inform and do not gate "
    "(the gate rests on rows per parameter and power; set purpose predict to gate on them)"
)


def _for_purpose(ctx: RunContext, grade: Grade, anticipated: Anticipated) -> Grade:
    """Riley et al.'s criteria plan prediction models: they gate under ``predict`` and weaken at most under ``explain``.

    Under ``explain`` they only note a plan resting on the preliminary fit's R-squared when that fit shows no
    effect (overall F test not significant): the criteria then measure the absence of signal, which no number of
    rows repairs, and the rows per parameter (``sample-size.per-parameter``) and the power for a small effect
    (``sample-size.power``) judge the rows.
    """
    if predicting(ctx):
        return grade
    return min(grade, Grade.WEAKENS if anticipated.evidenced else Grade.NOTE)


def _unevidenced(ctx: RunContext, anticipated: Anticipated) -> str:
    if predicting(ctx) or anticipated.evidenced:
        return ""
    return f"; {anticipated.no_effect()}, so under purpose explain this is a note"


CRITERION_ORDER = ("shrinkage", "r2-gap", "residual-sd", "mean")
CRITERIA = {
    "shrinkage": "(i) shrinkage",
    "r2-gap": "(ii) R-squared gap",
    "residual-sd": "(iii) residual SD",
    "mean": "(iv) mean outcome",
}


def _power(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric:
        return
    design = ctx.design
    u = _predictor_parameters(design)
    v = design.n - design.p
    if u < 1 or v < 1:
        return
    anticipated = _anticipated(ctx)
    if not math.isfinite(anticipated.r2):
        return
    r2 = anticipated.r2
    alpha = settings.limit("alpha")
    target = settings.threshold("weakens")
    if anticipated.evidenced:
        effect = planning.f_squared(max(r2, 0.0))
        planned = f"f-squared {fmt(effect)} from anticipated R-squared {fmt(r2)} ({anticipated.origin})"
    else:
        # Observed power of a non-significant fit is below about 50% whatever the rows (Hoenig & Heisey 2001):
        # the rows are judged by the power they give a small effect instead.
        effect = settings.limit("small-effect")
        planned = (
            f"Cohen's small effect f-squared {fmt(effect)}, since {anticipated.no_effect()} and power from the observed "
            "effect would only restate that p-value"
        )
    power = planning.f_test_power(effect, u, v, alpha)
    if not target.crossed(power):
        return
    detectable = planning.detectable_f_squared(u, v, target.value, alpha)
    yield settings.finding(
        Grade.WEAKENS,
        f"power of the overall F test is {power:.1%} (alpha {alpha:g}, {u} tested parameters, {v} residual degrees of freedom) "
        f"for {planned}; "
        f"at {target.value:.0%} power these rows detect only f-squared >= {fmt(detectable)} "
        f"({_cohen_size(detectable)} by Cohen's conventions 0.02 small, 0.15 medium, 0.35 large)",
        columns=_predictor_columns(design),
        value=power,
        threshold=target,
        source=None if anticipated.evidenced else f"{target.source}; {POST_HOC_SOURCE}",
        details={
            "power": power,
            "alpha": alpha,
            "f_squared": effect,
            "anticipated_r2": r2,
            "anticipated_r2_from": anticipated.origin,
            "f_p_value": anticipated.f_p_value,
            "planned_for": "anticipated" if anticipated.evidenced else "small effect",
            "numerator_df": u,
            "denominator_df": v,
            "detectable_f_squared": detectable,
        },
    )


def _cohen_size(f2: float) -> str:
    if f2 < 0.02:
        return "below small"
    if f2 < 0.15:
        return "between small and medium"
    if f2 < 0.35:
        return "between medium and large"
    return "large or more"


CHANCE_INFLATION_ALPHA = 0.01


def _inflation_by_chance(ctx: RunContext, finding: Finding) -> Repair | None:
    """Variance inflation that predictors unrelated to each other would show by chance with this few rows per parameter.

    With ``q`` other predictor columns and ``n`` rows, the auxiliary R-squared
    of a predictor independent of the others (normal, with an intercept) is
    Beta(q/2, (n-q-1)/2); a VIF whose auxiliary R-squared this distribution
    reaches with probability 1% or more (Bonferroni over the q + 1 predictor
    columns) is explained by the sample size, not by a dependency among the
    columns. Findings report the R-squared in
    ``details`` (``auxiliary_r_squared``, or ``vifs`` per column).

    References
    ----------
    Kendall & Stuart (1979), The Advanced Theory of Statistics, vol. 2, sec. 27.29 (null distribution of the
    squared multiple correlation; from memory).
    """
    import scipy.stats

    n, p = ctx.design.n, ctx.design.p
    others = p - 1 - int(ctx.design.intercept)
    if others < 1 or n - others - 1 <= 0:
        return None
    null = scipy.stats.beta(others / 2, (n - others - 1) / 2)

    def settles(other: Finding) -> bool:
        shares = [1.0 - 1.0 / v for v in other.details.get("vifs", {}).values() if v and v > 0]
        if "auxiliary_r_squared" in other.details and other.details.get("df", 1) == 1:
            shares.append(float(other.details["auxiliary_r_squared"]))
        return bool(shares) and all(float(null.sf(share)) * (others + 1) >= CHANCE_INFLATION_ALPHA for share in shares)

    return Repair(f"{n:,} rows for {p:,} parameters", rows=n, settles=settles)


RULES = [
    Rule(
        id="sample-size.per-parameter",
        summary="Complete-case observations per estimated parameter (intercept and every dummy counted); the limits "
        "depend on the purpose: explain (coefficients read as effects) or predict (new rows scored).",
        why="Each parameter spends information. With few rows per parameter the fit chases noise: coefficients "
        "are unstable, R-squared is inflated, and predictions for new rows are worse than the fit suggests. "
        "With no more rows than parameters the fit is not defined at all.",
        remedy="collect more complete rows, or estimate fewer parameters",
        check=_per_parameter,
        thresholds=(
            Threshold("blocks", 1, "definition: least squares needs n > p", Grade.BLOCKS, "<="),
            Threshold("misleads", 10, f"purpose predict; {PER_PARAMETER_SOURCE}", Grade.MISLEADS, "<"),
            Threshold("weakens", 20, f"purpose predict; {PER_PARAMETER_SOURCE}", Grade.WEAKENS, "<"),
            Threshold("explain-misleads", 2, f"purpose explain; {EXPLAIN_SOURCE}", Grade.MISLEADS, "<"),
            Threshold("explain-weakens", 10, f"purpose explain; {PER_PARAMETER_SOURCE}", Grade.WEAKENS, "<"),
        ),
        repair=_inflation_by_chance,
    ),
    Rule(
        id="sample-size.minimum",
        summary="Complete cases against the minimum sample size for a prediction model with a continuous outcome "
        "(four criteria of Riley et al.): shrinkage, R-squared optimism, residual SD and mean outcome precision. "
        "They gate under purpose predict; under purpose explain they inform (at most weakens).",
        why="Too few rows for the number of predictor parameters overfit: the coefficients are too large in magnitude "
        "(they would need shrinking by more than 10% to predict new rows well), the apparent R-squared overstates the "
        "R-squared on new rows, and the residual SD and the mean response are estimated too loosely for prediction "
        "intervals to be trusted. Riley et al. turned each of these into a minimum n; the largest one binds.",
        remedy="collect more complete rows, or estimate fewer predictor parameters",
        check=_minimum,
        thresholds=(
            Threshold("misleads", 0.20, "common practice: short of the binding criterion by 20% or more", Grade.MISLEADS, ">="),
            Threshold("weakens", 0.0, RILEY_SOURCE, Grade.WEAKENS, ">"),
            Threshold("shrinkage", 0.9, RILEY_SOURCE, compare="<"),
            Threshold("r2-gap", 0.05, RILEY_SOURCE, compare=">"),
            Threshold("sd-margin", 1.1, RILEY_SOURCE, compare=">"),
            Threshold("mean-margin", 1.1, RILEY_SOURCE, compare=">"),
        ),
        needs=frozenset({"fit"}),
    ),
    Rule(
        id="sample-size.power",
        summary="Power of the overall F test for the anticipated effect, and the smallest effect detectable at 80% power.",
        why="With too few rows for the number of tested parameters, even a real relationship of the anticipated strength "
        "is likely to go undetected: the overall F test will often fail to reject, and individual coefficients will have "
        "wide confidence intervals. The smallest detectable effect shows what these rows can and cannot reveal.",
        remedy="collect more complete rows or test fewer parameters",
        check=_power,
        thresholds=(
            Threshold("weakens", 0.8, "Cohen (1988), Statistical Power Analysis for the Behavioral Sciences, 2nd ed., sec. 2.4: power 0.80 convention", Grade.WEAKENS, "<"),
            Threshold("alpha", 0.05, "Cohen (1988), sec. 1.4: conventional significance level"),
            Threshold(
                "small-effect",
                0.02,
                "Cohen (1988), sec. 9.2.2: f-squared 0.02 is a small effect; planned for when the preliminary fit's overall F "
                f"test is not significant at {EVIDENCE_ALPHA:g} and no anticipated-r2 is configured ({POST_HOC_SOURCE})",
            ),
        ),
        needs=frozenset({"fit"}),
    ),
]

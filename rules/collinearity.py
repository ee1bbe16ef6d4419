"""Collinearity rules: predictors that are (nearly) linear combinations of each other.

``collinearity.exact`` reports exact dependencies (the only ``blocks`` rule
here); the others describe the design with those columns left out
(:class:`prefit.stats.collinearity.Collinearity`), so no relation is
reported twice.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Iterator

import numpy as np

from prefit.context import RunContext
from prefit.design import INTERCEPT, Design
from prefit.findings import Finding, Grade
from prefit.rule import COMMON_PRACTICE, NotApplicable, Repair, Rule, RuleSettings, Threshold, capped_names, fmt
from prefit.stats.collinearity import SCREEN_MARGIN, Collinearity, NearDependency, TermInflation
from prefit.stats.factor import EPS, DesignFactor, Relation

NEGLIGIBLE = 1e-9
MAX_CONTRIBUTORS = 3
NOTABLE_RELIEF = 0.9

VIF_SOURCE = (
    f"{COMMON_PRACTICE}: VIF above 10 taken as serious (Kutner, Nachtsheim, Neter & Li 2005, Applied Linear "
    "Statistical Models, 5th ed., sec. 10.5, from memory; the same limit in Neter, Wasserman & Kutner 1989, as cited "
    "by secondary sources), 5 or 10 as problematic (James, Witten, Hastie & Tibshirani 2013, An Introduction to "
    "Statistical Learning, sec. 3.3.3: a VIF that exceeds 5 or 10 indicates a problematic amount of collinearity). "
    "Terms of several dummies: GVIF^(1/(2 df)) against the square root of the limit (Fox & Monette 1992, JASA 87, 178-183)"
)
CONDITION_SOURCE = (
    "Belsley, Kuh & Welsch 1980, Regression Diagnostics, ch. 3: condition indices near 10 begin to affect "
    "estimates, 30 to 100 are moderate to strong and above 100 severe, with two or more variance-decomposition proportions above 0.5 (the ranges of their numerical experiments, as quoted by the colldiag implementations for R and Matlab)"
)
PAIRWISE_SOURCE = (
    f"{COMMON_PRACTICE}: |r| of 0.9 and above between two predictors signals harmful collinearity (the limit applied "
    "guides quote; some use 0.75)"
)
PRECISION_SOURCE = (
    "Higham 2002, Accuracy and Stability of Numerical Algorithms, 2nd ed., sec. 20.1 and 20.4 (QR loses about log10(kappa) "
    "of double precision's 16 digits, the normal equations about 2 log10(kappa)); Golub & Van Loan 2013, Matrix "
    "Computations, 4th ed., sec. 5.3; from memory"
)


TRUSTED_DIGITS = 10
CHANCE_CROSSINGS = 1.0
ROOT_RULE = "sample-size.per-parameter"
CHANCE_VIF_SOURCE = (
    "for a predictor unrelated to the k - 1 others, 1 - R^2 of its auxiliary regression on n complete cases "
    "(intercept kept) is Beta((n - k)/2, (k - 1)/2) under normality, so E[VIF] = (n - 3)/(n - k - 2) "
    "(Kendall & Stuart, The Advanced Theory of Statistics, vol. 2, sec. 27.29, from memory); the rule stands aside "
    "when at least one of the k predictors is expected to cross its limit by chance (prefit: a flood of per-column "
    "findings would measure the shortage of rows)"
)


def _shortage(ctx: RunContext) -> str | None:
    """Why no dependency rule can describe this design but the sample-size rule: no more complete rows than parameters.

    With ``n <= p`` the design has rank at most ``n``, so ``p - rank`` columns
    are combinations of the others whatever the data; any set of columns kept
    to compute VIFs or condition indices would be an arbitrary choice.
    """
    design = ctx.design
    if 0 < design.n <= design.p:
        return (
            f"{design.n:,} complete cases for {design.p:,} parameters: with no more rows than parameters the design "
            f"is singular whatever its values; {ROOT_RULE} reports the cause"
        )
    return None


def _inflation_by_chance(ctx: RunContext, vif_limit: float) -> str | None:
    """Why VIFs cannot single out a predictor: so few rows per predictor that unrelated ones would reach ``vif_limit``.

    Returns the reason when at least :data:`CHANCE_CROSSINGS` of the ``k``
    predictors of a pure-noise table of this shape are expected to reach
    ``vif_limit``, else None.
    """
    shortage = _shortage(ctx)
    if shortage is not None:
        return shortage
    design = ctx.design
    k = design.p - 1 if design.intercept else design.p
    a, b = (design.n - k) / 2, (k - 1) / 2
    if k < 2 or a <= 1:
        return None if k < 2 else _chance_reason(design, k, float("inf"), float(k), vif_limit)
    import scipy.stats

    expected = (design.n - 3) / (design.n - k - 2)
    crossings = k * float(scipy.stats.beta.cdf(1.0 / vif_limit, a, b))
    return _chance_reason(design, k, expected, crossings, vif_limit) if crossings >= CHANCE_CROSSINGS else None


def _chance_reason(design: Design, k: int, expected: float, crossings: float, vif_limit: float) -> str:
    return (
        f"{design.n:,} complete cases for {k:,} predictors: even predictors unrelated to each other would have VIFs "
        f"near {fmt(expected)} (about {fmt(crossings)} of them above {fmt(vif_limit)}), so high VIFs here measure "
        f"the shortage of rows, not collinearity; {ROOT_RULE} reports the cause (source: {CHANCE_VIF_SOURCE})"
    )


def _null_space(ctx: RunContext, settings: RuleSettings) -> Finding:
    """One finding for a design with no more rows than parameters: its rank and a basis of its null space, named briefly.

    The columns the pivoted QR placed beyond the rank are each an exact
    combination of the independent ones; naming them (with the independent
    columns in ``details``) names a basis of the null space without writing
    out ``p - rank`` equations of ``rank`` terms each.
    """
    design, factor = ctx.design, ctx.factor
    names, sources = design.column_names, design.column_sources
    rank = factor.rank
    dependent = [names[j] for j in sorted(int(j) for j in factor.perm[rank:])]
    independent = [names[j] for j in sorted(int(j) for j in factor.perm[:rank])]
    columns = list(dict.fromkeys(sources[design.column_index[name]] for name in dependent if name != INTERCEPT))
    return settings.finding(
        Grade.BLOCKS,
        f"{design.n:,} complete cases for {design.p:,} parameters: the design has rank {rank:,}, so {len(dependent):,} "
        f"columns ({capped_names(dependent)}) are each an exact combination of the {rank:,} others whatever their "
        f"values; this follows from the shortage of rows ({ROOT_RULE}), not from a relation in the data",
        columns=columns,
        value=float(rank),
        threshold=float(design.p),
        source="rank of an n x p matrix is at most min(n, p) (Golub & Van Loan 2013, sec. 2.1)",
        remedy=f"collect more complete rows than parameters, or keep at most {max(design.n - 2, 1):,} predictors; "
        "the exact dependencies in the data, if any, can only be told apart once the design has more rows than columns",
        details={"rank": rank, "parameters": design.p, "cause": ROOT_RULE, "dependent": dependent, "independent": independent},
    )


def _coefficient(c: float) -> str:
    """A relation's coefficient for the message, first rounded to 10 significant digits.

    The coefficients of an exact dependency are often round numbers (a floor
    area, a level's count) recovered with rounding noise in the last digits;
    rounding that noise away first means a value such as 13,950 is printed
    the same way whichever side of it the noise fell.
    """
    magnitude = float(f"{abs(c):.{TRUSTED_DIGITS}g}")
    return f"{magnitude:.2f}" if 0.01 <= magnitude < 1000 else f"{magnitude:.3g}"


def _balanced(relation: Relation, factor: DesignFactor) -> tuple[int, list[tuple[int, float]]] | None:
    """Put on the left the column carrying the most weight (a total, not one of its parts); drop negligible terms.

    None when a weight overflowed or fewer than two terms carry weight: the relation
    cannot be written (values beyond double precision, which ``hygiene.non-finite`` reports).
    """
    vector = {relation.left: 1.0, **{j: -c for j, c in zip(relation.right, relation.coefficients)}}
    weight = {j: abs(v) * factor.scales[j] for j, v in vector.items()}
    if not all(np.isfinite(w) for w in weight.values()):
        return None
    top = max(weight.values())
    kept = {j: v for j, v in vector.items() if weight[j] > NEGLIGIBLE * top}
    if len(kept) < 2:
        return None
    left = max(kept, key=lambda j: (weight[j], -j))
    right = [(j, -v / kept[left]) for j, v in sorted(kept.items()) if j != left]
    return left, right


def _equation(design: Design, left: int, right: list[tuple[int, float]]) -> str:
    names = design.column_names
    parts: list[str] = []
    for j, c in right:
        term = f"{_coefficient(c)}*{names[j]}"
        if not parts:
            parts.append(f"-{term}" if c < 0 else term)
        else:
            parts.append(f"{'-' if c < 0 else '+'} {term}")
    return f"{names[left]} = " + " ".join(parts)


def _only_constant(design: Design, left: int, right: list[tuple[int, float]]) -> bool:
    """A constant column against the intercept: hygiene.constant-predictor reports that one."""
    names = design.column_names
    involved = [left] + [j for j, _ in right]
    non_intercept = [j for j in involved if names[j] != INTERCEPT]
    return len(involved) == 2 and len(non_intercept) == 1 and np.ptp(design.X[:, non_intercept[0]]) == 0


def _exact(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design, factor = ctx.design, ctx.factor
    if design.n == 0 or design.p == 0:
        return
    if _shortage(ctx) is not None:
        yield _null_space(ctx, settings)
        return
    relative_tolerance = max(design.n, design.p) * EPS
    top = abs(factor.r[0, 0]) or 1.0
    sources = design.column_sources
    for relation in factor.relations():
        balanced = _balanced(relation, factor)
        if balanced is None:
            continue
        left, right = balanced
        if _only_constant(design, left, right):
            continue
        involved = [left] + [j for j, _ in right]
        columns = list(dict.fromkeys(sources[j] for j in sorted(involved) if sources[j] != INTERCEPT))
        equation = _equation(design, left, right)
        yield settings.finding(
            Grade.BLOCKS,
            f"exact linear dependency among the predictors: {equation}",
            columns=columns,
            value=relation.pivot / top,
            threshold=relative_tolerance,
            source="numerical rank from pivoted QR of the unit-length-scaled design, tolerance max(n, p)*eps (Golub & Van Loan 2013, sec. 5.4)",
            remedy=f"drop one of {', '.join(columns) or 'the named columns'} (for a total and its parts keep either the total or the parts), "
            "or for a one-hot set of dummies drop one level",
            details={
                "equation": equation,
                "left": design.column_names[left],
                "right": {design.column_names[j]: c for j, c in right},
                "rank": factor.rank,
                "parameters": design.p,
            },
        )


def _dependency_dropped(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the relation's left-hand column (the total, or the column carrying most weight) left out."""
    left = finding.details.get("left")
    design = ctx.design
    if left not in design.column_names:
        return None
    source = design.column_sources[design.column_names.index(left)]
    options = ctx.options
    if options.predictors is not None:
        options = replace(options, predictors=tuple(c for c in options.predictors if c != source))
    else:
        options = replace(options, exclude=(*options.exclude, source))
    return Repair(f"{source} left out", rows=design.n, table=ctx.table, options=options)


def _ready(ctx: RunContext) -> bool:
    return ctx.design.n >= 2 and ctx.design.p > 0


def _names(items: list[str]) -> str:
    return ", ".join(items[:-1]) + f" and {items[-1]}" if len(items) > 1 else "".join(items)


def _contributors(relief: tuple[tuple[str, float], ...], current: float) -> list[tuple[str, float]]:
    """The two other terms whose removal brings the most relief, and a third when it cuts the inflation by 10% or more."""
    named = list(relief[:2])
    named += [item for item in relief[2:MAX_CONTRIBUTORS] if item[1] <= NOTABLE_RELIEF * current]
    return named


def _vif_message(term: TermInflation, named: list[tuple[str, float]]) -> str:
    share = f"{100 * term.auxiliary_r_squared:.1f}%"
    if term.df == 1:
        head = (
            f"{term.term}: VIF {fmt(term.gvif)}; the other predictors explain {share} of its variation "
            f"(auxiliary R-squared {term.auxiliary_r_squared:.4f}), so its standard error is {fmt(term.se_inflation)}x "
            "as wide as with uncorrelated predictors"
        )
        unit = "VIF"
    else:
        head = (
            f"{term.term} ({term.df} dummy columns): GVIF^(1/(2 df)) {fmt(term.se_inflation)} (GVIF {fmt(term.gvif)}); "
            f"its coefficients' standard errors are about {fmt(term.se_inflation)}x as wide as with uncorrelated predictors "
            f"(R-squared equivalent {term.auxiliary_r_squared:.4f})"
        )
        unit = "GVIF^(1/df)"
    if not named:
        return head
    reasons = ", ".join(f"{other} ({unit} {fmt(value)} without it)" for other, value in named)
    return f"{head}; explained mostly by {reasons}"


def _unreliable(diagnostics: Collinearity) -> str:
    """A sentence for a finding whose numbers double precision cannot resolve, or nothing."""
    if diagnostics.reliable:
        return ""
    return (
        f"; these numbers are beyond what double precision resolves (relative error up to {fmt(diagnostics.relative_error)}): "
        "read them as 'extremely large', not as values"
    )


def _vif(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _ready(ctx):
        return
    by_chance = _inflation_by_chance(ctx, settings.limit("weakens"))
    if by_chance is not None:
        raise NotApplicable(by_chance)
    diagnostics = ctx.collinearity
    grouped = _grouped_terms(ctx)
    for term in diagnostics.terms:
        if term.term in grouped:
            continue
        graded = settings.grade_of(term.vif_scale)
        if graded is None:
            continue
        grade, limit = graded
        named = _contributors(diagnostics.relief(term), term.vif_scale)
        others = [other for other, _ in named]
        together = _names([term.term, *others])
        if term.df == 1:
            value, threshold = term.gvif, limit.value
            reshape = (
                f"drop or combine {together} (keep one, or replace them by their sum, difference or ratio; "
                "for a total and its parts keep either the total or the parts)"
            )
        else:
            value, threshold = term.se_inflation, float(np.sqrt(limit.value))
            reshape = f"merge levels of {term.term} that coincide with {_names(others) or 'the other predictors'}, or drop one of {together}"
        yield settings.finding(
            grade,
            _vif_message(term, named) + _unreliable(diagnostics),
            columns=[term.term],
            value=value,
            threshold=threshold,
            source=limit.source,
            remedy=f"{reshape}; centre variables before forming powers or products of them; collect rows where they vary "
            "independently; if the model is for prediction only, a penalised (ridge) or component-based (principal "
            "components, partial least squares) fit tolerates it",
            details={
                "gvif": term.gvif,
                "df": term.df,
                "gvif_1_over_df": term.vif_scale,
                "se_inflation": term.se_inflation,
                "auxiliary_r_squared": term.auxiliary_r_squared,
                "explained_by": {other: without for other, without in named},
                "design_columns": list(term.columns),
                "reliable": diagnostics.reliable,
                "relative_error": diagnostics.relative_error,
            },
        )


def _settings_as_run(ctx: RunContext, rule: Rule) -> RuleSettings | None:
    """The settings the engine gives ``rule`` in this run, or None when the run skips it."""
    options = ctx.options
    if rule.id in options.skip_rules or rule.family in options.skip_rules:
        return None
    config = options.rules.get(rule.id) or options.rules.get(rule.family)
    settings = RuleSettings.defaults(rule)
    if config is None:
        return settings
    if not config.enabled:
        return None
    try:
        settings = settings.with_values(config.thresholds)
    except KeyError:
        return settings
    return RuleSettings(settings.rule, settings.thresholds, config.grade, frozenset(config.exempt))


def _pairs_reported_by_vif(ctx: RunContext) -> set[frozenset[str]]:
    """Pairs of predictors a VIF finding names together, or both caught in reported near dependencies."""
    covered: set[frozenset[str]] = set()
    condition = _settings_as_run(ctx, CONDITION_RULE)
    if condition is not None:
        source_of = _sources(ctx)
        sources = sorted({source_of[name] for group in dependency_groups(ctx, condition) for name in group.members})
        covered.update(frozenset((a, b)) for i, a in enumerate(sources) for b in sources[i + 1 :])
    settings = _settings_as_run(ctx, VIF_RULE)
    if settings is None or _inflation_by_chance(ctx, settings.limit("weakens")) is not None:
        return covered
    for finding in _vif(ctx, settings):
        if settings.exempt.intersection(finding.columns):
            continue
        for other in finding.details["explained_by"]:
            covered.add(frozenset((finding.columns[0], other)))
    return covered


def _pairwise(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _ready(ctx):
        return
    shortage = _shortage(ctx)
    if shortage is not None:
        raise NotApplicable(shortage)
    diagnostics = ctx.collinearity
    singles = [term for term in diagnostics.terms if term.df == 1]
    if len(singles) < 2:
        return
    lowest = min(t.value for t in settings.thresholds if t.grade is not None)
    index = [term.indices[0] for term in singles]
    r = diagnostics.correlation[np.ix_(index, index)]
    candidates = np.argwhere(np.triu(np.abs(r) >= lowest, 1))
    if candidates.size == 0:
        return
    covered = _pairs_reported_by_vif(ctx)
    for a, b in candidates:
        first, second = singles[a].term, singles[b].term
        graded = settings.grade_of(abs(float(r[a, b])))
        if graded is None or frozenset((first, second)) in covered:
            continue
        grade, limit = graded
        correlation = float(r[a, b])
        kind = "correlation" if diagnostics.centred else "uncentred correlation (cosine; the model has no intercept)"
        yield settings.finding(
            grade,
            f"{first} and {second} have {kind} {correlation:.4f}: each carries almost the same information, "
            "so the fit cannot tell their effects apart",
            columns=[first, second],
            value=abs(correlation),
            threshold=limit,
            remedy=f"keep one of {first} and {second}, or combine them (their sum, difference or ratio); collect rows where "
            "they vary independently; for prediction only, a penalised (ridge) fit tolerates it",
            details={"r": correlation, "centred": diagnostics.centred},
        )


def _sources(ctx: RunContext) -> dict[str, str]:
    return dict(zip(ctx.design.column_names, ctx.design.column_sources))


@dataclass(frozen=True)
class DependencyGroup:
    """One near dependency to report: its condition index, the design columns it involves and its grade."""

    dependency: NearDependency
    grade: Grade
    limit: Threshold
    members: tuple[str, ...]
    coexisting: tuple[tuple[str, float], ...] = ()


def dependency_groups(ctx: RunContext, settings: RuleSettings) -> list[DependencyGroup]:
    """The near dependencies to report, one per variance-decomposition group, strongest first.

    A group is a condition index at or above the weakest index limit with two
    or more predictors (the intercept aside) whose variance proportions exceed
    the proportion limit (Belsley, Kuh & Welsch 1980, sec. 3.3), kept only when
    it inflates some member's variance to the ``weak-vif`` level: the VIF is a
    slope's variance inflation in the centred design, which gives the same
    slopes, so a high index whose members' VIFs stay low comes from the
    columns' distance from zero (their means large beside their spread, many
    of them together), which only the intercept's precision pays for
    (nonessential ill-conditioning: Marquardt 1980, JASA 75; Snee & Marquardt
    1984, The American Statistician 38, 83-87). ``collinearity.vif`` leaves
    the members of these groups to this finding, which names their VIFs.
    """
    diagnostics = ctx.collinearity
    graded_thresholds = [t for t in settings.thresholds if t.grade is not None]
    inflation = {column: term.vif_scale for term in diagnostics.terms for column in term.columns}
    groups: list[DependencyGroup] = []
    for dependency in diagnostics.near_dependencies(min(t.value for t in graded_thresholds), settings.limit("proportion")):
        predictors = tuple(name for name, _ in dependency.proportions if name != INTERCEPT)
        graded = settings.grade_of(dependency.index)
        if graded is None or len(predictors) < 2:
            continue
        grade, limit = graded
        if max(inflation.get(name, 1.0) for name in predictors) < settings.limit("weak-vif"):
            continue
        groups.append(DependencyGroup(dependency, grade, limit, predictors))
    return _with_coexisting(ctx, groups, settings, inflation)


def coexisting_limit(settings: RuleSettings) -> float:
    """The condition index from which near dependencies count as coexisting: the strongest grade's limit."""
    return max((t for t in settings.thresholds if t.grade is not None), key=lambda t: int(t.grade or 0)).value


def _with_coexisting(
    ctx: RunContext, groups: list[DependencyGroup], settings: RuleSettings, inflation: dict[str, float]
) -> list[DependencyGroup]:
    """Attach predictors inflated by several coexisting near dependencies to the group whose direction weighs most on them.

    When near dependencies coexist, each predictor's variance is split among
    their directions, and no single condition index need hold half of it:
    judged one index at a time, a predictor with a VIF of 200 can belong to no
    group. Its proportions summed over every index at or above the strongest
    limit (two or more of them) show its involvement (Belsley, Kuh & Welsch 1980, sec. 3.3, on
    coexisting and competing dependencies; from memory). Such a predictor,
    inflated to the ``weak-vif`` level, joins the reported group whose
    direction carries most of its variance, or, when no direction holds a
    group of its own, the predictors so attached form one group at the
    strongest index.
    """
    diagnostics = ctx.collinearity
    if not diagnostics.index_may_reach(coexisting_limit(settings)):
        return groups
    indices = np.asarray(diagnostics.condition_indices, dtype=float)
    proportions = np.asarray(diagnostics.variance_proportions, dtype=float)
    strong = np.flatnonzero(indices >= coexisting_limit(settings))
    if strong.size < 2:
        return groups
    names = diagnostics.column_names()
    summed = proportions[strong].sum(axis=0)
    grouped = {name for group in groups for name in group.members}
    leftover = [
        j for j, name in enumerate(names)
        if name != INTERCEPT and name not in grouped and summed[j] > settings.limit("proportion")
        and inflation.get(name, 1.0) >= settings.limit("weak-vif")
    ]
    if not leftover:
        return groups
    home = {id(group): int(np.argmin(np.abs(indices - group.dependency.index))) for group in groups}
    attached: dict[int, list[tuple[str, float]]] = {}
    for j in leftover:
        if groups:
            target = max(range(len(groups)), key=lambda g: (proportions[home[id(groups[g])], j], -g))
        else:
            target = -1
        attached.setdefault(target, []).append((names[j], float(summed[j])))
    out = [
        replace(group, members=group.members + tuple(name for name, _ in attached.get(g, ())), coexisting=tuple(attached.get(g, ())))
        for g, group in enumerate(groups)
    ]
    if -1 in attached and len(attached[-1]) >= 2:
        k = int(strong[np.argmax(indices[strong])])
        graded = settings.grade_of(float(indices[k]))
        if graded is not None:
            dependency = NearDependency(float(indices[k]), tuple((names[j], float(proportions[k, j])) for j in leftover))
            out.append(DependencyGroup(dependency, graded[0], graded[1], tuple(name for name, _ in attached[-1]), tuple(attached[-1])))
    return out


def _grouped_terms(ctx: RunContext) -> set[str]:
    """Terms whose every design column belongs to a near-dependency group that ``collinearity.condition`` reports."""
    settings = _settings_as_run(ctx, CONDITION_RULE)
    if settings is None or not _ready(ctx):
        return set()
    members = {name for group in dependency_groups(ctx, settings) for name in group.members}
    return {term.term for term in ctx.collinearity.terms if set(term.columns) <= members}


def _condition(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _ready(ctx):
        return
    by_chance = _inflation_by_chance(ctx, settings.limit("weak-vif"))
    if by_chance is not None:
        raise NotApplicable(by_chance)
    diagnostics = ctx.collinearity
    source_of = _sources(ctx)
    vif_settings = _settings_as_run(ctx, VIF_RULE)
    inflation = {column: term for term in diagnostics.terms for column in term.columns}
    for group in dependency_groups(ctx, settings):
        dependency = group.dependency
        columns = list(dict.fromkeys(source_of[name] for name in ctx.design.column_names if name in group.members))
        vifs = {name: inflation[name].gvif for name in group.members if name in inflation}
        grade, limit = group.grade, group.limit
        if vif_settings is not None:
            vif_grades = [g for g, _ in filter(None, (vif_settings.grade_of(inflation[name].vif_scale) for name in vifs))]
            grade = max([grade, *vif_grades])
        shares = ", ".join(f"{name} ({share:.2f})" for name, share in dependency.proportions)
        named_vifs = ", ".join(f"{name} {fmt(value)}" for name, value in vifs.items())
        if group.coexisting:
            shares += (
                f"; coexisting near dependencies (condition indices of {coexisting_limit(settings):g} "
                f"and above) also hold most of the variance of {_names([name for name, _ in group.coexisting])} (shares summed over "
                f"them: {', '.join(f'{name} {share:.2f}' for name, share in group.coexisting)})"
            )
        yield settings.finding(
            grade,
            f"near dependency among {_names(columns)}: condition index {fmt(dependency.index)} of the design (columns scaled "
            f"to unit length, intercept kept; condition number {fmt(diagnostics.condition_number)}); share of each "
            f"coefficient's variance in this direction: {shares}; VIFs: {named_vifs or 'none estimable'}{_unreliable(diagnostics)}",
            columns=columns,
            value=dependency.index,
            threshold=limit,
            remedy=f"these columns move together: drop or combine some of {_names(columns)}; centre variables "
            "before forming powers or products of them; collect rows that break the dependence; if the model is for "
            "prediction only, use a penalised (ridge) or component-based fit",
            details={
                "condition_index": dependency.index,
                "proportions": dict(dependency.proportions),
                "coexisting": dict(group.coexisting),
                "vifs": vifs,
                "condition_number": diagnostics.condition_number,
                "condition_indices": [float(v) for v in diagnostics.condition_indices],
                "reliable": diagnostics.reliable,
                "relative_error": diagnostics.relative_error,
            },
        )


def _trust_phrase(coef_digits: float, se_digits: float) -> str:
    parts = []
    for digits, what in ((coef_digits, "coefficients"), (se_digits, "standard errors")):
        if digits < 1:
            parts.append(f"cannot vouch for a single digit of its {what}")
        else:
            parts.append(f"keeps about {digits:.0f} correct significant digits in its {what}")
    return " and ".join(parts)


def _precision(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not _ready(ctx):
        return
    shortage = _shortage(ctx)
    if shortage is not None:
        raise NotApplicable(shortage)
    diagnostics = ctx.collinearity
    # The condition number from the singular values alone screens out a design clearly below every limit, before
    # the full decomposition that gives each column's share.
    screened = diagnostics.condition_raw * (1.0 + SCREEN_MARGIN)
    if not any(t.crossed(screened) for t in settings.thresholds if t.grade is not None):
        return
    worst = diagnostics.raw_dependency()
    kappa = worst.index
    graded = settings.grade_of(kappa)
    if graded is None:
        return
    grade, limit = graded
    lost = float(np.log10(kappa)) if np.isfinite(kappa) else float("inf")
    ranked = sorted((item for item in worst.proportions if item[0] != INTERCEPT), key=lambda item: (-item[1], item[0]))
    named = [name for name, share in ranked if share > 0.5] or [name for name, _ in ranked[:2]]
    source_of = _sources(ctx)
    columns = list(dict.fromkeys(source_of[name] for name in ctx.design.column_names if name in named))
    fit = ctx.fit
    digits = fit.digits
    if digits is None:
        trust = "prefit could not estimate the accuracy of its own fit"
        coef_digits = se_digits = None
    else:
        coef_digits = float(digits.coef.min()) if digits.coef.size else None
        se_digits = float(digits.se.min()) if digits.se.size else None
        trust = (
            f"prefit's own preliminary fit (unit-length scaling, QR, refinement in extended precision) "
            f"{_trust_phrase(coef_digits or 0.0, se_digits or 0.0)}"
        )
    yield settings.finding(
        grade,
        f"the design in its own units has condition number {kappa:.3g}, driven by {_names(named)}: a least-squares "
        f"solver that does not rescale columns loses about {lost:.1f} of double precision's 16 digits, one that forms "
        f"X'X about {min(2 * lost, 16.0):.1f}; {trust}",
        columns=columns,
        value=kappa,
        threshold=limit,
        remedy=f"centre and scale {_names(columns)} before fitting (and before forming powers or products of them); replace "
        "raw powers of one variable by orthogonal polynomials; express columns in units of similar size",
        details={
            "condition_number_raw": kappa,
            "digits_lost": lost,
            "digits_lost_normal_equations": 2 * lost,
            "condition_number_scaled": diagnostics.condition_number,
            "fit_coefficient_digits": coef_digits,
            "fit_standard_error_digits": se_digits,
            "proportions": dict(worst.proportions),
        },
    )


VIF_RULE = Rule(
    id="collinearity.vif",
    summary="Variance inflation factor of each predictor (generalised VIF for a categorical term of several dummies).",
    why="A predictor that the other predictors explain well carries little information of its own: its coefficient is "
    "estimated from the small part of its variation that is unique, so its variance is multiplied by the VIF, "
    "confidence intervals widen by sqrt(VIF), and the estimate swings with small changes in the data.",
    remedy="drop or combine the predictors that explain each other, centre before forming powers or products, collect "
    "data that breaks the dependence, or use a penalised or component-based fit for prediction only",
    check=_vif,
    thresholds=(
        Threshold("weakens", 5.0, VIF_SOURCE, Grade.WEAKENS),
        Threshold("misleads", 10.0, VIF_SOURCE, Grade.MISLEADS),
    ),
)


CONDITION_RULE = Rule(
    id="collinearity.condition",
    summary="One finding per near dependency (condition index and variance-decomposition group): its columns and their VIFs.",
    why="A near dependency among several columns makes the design close to singular: the coefficients of the columns "
    "involved share a direction the data barely determine, so their variances balloon together and their "
    "estimates can change sign with a few rows. Condition indices find every such direction and the variance-"
    "decomposition proportions name the columns caught in it, which pairwise correlations and single VIFs can miss.",
    remedy="drop or combine variables of the dependency, centre before forming powers or products, collect data "
    "that breaks the dependence, or use a penalised or component-based fit for prediction only",
    check=_condition,
    thresholds=(
        Threshold("weakens", 10.0, CONDITION_SOURCE, Grade.WEAKENS),
        Threshold("misleads", 30.0, CONDITION_SOURCE, Grade.MISLEADS),
        Threshold("proportion", 0.5, CONDITION_SOURCE),
        Threshold(
            "weak-vif",
            5.0,
            "prefit: a dependency is reported only when it inflates some involved predictor's variance to the VIF "
            "weakens level, at any condition index; one between the intercept and predictors whose VIFs stay low is "
            "nonessential ill-conditioning, which centring removes without changing a slope (Marquardt 1980, "
            "JASA 75, 87-91; Snee & Marquardt 1984, The American Statistician 38, 83-87; from memory); prefit's "
            "calibration study: with the index alone, a correlated pair (r = 0.6, VIFs 1.6) among 30 predictors of "
            "mean five SDs from zero drew misleads on every clean table",
        ),
    ),
)


RULES = [
    Rule(
        id="collinearity.exact",
        summary="Predictors that are exact linear combinations of others (a total and its parts, duplicated columns, the dummy trap).",
        why="When one design column is an exact combination of others, X'X is singular: infinitely many coefficient "
        "vectors give the same fit, so the individual coefficients are not defined. Software then either fails, "
        "silently drops a column of its own choosing, or prints huge, meaningless estimates and standard errors.",
        remedy="drop one of the columns in the relation, or replace a total by its parts (or the reverse)",
        check=_exact,
        grades=(Grade.BLOCKS,),
        repair=_dependency_dropped,
    ),
    VIF_RULE,
    CONDITION_RULE,
    Rule(
        id="collinearity.pairwise",
        summary="Pairs of predictors with a very high correlation that the VIF findings do not already name.",
        why="Two predictors that move almost in lockstep carry nearly the same information; the fit can estimate their "
        "joint effect but not how to split it between them, so their coefficients are unstable and may take "
        "opposite signs.",
        remedy="keep one of the pair or combine them, collect rows where they vary independently, or use a penalised fit "
        "for prediction only",
        check=_pairwise,
        thresholds=(
            Threshold("weakens", 0.9, PAIRWISE_SOURCE, Grade.WEAKENS),
            Threshold("misleads", 0.98, PAIRWISE_SOURCE, Grade.MISLEADS),
        ),
    ),
    Rule(
        id="collinearity.precision",
        summary="Digits of double precision a least-squares solver loses to the design's condition number in its own units.",
        why="Floating-point least squares loses about log10(kappa) of its 16 significant digits to the condition number "
        "kappa of the design as given (twice that when it forms X'X). Raw powers of a variable and columns in wildly "
        "different units make kappa huge, so a solver can return coefficients whose leading digits are rounding noise "
        "with no warning at all.",
        remedy="centre and scale the columns, use orthogonal polynomials instead of raw powers, and express columns in "
        "units of similar size",
        check=_precision,
        needs=frozenset({"fit"}),
        thresholds=(
            Threshold(
                "note",
                1e6,
                "kappa(X'X) = kappa^2 >= 1e12: a solver that forms the normal equations keeps fewer than 4 digits "
                "(Higham 2002, sec. 20.4; from memory)",
                Grade.NOTE,
            ),
            Threshold("weakens", 1e8, PRECISION_SOURCE, Grade.WEAKENS),
            Threshold("misleads", 1e12, PRECISION_SOURCE, Grade.MISLEADS),
        ),
    ),
]

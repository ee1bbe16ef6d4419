"""Missingness rules: what holes in the table cost the fit, and holes that pretend to be numbers."""

from __future__ import annotations

import json
import re
from typing import Iterator

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from prefit.context import RunContext
from prefit.design import category_codes
from prefit.findings import Finding, Grade
from prefit.roles import Kind, apply_missing_codes
from prefit.rule import COMMON_PRACTICE, Repair, Rule, RuleSettings, Threshold, capped_names, fmt
from prefit.stats.blas import one_blas_thread
from prefit.stats.missingness import PatternMoments, little_mcar, pattern_index
from prefit.stats.ranks import RankedColumn
from prefit.stats.sentinels import Sentinel, SentinelLimits, find_sentinels, sentinel_free
from prefit.stats.textnumbers import is_text_type, mostly_number_like, parsed_values, placeholder_levels

PER_PARAMETER_SOURCE = (
    "common practice: at least 10 observations per estimated parameter (the one-in-ten rule: Harrell, Lee & Mark 1996, "
    "Stat. Med. 15; Peduzzi et al. 1996, J. Clin. Epidemiol. 49; Harrell 2015, Regression Modeling Strategies, 2nd ed., "
    "sec. 4.4, pp. 72-73, about 15 per parameter of the limiting sample size, as quoted by secondary sources)"
)
RATE_WEAKENS_SOURCE = (
    "Schafer (1999), Multiple imputation: a primer, Stat. Methods Med. Res. 8: up to 5% missing is "
    "inconsequential (from memory)"
)
RATE_MISLEADS_SOURCE = (
    "Jakobsen et al. (2017), BMC Med. Res. Methodol. 17:162: above 40% missing, results are hypothesis-generating "
    "only (from memory)"
)
COMPLETE_CASE_BIAS_SOURCE = (
    "White & Carlin (2010), Stat. Med. 29: complete-case regression is unbiased when missingness does not "
    "depend on the outcome given the predictors, biased when it does"
)
PATTERN_SHOWN = 5
SQUARE_SAFE = float(np.sqrt(np.finfo(np.float64).max))
INFORMATIVE_MIN_GROUP = 5
BOUND_SOURCE = (
    "prefit: a bound on the work, so that a table of thousands of columns costs what one of this many does; "
    "the test stays valid on any subset of the columns, it only sees fewer of the columns the holes might depend on"
)


def bounded_columns(columns: tuple[str, ...], holes: dict[str, int], first: str | None, limit: int) -> tuple[str, ...]:
    """At most ``limit`` of ``columns``, in their order: those with the most holes, then ``first``, then the rest in order.

    All of them when there are no more than ``limit``. Used by the tests whose
    cost grows faster than the number of columns (Little's EM, the pairwise
    informative-missingness comparisons) to stay within a fixed width.
    """
    if len(columns) <= limit:
        return columns
    position = {column: i for i, column in enumerate(columns)}
    holed = sorted((c for c in columns if holes.get(c, 0) > 0), key=lambda c: (-holes[c], position[c]))
    rest = [c for c in columns if holes.get(c, 0) == 0]
    if first in position and first in rest:
        rest = [first] + [c for c in rest if c != first]
    chosen = (holed + rest)[:limit]
    return tuple(sorted(chosen, key=position.__getitem__))


def _code_label(value: float) -> str:
    return str(int(value)) if float(value).is_integer() else repr(float(value))


def _config_hint(column: str, codes: list[str]) -> str:
    listed = ", ".join(c if _is_number_text(c) else json.dumps(c) for c in codes)
    key = column if re.fullmatch(r"[A-Za-z0-9_-]+", column) else json.dumps(column)
    flag = ",".join(codes)
    flag_part = f"`--missing-codes {column}={flag}`" if all(codes) and "," not in "".join(codes) else None
    config_part = f"`missing-codes = {{ {key} = [{listed}] }}` in prefit.toml"
    return f"{flag_part} on the command line or {config_part}" if flag_part else config_part


def _is_number_text(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


# ---------------------------------------------------------------- column-rate


def _column_rate(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    holes = ctx.holes
    rows = ctx.table.num_rows
    for column, missing in holes.counts().items():
        if missing == 0:
            continue
        share = missing / rows
        graded = settings.grade_of(share)
        if graded is None:
            continue
        grade, limit = graded
        role = "target" if column == ctx.roles.target else "predictor"
        listed, _, total = ctx.listed_rows(np.flatnonzero(holes.missing(column)))
        yield settings.finding(
            grade,
            f"{role} {column} is missing in {missing:,} of {rows:,} rows ({share:.1%}), above {limit.value:.0%}",
            columns=[column],
            rows=listed,
            row_count=total,
            value=share,
            threshold=limit,
            remedy=f"recover {column} at the source; if it cannot be recovered, use multiple imputation "
            f"(with the target among the imputation variables) rather than deleting rows, or drop {column} if it adds little",
            details={"missing": missing, "rows": rows},
        )


# ---------------------------------------------------------------- complete-cases


def _complete_cases(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    if not ctx.target_is_numeric:
        return
    design = ctx.design
    total = design.table_rows
    dropped = total - design.n
    if dropped == 0:
        return
    share = dropped / total
    by_column = {c: k for c, k in design.missing_by_column.items() if k}
    mask = ctx.holes.mask
    only_one = mask.sum(axis=1) == 1
    alone = {c: int((only_one & mask[:, j]).sum()) for j, c in enumerate(ctx.holes.columns) if c in by_column}
    worst = max(by_column, key=lambda c: (by_column[c], c)) if by_column else None
    p = design.p
    per_parameter = design.n / p if p else float("nan")
    grade, limit, source = _complete_case_grade(settings, design.n, p, total, share)
    costs = "; ".join(f"{c} {by_column[c]:,} ({alone.get(c, 0):,} by itself)" for c in sorted(by_column, key=lambda c: (-by_column[c], c)))
    message = (
        f"listwise deletion drops {dropped:,} of {total:,} rows ({share:.1%}); {design.n:,} complete cases remain "
        f"({fmt(per_parameter)} per parameter, {p} parameters); rows missing per column: {costs}"
    )
    yield settings.finding(
        grade,
        message,
        columns=sorted(by_column, key=lambda c: (-by_column[c], c)),
        value=share,
        threshold=limit,
        source=source,
        remedy=f"recover the missing values at the source, starting with {worst}; if they cannot be recovered, "
        "use multiple imputation rather than deleting rows, or drop a predictor that costs many rows by itself and adds little",
        details={
            "rows": total,
            "complete_cases": design.n,
            "rows_dropped": dropped,
            "parameters": p,
            "per_parameter": per_parameter,
            "rows_lost_by_column": by_column,
            "rows_lost_by_column_alone": alone,
        },
    )


def _complete_case_grade(
    settings: RuleSettings, n: int, p: int, total: int, share: float
) -> tuple[Grade, Threshold | None, str]:
    """Grade by the share of rows lost, raised when deletion leaves too few rows for the model."""
    if n == 0:
        limit = settings.threshold("blocks")
        return Grade.BLOCKS, limit, limit.source
    if p and n <= p < total:
        return Grade.BLOCKS, None, "definition: least squares needs more complete cases than parameters"
    graded = settings.grade_of(share)
    grade: Grade = graded[0] if graded else Grade.NOTE
    crossed: Threshold | None = graded[1] if graded else None
    per_parameter = settings.threshold("per-parameter")
    if p and n / p < per_parameter.value <= total / p and grade < Grade.MISLEADS:
        return Grade.MISLEADS, None, f"deletion leaves fewer than {per_parameter.value:g} rows per parameter: {per_parameter.source}"
    return grade, crossed, crossed.source if crossed else COMMON_PRACTICE


# ---------------------------------------------------------------- pattern


def _pattern(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    patterns = ctx.holes.patterns
    incomplete = patterns.incomplete()
    if not incomplete:
        return
    rows = patterns.rows
    top_pattern, top_count = incomplete[0]
    top_share = top_count / rows
    limit = settings.threshold("weakens")
    grade = Grade.WEAKENS if limit.crossed(top_share) else Grade.NOTE
    shown = [
        f"{{{', '.join(patterns.missing_columns(pattern))}}} {count:,} rows ({count / rows:.1%})"
        for pattern, count in incomplete[:PATTERN_SHOWN]
    ]
    monotone = patterns.is_monotone()
    if len(incomplete) == 1:
        shape = "one pattern only"
    elif monotone:
        shape = "monotone: the sets of missing columns are nested, as drop-out produces"
    else:
        shape = "not monotone"
    more = f" and {len(incomplete) - PATTERN_SHOWN} more" if len(incomplete) > PATTERN_SHOWN else ""
    missing_columns = [c for j, c in enumerate(patterns.columns) if any(p[j] for p, _ in incomplete)]
    yield settings.finding(
        grade,
        f"{len(incomplete)} pattern(s) of missing values ({shape}); most common: {'; '.join(shown)}{more}",
        columns=missing_columns,
        value=top_share,
        threshold=limit,
        remedy=f"find the cause of the most common pattern ({', '.join(patterns.missing_columns(top_pattern))} missing together): "
        "one failing feed or export step is cheaper to fix than many scattered holes; for drop-out, model it or impute, do not delete",
        details={
            "patterns": [
                {"missing": list(patterns.missing_columns(p)), "rows": c} for p, c in incomplete[:PATTERN_SHOWN * 2]
            ],
            "distinct_patterns": len(incomplete),
            "monotone": monotone,
        },
    )


# ---------------------------------------------------------------- disguised-codes


def _disguised_codes(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    roles = ctx.roles
    in_design = set(ctx.model_columns)
    candidates = [*ctx.model_columns, *(c for c in roles.left_out if c not in in_design)]
    limits = SentinelLimits(
        gap_to_spacing=settings.limit("gap-to-spacing"),
        code_distance=settings.limit("code-distance"),
        plain_distance=settings.limit("plain-distance"),
        repeat_contrast=settings.limit("repeat-contrast"),
        zero_share=settings.limit("zero-share"),
    )
    free = _without_codes(ctx, [c for c in candidates if roles.kinds[c] is Kind.NUMERIC], limits)
    for column in candidates:
        kind = roles.kinds[column]
        if column in free:
            continue
        table_column = ctx.table.column(column)
        tokens: dict[str, int] = {}
        if kind is Kind.NUMERIC:
            values = ctx.values(column)
        elif is_text_type(table_column.type) and mostly_number_like(table_column) and ctx.text_numbers(column).is_numeric:
            tokens = ctx.text_numbers(column).missing_tokens
            values = parsed_values(table_column)
        elif kind is Kind.CATEGORICAL and is_text_type(table_column.type):
            tokens = placeholder_levels(table_column)
            values = np.empty(0)
        else:
            continue
        sentinels = find_sentinels(values, limits)
        if not sentinels and not tokens:
            continue
        yield _codes_finding(ctx, settings, column, kind, values, sentinels, tokens)


SCREEN_VALUES = 4_000_000
SCREEN_ROWS = 4_096


def _without_codes(ctx: RunContext, columns: list[str], limits: SentinelLimits) -> set[str]:
    """Numeric columns without missing values that :func:`sentinel_free` clears many at a time (a wide table's short columns)."""
    if ctx.table.num_rows > SCREEN_ROWS or len(columns) < 2:
        return set()  # a long column's own search already looks at its edges only (find_sentinels)
    whole = [c for c in columns if not np.isnan(ctx.values(c)).any()]
    step = max(1, SCREEN_VALUES // max(ctx.table.num_rows, 1))
    free: set[str] = set()
    for start in range(0, len(whole), step):
        chosen = whole[start : start + step]
        cleared = sentinel_free(np.column_stack([ctx.values(c) for c in chosen]), limits)
        free.update(c for c, ok in zip(chosen, cleared.tolist()) if ok)
    return free


def _codes_finding(
    ctx: RunContext,
    settings: RuleSettings,
    column: str,
    kind: Kind,
    values: np.ndarray,
    sentinels: list[Sentinel],
    tokens: dict[str, int],
) -> Finding:
    rows = ctx.table.num_rows
    parts = [
        f"{_code_label(s.value)} in {s.count:,} rows ({s.reason}; gap {fmt(s.gap)} to the nearest other value, "
        f"{fmt(s.gap_in_scales)} robust SD)"
        for s in sentinels
    ]
    ordered_tokens = sorted(tokens, key=lambda t: (-tokens[t], t))
    as_levels = kind is Kind.CATEGORICAL and values.size == 0  # a text category: no numbers, only levels
    where = "a level of a category" if as_levels else "text in a column of numbers"
    parts += [f"{t!r} in {tokens[t]:,} rows ({where})" for t in ordered_tokens]
    affected = sum(s.count for s in sentinels) + sum(tokens.values())
    is_design = column in ctx.model_columns
    role = "target" if column == ctx.roles.target else ("predictor" if is_design else "column left out of the design")
    grade = Grade.MISLEADS if is_design and not as_levels else Grade.WEAKENS
    if kind is Kind.NUMERIC:
        effect = "left in, they act as gross outliers and pull the fit toward them"
    elif as_levels:
        effect = "each becomes a level of its own, with its own coefficient, instead of a hole"
    elif tokens:
        effect = "they keep the column from being read as numbers" + ("" if is_design else ", so it is left out of the model")
    else:
        effect = "once the column is read as numbers they act as gross outliers"
    codes = [_code_label(s.value) for s in sentinels] + ordered_tokens
    at_code = np.isin(values, np.array([s.value for s in sentinels])) if sentinels else np.zeros(rows, dtype=bool)
    if tokens:
        stripped = pc.utf8_trim_whitespace(ctx.table.column(column))
        at_code |= pc.is_in(stripped, value_set=pa.array(ordered_tokens, pa.string())).fill_null(False).to_numpy(zero_copy_only=False)
    listed, _, _ = ctx.listed_rows(np.flatnonzero(at_code))
    return settings.finding(
        grade,
        f"{role} {column} holds value(s) that stand in for missing: {'; '.join(parts)}; {effect}",
        columns=[column],
        rows=listed,
        row_count=affected,
        value=affected / rows,
        source="Pearson (2006), The problem of disguised missing data, SIGKDD Explorations 8(1)",
        remedy=f"if these mean missing, declare them: {_config_hint(column, codes)}; prefit then counts them as holes "
        "(check the missingness findings that follow); otherwise correct them at the source",
        details={
            "codes": [{"value": s.value, "rows": s.count, "reason": s.reason, "gap": s.gap} for s in sentinels],
            "tokens": {t: tokens[t] for t in ordered_tokens},
        },
    )


def _codes_set_missing(ctx: RunContext, finding: Finding) -> Repair | None:
    """The table with the finding's codes set missing, as ``--missing-codes`` would declare them."""
    (column,) = finding.columns
    codes = tuple(_code_label(code["value"]) for code in finding.details.get("codes", ())) + tuple(finding.details.get("tokens", {}))
    if not codes:
        return None
    table, replaced = apply_missing_codes(ctx.table, {column: codes})
    return Repair(f"{column} with {', '.join(codes)} set missing", rows=replaced.get(column, 0), table=table)


# ---------------------------------------------------------------- mcar


def _mcar(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    candidates = tuple(c for c in ctx.model_columns if ctx.roles.kinds[c] is Kind.NUMERIC)
    if len(candidates) < 2 or ctx.table.num_rows == 0:
        return
    holes = ctx.holes
    hole_counts = holes.counts()
    arrays: dict[str, np.ndarray] = {}
    present: dict[str, int] = {}
    largest: dict[str, float] = {}
    extra_holes = False
    for column in candidates:
        values, count, low, high = _usable_values(ctx.values(column), ctx.table.num_rows - hole_counts[column])
        extra_holes |= count < ctx.table.num_rows - hole_counts[column]
        if count > 1 and high > low:
            arrays[column], present[column], largest[column] = values, count, max(abs(low), abs(high))
    usable = tuple(arrays)
    holes_by_column = {c: ctx.table.num_rows - present[c] for c in usable}
    columns = bounded_columns(usable, holes_by_column, ctx.roles.target, int(settings.limit("columns")))
    missing = [c for c in columns if present[c] < ctx.table.num_rows]
    if len(columns) < 2 or not missing:
        return
    if extra_holes:
        masks, row_group, _ = pattern_index(np.column_stack([np.isnan(arrays[c]) for c in columns]))
    else:
        row_group, masks = holes.row_pattern, holes.pattern_masks[:, [holes.columns.index(c) for c in columns]]
    # Little's statistic is invariant to rescaling a column; at most 1 in magnitude, no sum of squares overflows.
    scales = np.array([largest[c] for c in columns])
    moments = PatternMoments.grouped(columns, [arrays[c] for c in columns], row_group, masks, scales).standardized()
    with one_blas_thread():
        test = little_mcar(moments)
    if test is None:
        return
    limit = settings.threshold("weakens")
    if not limit.crossed(test.p_value):
        return
    converged = "" if test.converged else " (the EM estimate did not converge; treat the statistic with care)"
    over = f"{len(columns)} numeric columns"
    if len(columns) < len(usable):
        over = (
            f"{len(columns)} of the {len(usable):,} numeric columns ({len(missing)} with holes, {len(columns) - len(missing)} "
            f"without; the test is bounded to {len(columns)} columns: {capped_names(list(columns))})"
        )
    yield settings.finding(
        Grade.WEAKENS,
        f"Little's test rejects missing completely at random over {over}: chi-square "
        f"{fmt(test.statistic)} on {test.df} df, p = {test.p_value:.3g} ({test.patterns} patterns, {test.rows:,} rows){converged}; "
        "the complete cases are not a random subsample, so complete-case estimates may be biased",
        columns=missing,
        value=test.p_value,
        threshold=limit,
        remedy="see missingness.informative for which columns the holes depend on; prefer multiple imputation "
        "using those columns over deleting rows",
        details={
            "statistic": test.statistic,
            "df": test.df,
            "p_value": test.p_value,
            "patterns": test.patterns,
            "columns": list(columns),
            "numeric_columns": len(usable),
        },
    )


def _usable_values(values: np.ndarray, present: int) -> tuple[np.ndarray, int, float, float]:
    """A numeric column with NaN also where it is infinite or too large to square, its count of values, their least and largest.

    ``present`` counts the values that are not NaN; the column is copied only
    when it holds an infinite or oversized value. Without values the bounds are 0.
    """
    if present > 0:
        low, high = float(np.fmin.reduce(values)), float(np.fmax.reduce(values))
        if -SQUARE_SAFE <= low and high <= SQUARE_SAFE:
            return values, present, low, high
    usable = np.isfinite(values) & (np.abs(values) <= SQUARE_SAFE)
    count = int(np.count_nonzero(usable))
    kept = np.where(usable, values, np.nan)
    return kept, count, float(np.nanmin(kept)) if count else 0.0, float(np.nanmax(kept)) if count else 0.0


# ---------------------------------------------------------------- informative


def _informative(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    holes = ctx.holes
    rows = ctx.table.num_rows
    holed = {
        column: np.flatnonzero(holes.missing(column))
        for column, count in holes.counts().items()
        if INFORMATIVE_MIN_GROUP <= count <= rows - INFORMATIVE_MIN_GROUP
    }
    partners = bounded_columns(ctx.model_columns, holes.counts(), ctx.roles.target, int(settings.limit("columns")))
    compared: dict[tuple[str, str], tuple[float, str]] = {}
    for other in partners:
        others = {column: hole_rows for column, hole_rows in holed.items() if column != other}
        if others:
            for column, result in _compare(ctx, other, others).items():
                compared[(column, other)] = result
    tests = [(c, o, *compared[(c, o)]) for c in holed for o in partners if (c, o) in compared]
    if not tests:
        return
    adjusted = _holm([t[2] for t in tests])
    alpha = settings.limit("alpha")
    scope = ""
    if len(partners) < len(ctx.model_columns):
        scope = (
            f" (each column's holes were compared with {len(partners)} of the {len(ctx.model_columns):,} model columns, "
            "those with the most holes and the target first; Holm's adjustment covers those comparisons)"
        )
    target = ctx.roles.target
    for column in holes.columns:
        hits = [(other, p, text) for (c, other, _, text), p in zip(tests, adjusted) if c == column and p < alpha]
        if not hits:
            continue
        hits.sort(key=lambda h: (h[0] != target, h[1], h[0]))
        with_target = column != target and any(other == target for other, _, _ in hits)
        grade = Grade.MISLEADS if with_target else Grade.NOTE
        described = "; ".join(f"{text} (Holm p = {p:.2g})" for _, p, text in hits)
        consequence = (
            "the holes depend on the response, so the complete cases are a biased sample and complete-case "
            "coefficients are biased"
            if with_target
            else "missing at random given these columns: complete-case regression stays unbiased only if they are in the model"
        )
        yield settings.finding(
            grade,
            f"whether {column} is missing is associated with {', '.join(h[0] for h in hits)}: {described}; {consequence}{scope}",
            columns=[column, *(h[0] for h in hits)],
            value=hits[0][1],
            threshold=alpha,
            source=COMPLETE_CASE_BIAS_SOURCE if with_target else "Holm (1979) step-down control of the familywise error rate",
            remedy=f"do not delete rows missing {column}: use multiple imputation with {', '.join(h[0] for h in hits)} "
            "among the imputation variables, or model the missingness (selection or pattern-mixture model)"
            if with_target
            else f"keep {', '.join(h[0] for h in hits)} in the model, or impute {column} from them",
            details={"associations": [{"column": o, "p_holm": p, "comparison": t} for o, p, t in hits]},
        )


def _compare(ctx: RunContext, other: str, holed: dict[str, np.ndarray]) -> dict[str, tuple[float, str]]:
    """Two-sided tests of whether ``other`` differs between the rows where each holed column is missing and the rest.

    ``holed`` maps each column to the rows where it is missing. Only rows
    where ``other`` is present take part. Numeric and date columns:
    Mann-Whitney U (robust to the gross outliers that undeclared codes
    produce), with ``other`` ranked once for all columns; categories:
    Pearson's chi-square test of the levels x missing table. Columns whose
    comparison has fewer than five rows on either side are left out.

    References
    ----------
    Mann, H. B., Whitney, D. R. (1947). Ann. Math. Stat. 18(1).
    Pearson, K. (1900). Philosophical Magazine 50(302).
    """
    import scipy.stats

    kind = ctx.roles.kinds[other]
    if kind in (Kind.NUMERIC, Kind.DATETIME):
        return _compare_numeric(other, RankedColumn.of(ctx.values(other)), holed)
    codes, levels = category_codes(ctx.table.column(other), kind)
    usable = ~ctx.holes.missing(other)
    per_level = np.bincount(codes[usable], minlength=len(levels)).astype(np.float64)
    present_levels = [levels[i] for i in range(len(levels)) if per_level[i] > 0]
    results: dict[str, tuple[float, str]] = {}
    for column, hole_rows in holed.items():
        table = np.zeros((len(levels), 2))
        table[:, 0] = np.bincount(codes[hole_rows[usable[hole_rows]]], minlength=len(levels))
        table[:, 1] = per_level - table[:, 0]
        if table[:, 0].sum() < INFORMATIVE_MIN_GROUP or table[:, 1].sum() < INFORMATIVE_MIN_GROUP:
            continue
        table = table[table.sum(axis=1) > 0]
        if table.shape[0] < 2:
            continue
        result = scipy.stats.chi2_contingency(table, correction=False)
        share_missing = table[:, 0] / table.sum(axis=1)
        worst = int(np.argmax(share_missing))
        results[column] = (
            float(result.pvalue),
            f"{column} is most often missing at {other} = {present_levels[worst]!r} ({share_missing[worst]:.0%} of its rows)",
        )
    return results


def _compare_numeric(other: str, ranked: RankedColumn, holed: dict[str, np.ndarray]) -> dict[str, tuple[float, str]]:
    if ranked.size < 2 * INFORMATIVE_MIN_GROUP or ranked.at(0) == ranked.at(ranked.size - 1):
        return {}
    results: dict[str, tuple[float, str]] = {}
    for column, hole_rows in holed.items():
        split = ranked.split(hole_rows, INFORMATIVE_MIN_GROUP)
        if split is None:
            continue
        direction = "higher" if split.group_median > split.rest_median else "lower"
        results[column] = (
            split.p_value,
            f"{other} is {direction} where {column} is missing (median {fmt(split.group_median)} vs {fmt(split.rest_median)})",
        )
    return results


def _holm(p_values: list[float]) -> list[float]:
    """Holm's step-down adjusted p-values (Holm 1979)."""
    m = len(p_values)
    order = np.argsort(p_values, kind="stable")
    adjusted = np.empty(m)
    running = 0.0
    for rank, index in enumerate(order):
        running = max(running, min(1.0, (m - rank) * p_values[index]))
        adjusted[index] = running
    return adjusted.tolist()


_SENTINEL_DEFAULTS = SentinelLimits()

RULES = [
    Rule(
        id="missingness.column-rate",
        summary="Share of rows missing each model column (target and predictors).",
        why="Every hole in a model column removes its row from a least-squares fit. A column missing in many "
        "rows costs precision, and when its holes are not random it biases the sample that remains.",
        remedy="recover the values at the source, impute with multiple imputation, or drop the column",
        check=_column_rate,
        thresholds=(
            Threshold("misleads", 0.40, RATE_MISLEADS_SOURCE, Grade.MISLEADS, ">"),
            Threshold("weakens", 0.05, RATE_WEAKENS_SOURCE, Grade.WEAKENS, ">"),
        ),
    ),
    Rule(
        id="missingness.complete-cases",
        summary="Rows dropped by listwise deletion, what each column costs, and what remains per parameter.",
        why="Least-squares software silently drops every row with a hole in the target or any predictor. The fit "
        "then rests on fewer rows than the table suggests, and if the holes are not random (a sensor that fails in "
        "heat, a site that reports late) the remaining rows are a biased sample.",
        remedy="recover missing values at the source, or use multiple imputation instead of deletion",
        check=_complete_cases,
        thresholds=(
            Threshold("blocks", 1.0, "definition: without more complete cases than parameters there is nothing to fit", Grade.BLOCKS, ">="),
            Threshold("misleads", 0.30, COMMON_PRACTICE, Grade.MISLEADS, ">"),
            Threshold("weakens", 0.10, COMMON_PRACTICE, Grade.WEAKENS, ">"),
            Threshold("per-parameter", 10, PER_PARAMETER_SOURCE),
        ),
        grades=(Grade.NOTE,),
    ),
    Rule(
        id="missingness.pattern",
        summary="The distinct row patterns of missing values, the most common ones, and whether they are monotone.",
        why="Holes that come together (several columns missing in the same rows) point to one cause: a feed that "
        "failed, a site that reports less, a drop-out. One frequent pattern that removes many rows is a single "
        "cause worth fixing; a monotone pattern is typical of drop-out, which is rarely random.",
        remedy="trace the most common pattern to its cause and fix it there",
        check=_pattern,
        thresholds=(Threshold("weakens", 0.10, COMMON_PRACTICE, Grade.WEAKENS, ">"),),
        grades=(Grade.NOTE,),
    ),
    Rule(
        id="missingness.disguised-codes",
        summary="Values that stand in for missing: -999-like sentinels, implausible zeros, text such as 'N/A' among numbers.",
        why="A missing value coded as -999 or 0 is read as a measurement. Far outside the real values, each such "
        "row has high leverage or a huge residual and drags the slope toward it; the fit looks complete while it "
        "rests on invented numbers. Text codes ('N/A', '?') in a numeric column make the whole column text, so it "
        "is lost to the model or turned into one dummy per distinct number.",
        remedy="declare the codes as missing with missing-codes (config) or --missing-codes (command line)",
        check=_disguised_codes,
        grades=(Grade.MISLEADS, Grade.WEAKENS),
        thresholds=(
            Threshold("gap-to-spacing", _SENTINEL_DEFAULTS.gap_to_spacing, f"{COMMON_PRACTICE}: gap to the rest, in spacings of the rest's edge values"),
            Threshold("code-distance", _SENTINEL_DEFAULTS.code_distance, f"{COMMON_PRACTICE}: robust SDs (Rousseeuw & Croux 1993) from the median for a code-shaped value"),
            Threshold("plain-distance", _SENTINEL_DEFAULTS.plain_distance, f"{COMMON_PRACTICE}: robust SDs from the median for a repeated value of any shape"),
            Threshold("repeat-contrast", _SENTINEL_DEFAULTS.repeat_contrast, f"{COMMON_PRACTICE}: times as often as a typical value repeats (a site attribute repeated per day is no code)"),
            Threshold("zero-share", _SENTINEL_DEFAULTS.zero_share, f"{COMMON_PRACTICE}: largest share of rows at zero for zero to count as a code"),
        ),
        repair=_codes_set_missing,
    ),
    Rule(
        id="missingness.mcar",
        summary="Little's chi-square test of missing completely at random over the numeric model columns.",
        why="Little's test compares the means of each missingness pattern with the overall maximum-likelihood means; "
        "a small p-value says the incomplete rows differ systematically from the complete ones (the holes are not "
        "missing completely at random). For regression coefficients that alone does not make deleting incomplete "
        "rows biased: complete-case estimates stay unbiased whenever the holes do not depend on the response given "
        "the predictors (Little 1992, JASA 87; White & Carlin 2010, Statistics in Medicine 29). It does mean the "
        "complete rows are not a random part of the table, so check what the holes follow (missingness.informative).",
        remedy="find which columns the holes depend on (missingness.informative) and impute using them",
        check=_mcar,
        heavy=True,
        thresholds=(
            Threshold("columns", 40, BOUND_SOURCE),
            Threshold(
                "weakens",
                0.05,
                "Little (1988), JASA 83(404), chi-square test at the conventional 5% level",
                Grade.WEAKENS,
                "<",
            ),
        ),
    ),
    Rule(
        id="missingness.informative",
        summary="Whether a column's holes are associated with the target or with other predictors (Holm-adjusted tests).",
        why="When whether a predictor is missing depends on the response (door counts lost on the busiest days), "
        "the complete cases over- or under-represent some responses and every coefficient is biased. When it "
        "depends only on other predictors in the model, complete-case regression stays unbiased.",
        remedy="use multiple imputation with the associated columns, or model the missingness; do not delete rows",
        check=_informative,
        heavy=True,
        thresholds=(
            Threshold("alpha", 0.05, "familywise error rate controlled by Holm (1979), Scand. J. Stat. 6"),
            Threshold("columns", 40, BOUND_SOURCE),
        ),
        grades=(Grade.MISLEADS, Grade.NOTE),
    ),
]

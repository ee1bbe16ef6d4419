"""Table hygiene rules: columns and rows whose values cannot support a coefficient as they stand."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Iterator, Sequence

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from prefit.context import RunContext
from prefit.design import category_codes
from prefit.findings import Finding, Grade, counted
from prefit.roles import Kind, numeric_values
from prefit.rule import COMMON_PRACTICE, Rule, RuleSettings, Threshold, capped_names, fmt
from prefit.stats.robust import median
from prefit.stats.rowmatch import ColumnBits, candidate_rows, value_bits
from prefit.stats.spot import evenly_spaced, finite_spot, spot_step
from prefit.stats.textnumbers import is_text_type, mostly_number_like

SQUARE_SAFE = float(np.sqrt(np.finfo(np.float64).max))
IDENTIFIER_MIN_ROWS = 20
COUNTER_MIN_DISTINCT = 10
COUNTER_RUN_RATIO = 3.0
TIME_NAME = re.compile(r"(^|[_\W])(t|year|yr|quarter|month|week|day|date|time|hour|period|trend)s?($|[_\W])", re.IGNORECASE)
MANY_DUMMIES = 100
EXACT_CORRELATION = 1e-12
SCALE_ALLOWANCE = 1e-9
SCREEN_ALLOWANCE = 1e-6


# ---------------------------------------------------------------- constant-predictor


def _constant_predictor(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design = ctx.design
    if design.n == 0:
        return
    grade = Grade.BLOCKS if design.intercept else Grade.NOTE
    for term in design.terms:
        if term.kind is None:
            continue
        if term.reference is not None or term.df == 0:
            if term.df == 0:
                only = term.reference if term.reference is not None else "(none)"
                yield _constant_finding(settings, grade, term.source, f"category {only!r}", design.n)
            continue
        column = ctx.design_column(term.columns[0])
        if np.ptp(column) == 0:
            yield _constant_finding(settings, grade, term.source, f"{column[0]:g}", design.n)


def _constant_finding(settings: RuleSettings, grade: Grade, column: str, value: str, n: int) -> Finding:
    return settings.finding(
        grade,
        f"{column} takes the single value {value} in all {n:,} complete cases: its coefficient cannot be estimated",
        columns=[column],
        value=0.0,
        threshold=0.0,
        source="definition: a slope needs at least two distinct values of its predictor",
        remedy=f"drop {column} from the predictors, or collect rows where it varies",
    )


# ---------------------------------------------------------------- duplicate-rows


def _row_groups(columns: list[pa.ChunkedArray]) -> tuple[np.ndarray, np.ndarray]:
    """For each row, the index of its group of identical rows, and the size of each group."""
    return _group_codes([_value_codes(chunked) for chunked in columns])


def _value_codes(chunked: pa.ChunkedArray) -> np.ndarray:
    """One code (>= -1) per row: equal values share a code; missing and NaN are -1."""
    column = chunked.combine_chunks()
    if pa.types.is_null(column.type):
        return np.full(len(column), -1, dtype=np.int64)
    if pa.types.is_floating(column.type):
        column = pc.if_else(pc.is_nan(column), pa.scalar(None, column.type), column)
    encoded = pc.dictionary_encode(column)
    return encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int64)


def _table_bits(ctx: RunContext, name: str) -> ColumnBits:
    """The bits of a table column at given rows: float values for numbers, value codes for the rest."""
    column = ctx.table.column(name)
    if not (pa.types.is_integer(column.type) or pa.types.is_float32(column.type) or pa.types.is_float64(column.type)):
        return lambda rows: _value_codes(column if rows is None else column.take(rows)).view(np.uint64)
    if name in ctx.model_columns and ctx.roles.kinds[name] is Kind.NUMERIC:
        shared = ctx.values(name)
        return lambda rows: value_bits(shared if rows is None else shared[rows])
    return lambda rows: value_bits(numeric_values(column if rows is None else column.take(rows)))


def _repeated_rows(ctx: RunContext) -> tuple[np.ndarray, np.ndarray]:
    """Table positions of the rows that repeat an earlier row in every column, and the sizes of the groups of equal rows.

    Hashes narrow the table to candidate rows (number columns first: they
    narrow fastest); the candidates are then grouped exactly, by value, as
    :func:`_row_groups` groups a whole table. Rows left out are unique, so
    groups of several rows are the same as over the whole table.
    """
    table = ctx.table
    numbers_first = sorted(table.column_names, key=lambda name: not _is_number(table.column(name).type))
    candidates = candidate_rows((_table_bits(ctx, name) for name in numbers_first), table.num_rows)
    if candidates.size == 0:
        return candidates, np.empty(0, dtype=np.int64)
    chosen = table if candidates.size == table.num_rows else table.take(candidates)
    groups, counts = _row_groups(list(chosen.columns))
    return candidates[_later_copies(groups)], counts


def _is_number(t: pa.DataType) -> bool:
    return bool(pa.types.is_integer(t) or pa.types.is_floating(t))


def _group_codes(codes: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Combine per-column codes (>= -1) into one group index per row; O(rows log rows) per column, no row matrix."""
    key = np.zeros(codes[0].size if codes else 0, dtype=np.int64)
    span = 1
    for column in codes:
        width = int(column.max()) + 2 if column.size else 1
        if span * width >= 2**62:
            _, key = np.unique(key, return_inverse=True)
            key = key.reshape(-1).astype(np.int64)
            span = int(key.max()) + 1 if key.size else 1
        key = key * width + (column + 1)
        span *= width
    _, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    return inverse.reshape(-1), counts


def _later_copies(groups: np.ndarray) -> np.ndarray:
    """Positions of rows that repeat an earlier row of the same group."""
    _, first = np.unique(groups, return_index=True)
    is_first = np.zeros(groups.size, dtype=bool)
    is_first[first] = True
    return np.flatnonzero(~is_first)


def _duplicate_rows(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    rows = ctx.table.num_rows
    copies, counts = _repeated_rows(ctx)
    limit = settings.threshold("weakens")
    if copies.size and limit.crossed(copies.size / rows):
        listed, _, total = ctx.listed_rows(copies)
        repeated = int((counts > 1).sum())
        yield settings.finding(
            Grade.WEAKENS,
            f"{copies.size:,} of {rows:,} rows ({copies.size / rows:.1%}) repeat an earlier row exactly in every column "
            f"({repeated:,} distinct rows appear more than once): each copy counts the same observation again and "
            "shrinks the standard errors",
            rows=listed,
            row_count=total,
            value=copies.size / rows,
            threshold=limit,
            remedy="remove the repeated rows (keep the first of each), and fix the export step that appended them twice",
            details={"extra_copies": int(copies.size), "rows_repeated": repeated},
        )
    yield from _replicates(ctx, settings)


def _replicates(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design = ctx.design
    if design.n < 3 or design.p == 0 or not ctx.target_is_numeric:
        return
    candidates = _replicate_candidates(ctx)
    if candidates.size == 0:
        return
    every_row = candidates.size == design.n
    X = design.X if every_row else design.X[candidates]
    y = design.y if every_row else design.y[candidates]
    columns = [np.unique(X[:, j], return_inverse=True)[1].reshape(-1).astype(np.int64) for j in range(design.p)]
    inverse, counts = _group_codes(columns)
    shared = np.flatnonzero(counts > 1)
    if shared.size == 0:
        return
    low = np.full(counts.size, np.inf)
    high = np.full(counts.size, -np.inf)
    np.minimum.at(low, inverse, y)
    np.maximum.at(high, inverse, y)
    varying = shared[high[shared] > low[shared]]
    if varying.size == 0:
        return
    in_groups = np.isin(inverse, varying)
    listed, _, total = ctx.listed_rows(design.positions[candidates[in_groups]])
    yield settings.finding(
        Grade.NOTE,
        f"{counted(varying.size, 'group')} of rows ({counted(int(in_groups.sum()), 'row')}) share every predictor value but differ in "
        f"{ctx.roles.target}: replicate measurements, which allow a lack-of-fit test of the linear form",
        columns=[ctx.roles.target],
        rows=listed,
        row_count=total,
        value=float(varying.size),
        source="Draper & Smith (1998), Applied Regression Analysis, 3rd ed., sec. 2.1 (pure error and lack of fit)",
        remedy="keep the replicates; use them for a pure-error lack-of-fit test",
        details={"groups": int(varying.size), "rows": int(in_groups.sum())},
    )


def _replicate_candidates(ctx: RunContext) -> np.ndarray:
    """Design rows that may share every design value with another row: measured columns first, the intercept skipped."""
    design = ctx.design
    measured = [t.columns[0] for t in design.terms if t.kind in (Kind.NUMERIC, Kind.DATETIME) and t.reference is None and t.columns]
    taken = set(measured)
    coded = [c for t in design.terms if t.kind is not None for c in t.columns if c not in taken]

    def bits_of(name: str) -> ColumnBits:
        return lambda rows: value_bits(ctx.design_column(name) if rows is None else ctx.design_column(name)[rows])

    return candidate_rows((bits_of(name) for name in measured + coded), design.n)


# ---------------------------------------------------------------- identifier


def _identifier(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    for column in ctx.roles.predictors:
        kind = ctx.roles.kinds[column]
        if kind is Kind.NUMERIC:
            verdict = _numeric_identifier(ctx.values(column))
        elif kind in (Kind.CATEGORICAL, Kind.TEXT):
            verdict = _label_identifier(ctx, column)
        else:
            verdict = None
        if verdict is None:
            continue
        timelike = bool(TIME_NAME.search(column)) and kind is Kind.NUMERIC and "unique" not in verdict
        grade = Grade.NOTE if timelike else Grade.MISLEADS
        consequence = (
            "named like a time unit, it acts as a linear trend in row order; keep it only if a trend is intended"
            if timelike
            else "as a predictor it fits noise or encodes the order of the rows, not a property of the process"
        )
        yield settings.finding(
            grade,
            f"predictor {column} looks like an identifier: {verdict}; {consequence}",
            columns=[column],
            source=COMMON_PRACTICE,
            remedy=f"pass {column} as --id (row labels) or --exclude it; if differences between the units it names matter, "
            "use their measured properties as predictors instead",
        )


def _numeric_identifier(values: np.ndarray) -> str | None:
    spot = finite_spot(values)
    if np.any(spot != np.round(spot)):
        return None
    present = values[np.isfinite(values)]
    if present.size < IDENTIFIER_MIN_ROWS or np.any(present != np.round(present)):
        return None
    distinct, counts = np.unique(present, return_counts=True)
    if distinct.size < COUNTER_MIN_DISTINCT:
        return None
    steps = np.diff(present)
    monotone = bool(np.all(steps >= 0) or np.all(steps <= 0))
    gaps = np.diff(distinct)
    evenly_spaced = bool(gaps.size and np.all(gaps == gaps[0]))
    unique = distinct.size == present.size
    if unique and (monotone or evenly_spaced):
        order = "in row order" if monotone else "in steps of " + fmt(float(gaps[0]))
        return f"a different whole number in each of its {present.size:,} rows, counting {order}"
    if monotone and evenly_spaced and counts.max() <= COUNTER_RUN_RATIO * counts.min():
        return (
            f"{distinct.size:,} evenly spaced whole numbers ({fmt(float(distinct[0]))} to {fmt(float(distinct[-1]))}) "
            f"that only {'rise' if np.all(steps >= 0) else 'fall'} from row to row, in runs of {counts.min():,} to {counts.max():,} rows"
        )
    return None


def _label_identifier(ctx: RunContext, column: str) -> str | None:
    values = ctx.table.column(column)
    spot = values.take(np.arange(0, len(values), spot_step(len(values)))).drop_null()
    if len(pc.unique(spot)) < len(spot):
        return None
    summary = ctx.summary(column)
    present = summary.rows - summary.missing
    if present >= IDENTIFIER_MIN_ROWS and summary.distinct == present:
        return f"a different value in each of its {present:,} rows, so each dummy fits one row exactly"
    return None


# ---------------------------------------------------------------- numeric-as-text


def _numeric_as_text(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    roles = ctx.roles
    candidates = [roles.target, *roles.predictors, *(c for c in roles.left_out if c not in roles.predictors)]
    for column in dict.fromkeys(candidates):
        if not is_text_type(ctx.table.column(column).type) or not mostly_number_like(ctx.table.column(column)):
            continue
        profile = ctx.text_numbers(column)
        if not profile.is_numeric:
            continue
        only_missing_codes = not profile.formatted and not profile.other_tokens and profile.missing_tokens
        levels = profile.distinct_numbers + len(profile.tokens)
        if column == roles.target:
            if only_missing_codes:
                continue
            grade, role, effect = Grade.MISLEADS, "target", "a text target cannot be fitted"
        elif column in roles.predictors:
            if not profile.formatted:
                continue
            grade = Grade.MISLEADS if levels - 1 >= MANY_DUMMIES else Grade.WEAKENS
            role, effect = "predictor", f"as a category it becomes {counted(levels - 1, 'dummy', 'dummies')}, one per distinct value"
        else:
            if only_missing_codes or not profile.is_quantity:
                continue
            grade, role, effect = Grade.WEAKENS, "column", "it is left out of the model"
        formatting = ", ".join(profile.format_words()) or "nothing: plain numbers stored as text"
        examples = [e for k in sorted(profile.examples) for e in profile.examples[k]][:4]
        shown = f"; e.g. {', '.join(repr(e) for e in examples)}" if examples else ""
        others = profile.other_tokens
        stray = (
            f"; other entries: {', '.join(f'{t!r} ({others[t]:,})' for t in sorted(others, key=lambda t: (-others[t], t))[:5])}"
            if others
            else ""
        )
        yield settings.finding(
            grade,
            f"{role} {column} holds numbers as text: {profile.numeric_share:.1%} of its {profile.present:,} values parse as "
            f"numbers ({profile.formatted:,} only after removing {formatting}){shown}{stray}; {effect}",
            columns=[column],
            value=profile.numeric_share,
            source="definition: least squares needs numbers; text becomes one dummy per distinct value",
            remedy=f"re-export {column} as plain numbers (no thousands separators, units or currency marks; "
            "a dot for decimals), or convert it before the check",
            details={
                "parsed_share": profile.numeric_share,
                "formatted": profile.formatted,
                "formats": profile.format_words(),
                "examples": examples,
                "other_values": dict(profile.tokens),
            },
        )


# ---------------------------------------------------------------- non-finite


def _non_finite(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    for column in ctx.model_columns:
        if ctx.roles.kinds[column] is not Kind.NUMERIC:
            continue
        values = ctx.values(column)
        infinite = np.isinf(values)
        huge = np.isfinite(values) & (np.abs(values) > SQUARE_SAFE)
        bad = infinite | huge
        if not bad.any():
            continue
        positions = np.flatnonzero(bad)
        listed, shown, total = ctx.listed_rows(positions, np.where(np.isinf(values[positions]), np.sign(values[positions]) * np.finfo(np.float64).max, values[positions]))
        parts = []
        if infinite.any():
            parts.append(f"{int(infinite.sum()):,} infinite value(s)")
        if huge.any():
            parts.append(f"{int(huge.sum()):,} value(s) beyond {SQUARE_SAFE:.3g} in absolute value, whose squares overflow double precision")
        yield settings.finding(
            Grade.BLOCKS,
            f"{column} holds {' and '.join(parts)}: sums of squares become infinite or NaN and least squares fails",
            columns=[column],
            rows=listed,
            row_count=total,
            value=float(bad.sum()),
            threshold=SQUARE_SAFE,
            source="IEEE 754 double precision: largest finite value about 1.8e308, so |x| above its square root overflows when squared",
            remedy=f"find how {column} got these values (division by zero, a unit error, a code) and correct or declare them missing",
        )


# ---------------------------------------------------------------- high-cardinality and rare-levels


def _categorical_terms(ctx: RunContext) -> Iterator[tuple[str, np.ndarray, list[str]]]:
    design = ctx.design
    for term in design.terms:
        if term.kind not in (Kind.CATEGORICAL, Kind.BOOLEAN, Kind.TEXT):
            continue
        codes, levels = category_codes(ctx.table.column(term.source), term.kind)
        yield term.source, codes[design.positions], levels


def _high_cardinality(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    n = ctx.design.n
    if n == 0:
        return
    for column, codes, levels in _categorical_terms(ctx):
        present = np.unique(codes[codes >= 0])
        ratio = present.size / n
        graded = settings.grade_of(ratio)
        if graded is None:
            continue
        grade, limit = graded
        yield settings.finding(
            grade,
            f"{column} has {present.size:,} levels among {n:,} complete cases ({fmt(ratio)} levels per row, "
            f"{fmt(n / present.size)} rows per level): its {counted(present.size - 1, 'dummy', 'dummies')} eat the sample",
            columns=[column],
            value=ratio,
            threshold=limit,
            remedy=f"merge rare levels of {column} into broader groups, replace it by a measured property of the "
            "groups, or treat it as a random effect in a mixed model",
            details={"levels": int(present.size), "complete_cases": n},
        )


def _rare_levels(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    floor = settings.threshold("weakens")
    for column, codes, levels in _categorical_terms(ctx):
        counts = np.bincount(codes[codes >= 0], minlength=len(levels))
        rare = [i for i in range(len(levels)) if 0 < counts[i] and floor.crossed(float(counts[i]))]
        present = int((counts > 0).sum())
        if not rare or present < 2:
            continue
        fewest = int(min(counts[i] for i in rare))
        graded = settings.grade_of(float(fewest))
        assert graded is not None
        grade, limit = graded
        rare.sort(key=lambda i: (counts[i], levels[i]))
        described = ", ".join(f"{levels[i]!r} ({counts[i]} row{'s' if counts[i] != 1 else ''})" for i in rare[:10])
        more = f" and {len(rare) - 10} more" if len(rare) > 10 else ""
        positions = ctx.design.positions[np.isin(codes, rare)]
        listed, _, total = ctx.listed_rows(positions)
        yield settings.finding(
            grade,
            f"{column} has {len(rare)} level(s) with fewer than {floor.value:g} complete rows: {described}{more}; "
            "each such dummy is estimated from those rows alone, which get leverage near 1 and residuals near 0",
            columns=[column],
            rows=listed,
            row_count=total,
            value=fewest,
            threshold=limit,
            remedy=f"merge the rare levels of {column} into a broader level (or an 'other' level), or collect more rows for them",
            details={"rare_levels": {levels[i]: int(counts[i]) for i in rare}},
        )


# ---------------------------------------------------------------- scale-disparity


def _scale_disparity(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design = ctx.design
    if design.n == 0:
        return
    limit = settings.threshold("note")
    if not _may_differ_in_scale(ctx, limit):
        return
    magnitudes: dict[str, float] = {}
    for column in ctx.numeric_predictors:
        values = ctx.design_column(column)
        nonzero = np.abs(values[values != 0])
        if nonzero.size:
            magnitudes[column] = median(nonzero)
    if len(magnitudes) < 2:
        return
    largest = max(magnitudes, key=lambda c: (magnitudes[c], c))
    smallest = min(magnitudes, key=lambda c: (magnitudes[c], c))
    with np.errstate(over="ignore"):
        ratio = float(np.float64(magnitudes[largest]) / magnitudes[smallest])
    if not limit.crossed(ratio):
        return
    yield settings.finding(
        Grade.NOTE,
        f"typical magnitudes of the numeric predictors differ by a factor of {ratio:.3g}"
        f"{'' if np.isfinite(ratio) else ' (beyond the largest double, 1.8e308)'}: {largest} about "
        f"{magnitudes[largest]:.3g}, {smallest} about {magnitudes[smallest]:.3g} (median absolute non-zero value)",
        columns=[largest, smallest],
        value=ratio,
        threshold=limit,
        remedy=f"rescale units (e.g. {largest} in thousands or millions) so coefficients and their printed digits are readable "
        "and the design is better conditioned",
        details={"magnitudes": dict(sorted(magnitudes.items()))},
    )


def _may_differ_in_scale(ctx: RunContext, limit: Threshold) -> bool:
    """False when bounds on each predictor's median absolute non-zero value prove their ratio within ``limit``.

    The median lies between the largest absolute value and any value that at
    most half of the non-zero values fall below; a column of one sign offers
    its smallest absolute value, others a value from evenly spaced rows,
    confirmed by a count.
    """
    lows: list[float] = []
    highs: list[float] = []
    for column in ctx.numeric_predictors:
        values = ctx.design_column(column)
        if values.size == 0:
            continue
        low, high = float(values.min()), float(values.max())
        if low == high == 0.0:
            continue
        highs.append(max(abs(low), abs(high)))
        if low > 0.0 or high < 0.0:
            lows.append(min(abs(low), abs(high)))
            continue
        floor = _median_floor(values)
        if floor is None:
            return True
        lows.append(floor)
    if len(highs) < 2:
        return True
    return limit.crossed(max(highs) / min(lows) * (1.0 + SCALE_ALLOWANCE))


def _median_floor(values: np.ndarray) -> float | None:
    """A positive value at most the median absolute non-zero value, or None if evenly spaced rows suggest none."""
    magnitude = np.abs(values)
    spot = evenly_spaced(magnitude)
    spot = np.sort(spot[spot > 0])
    if spot.size == 0:
        return None
    floor = float(spot[spot.size // 4])
    zeros = np.count_nonzero(magnitude == 0)
    nonzero = magnitude.size - zeros
    below = np.count_nonzero(magnitude < floor) - zeros
    return floor if below <= (nonzero - 1) // 2 else None


# ---------------------------------------------------------------- target-leak


@dataclass(frozen=True)
class _Leak:
    """One predictor beyond a leak limit: what it crossed, how likely an unrelated column is to go as far, the finding's parts."""

    column: str
    monotone: bool
    value: float
    chance: float
    what: str
    details: dict[str, Any]


def _target_leak(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    design = ctx.design
    if design.n < 3 or not ctx.target_is_numeric:
        return
    with np.errstate(over="ignore", invalid="ignore"):
        y = design.y - design.y.mean()
        y_norm = float(np.linalg.norm(y))
    if y_norm == 0 or not np.isfinite(y_norm):
        return
    limit = settings.threshold("misleads")
    y_unit = y / y_norm
    y_root = np.sqrt(_sum_of_products(y, y))
    x = np.empty_like(y)
    ranks = _TargetRanks(design.y, rank_limit(limit.value))
    candidates = _leak_candidates(ctx, ctx.numeric_predictors, y_unit, limit.value, ranks.limit)
    leaks: list[_Leak] = []
    for column in ctx.numeric_predictors:
        if candidates is not None and column not in candidates:
            continue
        values = ctx.design_column(column)
        with np.errstate(over="ignore", invalid="ignore"):
            np.subtract(values, values.mean(), out=x)
            plainly_below = _plainly_below(limit, x, y, y_root)
            x_norm = float(np.linalg.norm(x)) if not plainly_below else 0.0
        r = float(np.dot(x / x_norm, y_unit)) if x_norm > 0 and np.isfinite(x_norm) else float("nan")
        r2 = r * r
        if not limit.crossed(r2):
            leak = _monotone_leak(ctx, column, values, r2, ranks)
            leaks += [leak] if leak is not None else []
            continue
        slope = float(np.dot(x, y) / (x_norm * x_norm))
        intercept = float(design.y.mean() - slope * values.mean())
        exact = 1 - abs(r) < EXACT_CORRELATION
        if exact:
            what = f"{ctx.roles.target} = {slope:.6g} x {column} + {intercept:.6g} exactly: the target itself under another name or a fixed multiple"
        else:
            what = f"{column} alone explains R² = {r2:.4f} of {ctx.roles.target}"
        details = {"r_squared": r2, "slope": slope, "intercept": intercept, "exact": exact}
        leaks.append(_Leak(column, False, r2, _chance_of_correlation(r2, design.n), what, details))
    # Bonferroni over the predictors tested: a wide table of unrelated columns crosses the limits by chance when
    # its rows are few (three rows put 6% of unrelated columns beyond R^2 = 0.99).
    beyond_chance = [leak for leak in leaks if leak.chance * len(ctx.numeric_predictors) <= settings.threshold("chance").value]
    for monotone in (False, True):
        found = [leak for leak in beyond_chance if leak.monotone is monotone]
        if len(found) == 1:
            yield _single_leak_finding(ctx, settings, found[0], ranks.limit)
        elif found:
            yield _many_leaks_finding(ctx, settings, found, ranks.limit)


def _chance_of_correlation(squared: float, n: int) -> float:
    """The chance that a column unrelated to the target has a squared correlation at least ``squared`` over ``n`` rows.

    Under independence with a normal target, r^2 follows Beta(1/2, (n - 2) / 2) (Fisher 1915); 1 for fewer than
    three rows or an undefined correlation.
    """
    import scipy.stats

    if n < 3 or not np.isfinite(squared):
        return 1.0
    return float(scipy.stats.beta.sf(min(squared, 1.0), 0.5, (n - 2) / 2.0))


def _chance_of_rank_copy(rho: float, n: int) -> float:
    """The chance that a column unrelated to the target has a rank correlation at least ``|rho|`` over ``n`` rows.

    The large-sample approximation (Spearman's rho has the null variance 1 / (n - 1) of Pearson's r, so the
    same Beta law), but never below the chance, 2 / n!, that a random order of ``n`` distinct values is the
    target's own order or its reverse: the approximation's tail vanishes at |rho| = 1, which a few rows reach
    often (one column in three of three rows).
    """
    from math import exp, lgamma

    return max(_chance_of_correlation(rho * rho, n), 2.0 * exp(-lgamma(n + 1.0)))


def _single_leak_finding(ctx: RunContext, settings: RuleSettings, leak: _Leak, rank_limit_value: float) -> Finding:
    """The finding of one leaking predictor, linear or monotone."""
    target, column = ctx.roles.target, leak.column
    if not leak.monotone:
        return settings.finding(
            Grade.MISLEADS,
            f"{leak.what}; a predictor that near-copies the response makes every other coefficient meaningless",
            columns=[column, target],
            value=leak.value,
            threshold=settings.threshold("misleads"),
            remedy=f"drop {column} unless it is truly known before {target} is measured; check whether it is "
            f"computed from {target} (a sub-meter sum, a unit conversion, a later reading)",
            details=leak.details,
        )
    return settings.finding(
        Grade.MISLEADS,
        f"{leak.what}: a monotone function of the response, such as its log, its rank or an index of it",
        columns=[column, target],
        value=leak.value,
        threshold=rank_limit_value,
        source=RANK_LIMIT_SOURCE.format(source=settings.threshold("misleads").source),
        remedy=f"drop {column} unless it is truly known before {target} is measured; check whether it is computed "
        f"from {target} (a log, a rank, a band or an index of it)",
        details=leak.details,
    )


def _many_leaks_finding(ctx: RunContext, settings: RuleSettings, leaks: list[_Leak], rank_limit_value: float) -> Finding:
    """One finding for several leaking predictors of one kind (linear or monotone): every column listed, the strongest named."""
    target = ctx.roles.target
    columns = [leak.column for leak in leaks]
    strongest = max(leaks, key=lambda leak: leak.value)
    exact = sum(1 for leak in leaks if leak.details.get("exact"))
    if strongest.monotone:
        what = (
            f"{len(leaks):,} predictors order the rows almost exactly as {target} does ({capped_names(columns)}; the strongest, "
            f"{strongest.column}, Spearman rank correlation {strongest.value:.4f}): monotone functions of the response"
        )
        threshold: Threshold | float = rank_limit_value
        source: str | None = RANK_LIMIT_SOURCE.format(source=settings.threshold("misleads").source)
        kinds = "a log, a rank, a band or an index of it"
    else:
        copies = f", {exact:,} of them exact multiples of it" if exact else ""
        what = (
            f"{len(leaks):,} predictors each alone explain R² above {settings.threshold('misleads').value:g} of {target} "
            f"({capped_names(columns)}{copies}; the strongest, {strongest.column}, R² = {strongest.value:.4f})"
        )
        threshold, source = settings.threshold("misleads"), None
        kinds = "a sub-meter sum, a unit conversion, a later reading"
    return settings.finding(
        Grade.MISLEADS,
        f"{what}; predictors that near-copy the response make every other coefficient meaningless",
        columns=[*columns, target],
        value=strongest.value,
        threshold=threshold,
        source=source,
        remedy=f"drop {capped_names(columns)} unless they are truly known before {target} is measured; check whether "
        f"they are computed from {target} ({kinds})",
        details={"predictors": len(leaks), "exact": exact, "leaks": {leak.column: leak.details for leak in leaks}},
    )


BATCH_SCREEN_MARGIN = 1e-6
BATCH_VALUES = 4_000_000


def _leak_candidates(ctx: RunContext, columns: Sequence[str], y_unit: np.ndarray, r2_limit: float, rho_limit: float) -> set[str] | None:
    """The predictors that may leak the target, screened many columns at a time; None to check every one by itself.

    For a table short enough that :class:`_TargetRanks` ranks every row (no
    look at evenly spaced rows first), blocks of columns get their
    correlation and their rank correlation with the target from two matrix
    products; a column clearly below both limits (by
    :data:`BATCH_SCREEN_MARGIN`) cannot give a finding and is not visited
    again, so a wide table of short columns pays no per-column overhead.
    The columns kept go through the exact per-column computation.
    """
    from scipy.stats import rankdata

    design = ctx.design
    n = design.n
    if len(columns) < 2 or n > 2 * evenly_spaced(design.y).size:
        return None
    index = design.column_index
    target_ranks = rankdata(design.y)
    target_ranks -= target_ranks.mean()
    target_ranks /= np.sqrt(_sum_of_products(target_ranks, target_ranks))
    kept: set[str] = set()
    step = max(1, BATCH_VALUES // max(n, 1))
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        for start in range(0, len(columns), step):
            chosen = list(columns[start : start + step])
            block = design.X[:, [index[c] for c in chosen]]
            centred = block - block.mean(axis=0)
            r = (centred.T @ y_unit) / np.sqrt(np.einsum("ij,ij->j", centred, centred))
            ranked = rankdata(block, axis=0)
            ranked -= ranked.mean(axis=0)
            rho = (ranked.T @ target_ranks) / np.sqrt(np.einsum("ij,ij->j", ranked, ranked))
            near = ~(np.isfinite(r) & (r * r < r2_limit - BATCH_SCREEN_MARGIN)) | ~(np.isfinite(rho) & (np.abs(rho) < rho_limit - BATCH_SCREEN_MARGIN))
            kept.update(c for c, flag in zip(chosen, near.tolist()) if flag)
    return kept


def rank_limit(r2_limit: float) -> float:
    """The rank correlation a bivariate normal pair has when its squared correlation is ``r2_limit``.

    Spearman's rho of a bivariate normal pair with correlation r is
    (6 / pi) arcsin(r / 2); R^2 = 0.99 gives rho = 0.9945. A predictor whose
    ranks agree with the target's beyond that is as close to a copy of it as
    the linear limit allows, whatever monotone function links the two.

    References
    ----------
    Pearson, K. (1907). On further methods of determining correlation. Drapers' Company Research Memoirs,
    Biometric Series IV; Kruskal, W. H. (1958). Ordinal measures of association. JASA 53(284), 814-861.
    """
    return float(6.0 / np.pi * np.arcsin(np.sqrt(r2_limit) / 2.0))


SPOT_RANK_SCREEN = 0.9


class _TargetRanks:
    """The target's average ranks, computed once for every predictor's rank correlation (on first need)."""

    def __init__(self, y: np.ndarray, limit: float) -> None:
        self.y = y
        self.limit = limit
        self._full: np.ndarray | None = None
        self._spot: np.ndarray | None = None

    def correlation(self, values: np.ndarray) -> float | None:
        """Spearman's rho of ``values`` with the target, or None when a look at evenly spaced rows rules it out.

        The look ranks about 4,096 evenly spaced rows; only a predictor whose
        rank correlation there exceeds :data:`SPOT_RANK_SCREEN` is ranked over every row.
        """
        from scipy.stats import rankdata

        if values.size > 2 * evenly_spaced(values).size:
            if self._spot is None:
                self._spot = rankdata(evenly_spaced(self.y))
            if abs(_pearson(rankdata(evenly_spaced(values)), self._spot)) <= SPOT_RANK_SCREEN:
                return None
        if self._full is None:
            self._full = rankdata(self.y)
        return _pearson(rankdata(values), self._full)


def _pearson(a: np.ndarray, b: np.ndarray) -> float:
    a = a - a.mean()
    b = b - b.mean()
    scale = float(np.sqrt(_sum_of_products(a, a) * _sum_of_products(b, b)))
    return _sum_of_products(a, b) / scale if scale > 0 else 0.0


RANK_LIMIT_SOURCE = "{source}: the rank correlation of a bivariate normal pair at that R² (Pearson 1907; Kruskal 1958, JASA 53)"


def _monotone_leak(ctx: RunContext, column: str, values: np.ndarray, r2: float, ranks: _TargetRanks) -> _Leak | None:
    """A predictor whose ranks copy the target's (a log, a rank or an index of it) though its R^2 stays below the limit."""
    rho = ranks.correlation(values)
    if rho is None or not abs(rho) > ranks.limit:
        return None
    if not np.isfinite(r2):
        r2 = _pearson(values, ctx.design.y) ** 2
    linear = f"R² = {r2:.4f}" if np.isfinite(r2) else "R² not defined"
    what = f"{column} orders the rows almost exactly as {ctx.roles.target} does (Spearman rank correlation {rho:.4f}, {linear})"
    details = {"spearman_rho": rho, "r_squared": r2 if np.isfinite(r2) else None, "monotone": True}
    return _Leak(column, True, abs(rho), _chance_of_rank_copy(rho, values.size), what, details)


def _sum_of_products(a: np.ndarray, b: np.ndarray) -> float:
    """Sum of ``a * b`` on the calling thread, with no temporary array."""
    return float(np.einsum("i,i->", a, b))


def _plainly_below(limit: Threshold, x: np.ndarray, y: np.ndarray, y_root: float) -> bool:
    """Whether the squared correlation of centred ``x`` and ``y`` is clearly below ``limit``.

    A cheap screen: two passes over the rows with no temporary array, where
    the exact computation in :func:`_target_leak` takes the norm of ``x``, a
    normalised copy of it and a dot product; that is then needed only for the
    rare predictor near the limit. ``SCREEN_ALLOWANCE`` absorbs the rounding
    differences between the two routes.
    """
    xx = _sum_of_products(x, x)
    if not (0.0 < xx < np.inf and 0.0 < y_root < np.inf):
        return False
    r = _sum_of_products(x, y) / (np.sqrt(xx) * y_root)
    return bool(np.isfinite(r)) and not limit.crossed(r * r + SCREEN_ALLOWANCE)


RULES = [
    Rule(
        id="hygiene.constant-predictor",
        summary="A predictor with one distinct value among the complete cases.",
        why="A slope measures how the response changes when the predictor changes. A predictor that never changes "
        "carries no information about its slope; with an intercept in the model its column is a multiple of the "
        "intercept column, so the coefficient is not estimable.",
        remedy="drop the column, or collect rows where it varies",
        check=_constant_predictor,
        grades=(Grade.BLOCKS, Grade.NOTE),
    ),
    Rule(
        id="hygiene.duplicate-rows",
        summary="Rows repeated exactly in every column, and replicate rows (same predictors, different target).",
        why="A copied row is one observation counted twice: least squares weighs it double, standard errors shrink "
        "as if there were more information, and p-values overstate certainty. Rows that share every predictor but "
        "differ in the response are genuine replicates; they measure pure error.",
        remedy="remove exact copies; keep replicates and use them for a lack-of-fit test",
        check=_duplicate_rows,
        thresholds=(Threshold("weakens", 0.0, "definition: any copied row counts one observation twice", Grade.WEAKENS, ">"),),
        grades=(Grade.NOTE,),
    ),
    Rule(
        id="hygiene.identifier",
        summary="A predictor that is unique per row or a counter (row number, record number, site code as a number).",
        why="An identifier carries no property of the process. As a number it imposes an arbitrary order and "
        "spacing on the rows and picks up whatever drifts with row order; as a category it spends one parameter "
        "per row and fits each row exactly.",
        remedy="declare it as --id or exclude it",
        check=_identifier,
        grades=(Grade.MISLEADS, Grade.NOTE),
    ),
    Rule(
        id="hygiene.numeric-as-text",
        summary="Text columns whose values are numbers with thousands separators, units, currency marks, decimal commas or spaces.",
        why="A number stored as text cannot enter a least-squares fit as a number. It is either dropped or turned "
        "into one dummy per distinct value, which spends the sample on hundreds of parameters.",
        remedy="re-export the column as plain numbers",
        check=_numeric_as_text,
        grades=(Grade.MISLEADS, Grade.WEAKENS),
    ),
    Rule(
        id="hygiene.non-finite",
        summary="Infinite values, or values so large that their squares overflow double precision, in the design.",
        why="Least squares sums squares and cross products. An infinity, or a value above about 1.3e154 whose square "
        "overflows, turns those sums into infinities or NaN and the fit fails or returns garbage.",
        remedy="correct the values at the source or declare them missing",
        check=_non_finite,
        grades=(Grade.BLOCKS,),
    ),
    Rule(
        id="hygiene.high-cardinality",
        summary="Categorical predictors with many levels per complete case.",
        why="Each level beyond the reference costs one parameter. A category with a level for every few rows "
        "spends the sample on dummies, each estimated from a handful of rows, and leaves little for the other "
        "coefficients.",
        remedy="merge levels, use a measured property of the groups, or a mixed model",
        check=_high_cardinality,
        thresholds=(
            Threshold("misleads", 0.5, COMMON_PRACTICE + ": fewer than 2 rows per level", Grade.MISLEADS, ">"),
            Threshold("weakens", 0.1, COMMON_PRACTICE + ": fewer than 10 rows per level", Grade.WEAKENS, ">"),
        ),
    ),
    Rule(
        id="hygiene.rare-levels",
        summary="Levels of a categorical predictor with fewer than 5 complete rows.",
        why="The dummy of a level seen in one row fits that row exactly: its leverage is 1, its residual 0, and "
        "its coefficient is that row's value. With a few rows the coefficient rests on them alone and the rows "
        "have leverage near 1.",
        remedy="merge rare levels into a broader level",
        check=_rare_levels,
        thresholds=(
            Threshold("misleads", 2, "definition: a level in one row has leverage 1", Grade.MISLEADS, "<"),
            Threshold("weakens", 5, COMMON_PRACTICE, Grade.WEAKENS, "<"),
        ),
    ),
    Rule(
        id="hygiene.scale-disparity",
        summary="Numeric predictors whose typical magnitudes differ by more than a factor of a million.",
        why="Columns on wildly different scales inflate the condition number of the design and give coefficients "
        "that differ by many orders of magnitude; printed to a few digits they lose meaning.",
        remedy="rescale units",
        check=_scale_disparity,
        thresholds=(
            Threshold(
                "note",
                1e6,
                COMMON_PRACTICE + " (scaling and conditioning: Belsley, Kuh & Welsch 1980, Regression Diagnostics, ch. 3)",
                Grade.NOTE,
                ">",
            ),
        ),
    ),
    Rule(
        id="hygiene.target-leak",
        summary="A single predictor that alone explains the target with R² above 0.99, equals a fixed multiple of it, "
        "or orders the rows as the target does (rank correlation above 0.9945: a log, a rank or an index of it).",
        why="A predictor that is the response under another name (a unit conversion, a total that contains it, a "
        "later reading, its log or its rank) explains it perfectly and leaves every other coefficient near zero and "
        "meaningless.",
        remedy="drop the leaking predictor",
        check=_target_leak,
        thresholds=(
            Threshold("misleads", 0.99, COMMON_PRACTICE, Grade.MISLEADS, ">"),
            Threshold(
                "chance",
                0.01,
                "common practice: a predictor is reported when a column unrelated to the target would go as far with "
                "probability below this level divided by the numeric predictors tested (Bonferroni), r^2 of an "
                "unrelated column following Beta(1/2, (n - 2)/2) (Fisher 1915)",
            ),
        ),
    ),
]

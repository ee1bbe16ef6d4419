"""Column kinds and roles: which column is the target, which are labels, which enter the design."""

from __future__ import annotations

import enum
import re
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .errors import UsageProblem, closest_names
from .options import CheckOptions
from .stats.textnumbers import numbers_as_text_reason

FREE_TEXT_MIN_LEVELS = 50
FREE_TEXT_LEVEL_SHARE = 0.5
IDENTIFIER_MIN_ROWS = 20
INTERCEPT = "intercept"
"""The name of the model's constant term in the design, equations and reports."""


class Kind(enum.Enum):
    """What a column holds, as far as a linear model is concerned."""

    NUMERIC = "numeric"
    BOOLEAN = "boolean"
    CATEGORICAL = "categorical"
    DATETIME = "datetime"
    TEXT = "text"

    def __str__(self) -> str:
        return self.value


@dataclass(frozen=True)
class Roles:
    """The resolved roles of every column, and why any column was left out of the design."""

    target: str
    id: str | None
    predictors: tuple[str, ...]
    kinds: Mapping[str, Kind]
    left_out: Mapping[str, str] = field(default_factory=dict)
    declared_categorical: tuple[str, ...] = ()
    group: str | None = None
    group_origin: str | None = None


def _is_text_type(t: pa.DataType) -> bool:
    return bool(pa.types.is_string(t) or pa.types.is_large_string(t) or pa.types.is_string_view(t))


def _is_numeric_type(t: pa.DataType) -> bool:
    return bool(pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t) or pa.types.is_null(t))


def infer_kind(column: pa.ChunkedArray, declared_categorical: bool) -> Kind:
    """The kind of one column from its Arrow type and, for text, its number of distinct values."""
    t = column.type
    if pa.types.is_dictionary(t):
        t = t.value_type
    if _is_numeric_type(t):
        return Kind.CATEGORICAL if declared_categorical else Kind.NUMERIC
    if pa.types.is_boolean(t):
        return Kind.BOOLEAN
    if pa.types.is_temporal(t):
        return Kind.DATETIME
    if _is_text_type(t):
        if declared_categorical:
            return Kind.CATEGORICAL
        present = len(column) - column.null_count
        distinct = pc.count_distinct(column).as_py() if present else 0
        if present >= IDENTIFIER_MIN_ROWS and distinct == present:
            return Kind.TEXT
        if distinct > FREE_TEXT_MIN_LEVELS and distinct > FREE_TEXT_LEVEL_SHARE * present:
            return Kind.TEXT
        return Kind.CATEGORICAL
    return Kind.TEXT


def _code_matches(column: pa.ChunkedArray, codes: tuple[str, ...]) -> pa.ChunkedArray:
    """A boolean mask of values equal to one of ``codes`` (numbers compared as numbers)."""
    if _is_text_type(column.type):
        stripped = pc.utf8_trim_whitespace(column)
        return pc.is_in(stripped, value_set=pa.array(list(codes), pa.string()))
    if _is_numeric_type(column.type) and not pa.types.is_null(column.type):
        numbers = [float(c) for c in codes if _is_number(c)]
        if not numbers:
            return pc.is_in(column, value_set=pa.array([], column.type))
        return pc.is_in(pc.cast(column, pa.float64(), safe=False), value_set=pa.array(numbers, pa.float64()))
    return pc.is_in(pc.cast(column, pa.string()), value_set=pa.array(list(codes), pa.string()))


_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def _is_number(text: str) -> bool:
    return bool(_NUMBER.match(text.strip()))


def apply_missing_codes(table: pa.Table, codes: Mapping[str, tuple[str, ...]]) -> tuple[pa.Table, dict[str, int]]:
    """Set declared missing codes to null; text columns that then hold only numbers become numeric.

    Returns the new table and how many values each column lost to its codes.
    """
    names = table.column_names
    for column in codes:
        if column != "*" and column not in names:
            raise UsageProblem(f"missing-codes: column {column!r}", "is not in the table", closest_names(column, names))
    replaced: dict[str, int] = {}
    for name in names:
        wanted = codes.get(name, ()) + codes.get("*", ())
        if not wanted:
            continue
        column = table.column(name)
        mask = _code_matches(column, wanted)
        hits = int(pc.sum(pc.cast(pc.fill_null(mask, False), pa.int64())).as_py() or 0)
        if not hits:
            continue
        replaced[name] = hits
        cleaned = pc.if_else(mask, pa.scalar(None, column.type), column)
        if _is_text_type(cleaned.type):
            cleaned = _numeric_if_possible(cleaned)
        table = table.set_column(names.index(name), name, cleaned)
    return table, replaced


def _numeric_if_possible(column: pa.ChunkedArray) -> pa.ChunkedArray:
    stripped = pc.utf8_trim_whitespace(column)
    for target in (pa.int64(), pa.float64()):
        try:
            return pc.cast(stripped, target)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            continue
    return column


def _require_columns(names: list[str], wanted: tuple[str, ...], what: str) -> None:
    for name in wanted:
        if name not in names:
            raise UsageProblem(f"{what} {name!r}", "is not a column of the table", closest_names(name, names))


def _check_conflicts(names: list[str], options: CheckOptions) -> None:
    """Raise when two options contradict each other, or a rule exempts a column the table does not have."""
    if options.id is not None and options.id == options.target:
        raise UsageProblem(f"--id {options.id!r}", "is also the --target column", "name the column of row labels, or leave --id out")
    if options.target in options.exclude:
        raise UsageProblem(f"--exclude {options.target!r}", "is the --target column, which is never a predictor", "remove it from --exclude")
    both = [name for name in options.predictors or () if name in options.exclude]
    if both:
        raise UsageProblem(f"--predictors and --exclude {both[0]!r}", "both name this column", "keep it in one of them")
    for rule_id, config in sorted(options.rules.items()):
        _require_columns(names, config.exempt, f"rule {rule_id}: exempt")


def resolve_roles(table: pa.Table, options: CheckOptions) -> Roles:
    """Decide target, id and predictors from the options and the columns' kinds."""
    names = list(table.column_names)
    if options.target is None:
        usable = target_candidates(table)
        example = f"e.g. --target {usable[-1]!r}" if usable else "no column of this table holds numbers"
        raise UsageProblem("--target", "is required", f"name the response column, {example}")
    if options.target not in names:
        usable = target_candidates(table)
        raise UsageProblem("--target", f"{options.target!r} is not a column of the table", closest_names(options.target, usable or names, kind="numeric columns"))
    if options.id is not None:
        _require_columns(names, (options.id,), "--id")
    _require_columns(names, options.exclude, "--exclude")
    _require_columns(names, options.categorical, "--categorical")
    if options.order is not None:
        _require_columns(names, (options.order,), "--order")
        _require_orderable(table.column(options.order), options.order)
    group, group_origin = _group_column(table, options)
    if options.predictors is not None:
        _require_columns(names, options.predictors, "--predictors")
        for special, flag in ((options.target, "--target"), (options.id, "--id"), (group, "--group")):
            if special in options.predictors:
                raise UsageProblem("--predictors", f"lists {special!r}, which is the {flag} column", "remove it from --predictors")
    _check_conflicts(names, options)
    declared = set(options.categorical)
    kinds = {name: infer_kind(table.column(name), name in declared) for name in names}
    left_out: dict[str, str] = {}
    if options.predictors is not None:
        predictors = tuple(dict.fromkeys(options.predictors))
        for name in predictors:
            if kinds[name] is Kind.TEXT:
                kinds[name] = Kind.CATEGORICAL
    else:
        chosen: list[str] = []
        for name in names:
            if name in (options.target, options.id, group) or name in options.exclude:
                continue
            kind = kinds[name]
            numbers_reason = numbers_as_text_reason(table.column(name)) if kind in (Kind.TEXT, Kind.CATEGORICAL) and name not in declared else None
            if numbers_reason is not None:
                left_out[name] = numbers_reason
            elif kind is Kind.TEXT:
                left_out[name] = _text_reason(table.column(name))
            elif kind is Kind.DATETIME:
                left_out[name] = "a date or time: its raw value is not a predictor; derive a trend, season or weekday column, or use it to order rows"
            elif kind is Kind.NUMERIC and (index_reason := _numeric_index_reason(table.column(name))) is not None:
                left_out[name] = index_reason
            else:
                chosen.append(name)
        predictors = tuple(chosen)
    for name in predictors:
        if kinds[name] is Kind.CATEGORICAL and (levels_reason := _too_many_levels(table.column(name))) is not None:
            left_out[name] = levels_reason
    predictors = tuple(name for name in predictors if name not in left_out)
    if options.intercept and INTERCEPT in predictors:
        raise UsageProblem(
            f"column {INTERCEPT!r}", "has the name of the model's constant term", f"rename the column, --exclude {INTERCEPT}, or add --no-intercept"
        )
    return Roles(
        target=options.target,
        id=options.id,
        predictors=predictors,
        kinds=kinds,
        left_out=left_out,
        declared_categorical=tuple(options.categorical),
        group=group,
        group_origin=group_origin,
    )


NO_GROUP = "none"


def _group_column(table: pa.Table, options: CheckOptions) -> tuple[str | None, str | None]:
    """The column whose equal values mark a group of rows, and where that choice came from.

    ``--group COL`` names it (``--group none`` turns grouping off); without
    it a ``--id`` column whose values repeat is the group (one row per site
    and day: the site).
    """
    if options.group is not None:
        if options.group.strip().lower() == NO_GROUP:
            return None, None
        _require_columns(list(table.column_names), (options.group,), "--group")
        if options.group == options.target:
            raise UsageProblem("--group", f"names the --target column {options.target!r}", "name the column that marks each row's site, customer or machine")
        return options.group, "--group"
    if options.id is not None and distinct_labels(table.column(options.id)) < table.num_rows:
        return options.id, "the repeating --id"
    return None, None


ORDER_EXAMPLE_CHARS = 40


def _require_orderable(column: pa.ChunkedArray, name: str) -> None:
    """Raise a usage problem unless ``column`` holds numbers, dates, times or durations that can order the rows."""
    t = column.type.value_type if pa.types.is_dictionary(column.type) else column.type
    if _is_numeric_type(t) or pa.types.is_boolean(t) or (pa.types.is_temporal(t) and not pa.types.is_interval(t)):
        return
    present = column.drop_null()
    if pa.types.is_dictionary(column.type):
        present = present.cast(t)
    if _is_text_type(t) and len(present):
        days = pc.utf8_slice_codeunits(present, 0, 10)
        dates = pc.strptime(days, format="%Y-%m-%d", unit="s", error_is_null=True)
        # A day beyond its month (2024-02-30) parses as a later day; writing it back shows the difference.
        valid = pc.fill_null(pc.equal(pc.strftime(dates, format="%Y-%m-%d"), days), False)
        if dates.null_count < len(present):
            bad = present.filter(pc.invert(valid))[0].as_py()
            found = f"dates, but {bad[:ORDER_EXAMPLE_CHARS]!r} is not a valid date, so the column was read as text"
        else:
            found = f"text, such as {present[0].as_py()[:ORDER_EXAMPLE_CHARS]!r}, that is not a number or an ISO date"
    else:
        found = f"values of type {t}" if len(present) else "no values"
    raise UsageProblem(
        f"--order {name!r}",
        f"must be a column of numbers, dates or times to put the rows in order; it holds {found}",
        "name a date, time or number column, or write its values as ISO dates (YYYY-MM-DD) or numbers",
    )


def target_candidates(table: pa.Table) -> list[str]:
    """Columns that could be a least-squares response: numeric, and neither row numbers nor whole-number dates."""
    return [
        name
        for name in table.column_names
        if infer_kind(table.column(name), False) is Kind.NUMERIC and _numeric_index_reason(table.column(name)) is None
    ]


MAX_DESIGN_CELLS = 200_000_000
"""Dummy cells (levels x rows) one category may add to the design: 1.6 GB of doubles."""
MAX_LEVELS = 1_000


def _too_many_levels(column: pa.ChunkedArray) -> str | None:
    """Why a category has too many levels to enter the design as dummies, or None.

    Each level beyond the reference is a dense column of the design; a category of tens of thousands of levels
    would need gigabytes and hours of factoring, and leaves a handful of rows per parameter. The cap is the smaller
    of :data:`MAX_LEVELS` and :data:`MAX_DESIGN_CELLS` over the rows.
    """
    present = len(column) - column.null_count
    if present == 0:
        return None
    distinct = int(pc.count_distinct(column).as_py() or 0)
    cap = min(MAX_LEVELS, MAX_DESIGN_CELLS // present)
    if distinct - 1 <= cap:
        return None
    return (
        f"a category of {distinct:,} levels in {present:,} rows: its {distinct - 1:,} dummies would exceed the design's "
        f"limit of {cap:,} for this many rows; group its levels, or use it as --id or --group"
    )


def _numeric_index_reason(column: pa.ChunkedArray) -> str | None:
    """Why a numeric column is an index rather than a measurement: row numbers or whole-number dates; None otherwise.

    Row numbers are the whole numbers 1..n (or 0..n-1) in any order, one per row; whole-number dates read as
    YYYYMMDD with a real month and day on every row (common practice for exports from spreadsheets and databases).
    """
    if column.null_count or len(column) < IDENTIFIER_MIN_ROWS or not pa.types.is_integer(column.type):
        return None
    values = np.asarray(pc.cast(column, pa.int64()).to_numpy(zero_copy_only=False))
    low, high = int(values.min()), int(values.max())
    if low in (0, 1) and high - low == values.size - 1 and np.unique(values).size == values.size:
        return f"row numbers ({low}..{high}, one per row): an index of the rows, not a property of them; use it as --id or --order"
    if 1000_01_01 <= low and high <= 2999_12_31:
        month, day = (values // 100) % 100, values % 100
        if np.all((month >= 1) & (month <= 12) & (day >= 1) & (day <= 31)):
            return (
                f"whole numbers that read as dates (YYYYMMDD, {low} to {high}): their raw value is not a predictor; "
                "convert the column to a date, then derive a trend or season, or use it to order rows"
            )
    return None


def _text_reason(column: pa.ChunkedArray) -> str:
    present = len(column) - column.null_count
    distinct = pc.count_distinct(column).as_py() if present else 0
    if distinct == present:
        return f"text with a different value in each of its {present} rows (an identifier or free text); as a category it would cost one parameter per row"
    return f"text with {distinct} distinct values in {present} rows; as a category it would cost {distinct - 1} parameters"


UNITS_PER_DAY = {"s": 86_400.0, "ms": 86_400e3, "us": 86_400e6, "ns": 86_400e9}


def numeric_values(column: pa.ChunkedArray) -> np.ndarray:
    """A numeric, boolean or datetime column as float64 with NaN for missing values (dates, times and durations in days)."""
    t = column.type
    if pa.types.is_dictionary(t):
        column = column.cast(t.value_type)
        t = column.type
    if pa.types.is_null(t):
        return np.full(len(column), np.nan)
    if pa.types.is_duration(t) or pa.types.is_time(t):
        units = pc.cast(column, pa.int64() if t.bit_width == 64 else pa.int32())
        return np.asarray(units.to_numpy(zero_copy_only=False), dtype=np.float64) / UNITS_PER_DAY[t.unit]
    if pa.types.is_temporal(t):
        seconds = pc.cast(pc.cast(column, pa.timestamp("s")), pa.int64())
        return np.asarray(seconds.to_numpy(zero_copy_only=False), dtype=np.float64) / 86400.0
    if pa.types.is_boolean(t):
        column = pc.cast(column, pa.int8())
    # Integers beyond 2**53 round to the nearest double, as every statistics package does. A float64 column is
    # converted directly: the cast's result converts about a hundred times slower for short columns.
    floats = column if pa.types.is_float64(t) else pc.cast(column, pa.float64(), safe=False)
    values = floats.to_numpy(zero_copy_only=False)
    return np.asarray(values, dtype=np.float64)


def distinct_labels(column: pa.ChunkedArray) -> int:
    """How many distinct values the row-label column holds (missing counts as one value).

    Fewer than the rows means a label names a group of rows (every site-day of
    a site), not one row.
    """
    if pa.types.is_null(column.type):
        return min(len(column), 1)
    if pa.types.is_dictionary(column.type):
        column = column.cast(column.type.value_type)
    return int(pc.count_distinct(column, mode="all").as_py())


def label_values(column: pa.ChunkedArray) -> list[str | None]:
    """A column as text labels (None for missing), for categories and row labels."""
    t = column.type
    if pa.types.is_dictionary(t):
        column = column.cast(t.value_type)
    if pa.types.is_floating(column.type):
        return [None if v is None else _float_label(v) for v in column.to_pylist()]
    return [None if v is None else (v if isinstance(v, str) else str(v)) for v in column.to_pylist()]


MISSING_GROUP = "(missing)"


def group_labels(column: pa.ChunkedArray) -> list[str]:
    """A group column as text labels, a missing value being a group of its own (:data:`MISSING_GROUP`)."""
    return [MISSING_GROUP if v is None else v for v in label_values(column)]


def _float_label(value: float) -> str:
    return str(int(value)) if float(value).is_integer() else repr(value)


def row_labels(batch: pa.Table, roles: Roles) -> list[str | int] | None:
    """The id labels of a batch's rows, or None without an id column."""
    if roles.id is None:
        return None
    column = batch.column(roles.id)
    if pa.types.is_integer(column.type):
        return [v if v is not None else "" for v in column.to_pylist()]
    return [v if v is not None else "" for v in label_values(column)]

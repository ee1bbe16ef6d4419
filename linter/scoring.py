"""The model's intended use: declared predictor ranges, and new rows to be scored through the fitted design.

A scoring table (``--score``) holds the rows the model will be asked to
predict. It is read with the same reader and missing codes as the table,
its columns take the table's roles, and its rows become design rows with
the fitted design's terms and reference levels, so that their leverage
``h_new = x_new' (X'X)^-1 x_new`` can be compared with the data's.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
import pyarrow as pa

from .design import Design, Term, category_codes
from .errors import UsageProblem, closest_names
from .options import CheckOptions
from .reading import ReadOptions, TableInfo, read_table
from .roles import Kind, Roles, apply_missing_codes, label_values, numeric_values
from .stats.fit import PreliminaryFit

NUMERIC_KINDS = (Kind.NUMERIC, Kind.DATETIME)


def check_declared_ranges(roles: Roles, ranges: Mapping[str, tuple[float, float]]) -> None:
    """Stop with a usage problem when a declared range names a column that is not a numeric predictor."""
    for column in sorted(ranges):
        if column not in roles.kinds:
            raise UsageProblem(f"range for {column!r}", "names no column of the table", closest_names(column, list(roles.kinds)))
        if column not in roles.predictors or roles.kinds[column] is not Kind.NUMERIC:
            raise UsageProblem(
                f"range for {column!r}",
                f"names a column that is not a numeric predictor (it is {roles.kinds[column]}"
                + ("" if column in roles.predictors else ", not a predictor")
                + ")",
                "declare ranges only for numeric predictors",
            )


@dataclass(frozen=True)
class ScoreTable:
    """The scoring table as read, with its facts."""

    table: pa.Table
    info: TableInfo


def read_score_table(options: CheckOptions, roles: Roles) -> ScoreTable | None:
    """Read the ``--score`` table with the table's reading options and missing codes; None without one."""
    if options.score is None:
        return None
    try:
        table, info = read_table(options.score, ReadOptions(sep=options.sep, encoding=options.encoding))
    except UsageProblem as problem:
        raise UsageProblem(f"--score {problem.where}", problem.problem, problem.fix) from None
    names = list(table.column_names)
    missing = [c for c in roles.predictors if c not in names]
    if missing:
        raise UsageProblem(
            f"--score {options.score}",
            f"lacks the predictor column {missing[0]!r}" + (f" and {len(missing) - 1} more" if len(missing) > 1 else ""),
            "give the scoring table every predictor column of the table (" + closest_names(missing[0], names) + ")",
        )
    codes = {c: v for c, v in options.missing_codes.items() if c == "*" or c in names}
    table, _ = apply_missing_codes(table, codes)
    for column in roles.predictors:
        if roles.kinds[column] in NUMERIC_KINDS:
            _numbers(table.column(column), column, options.score)
    return ScoreTable(table, info)


def _numbers(column: pa.ChunkedArray, name: str, path: str) -> np.ndarray:
    try:
        return numeric_values(column)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError):
        raise UsageProblem(
            f"--score {path}: column {name!r}",
            f"holds {column.type} values where the table has numbers",
            "export the column as plain numbers",
        ) from None


@dataclass(frozen=True)
class ScoredRows:
    """The scoring table's rows seen through the fitted design.

    ``complete`` marks rows with every predictor present; ``X`` and
    ``leverage`` cover those rows only, in table order. ``outside`` maps
    each predictor to a mask over all rows: a value below the smallest or
    above the largest complete-case value, or a category level the data
    never had. ``largest_leverage`` is the largest h_ii among the data's
    complete cases.
    """

    rows: int
    complete: np.ndarray
    X: np.ndarray
    leverage: np.ndarray
    outside: Mapping[str, np.ndarray]
    observed: Mapping[str, tuple[float, float]]
    unseen_levels: Mapping[str, tuple[str, ...]]
    largest_leverage: float
    info: TableInfo
    labels: tuple[str | int, ...]

    @property
    def positions(self) -> np.ndarray:
        """0-based scoring-table rows of the complete rows."""
        return np.flatnonzero(self.complete)

    @property
    def outside_any(self) -> np.ndarray:
        """Complete rows outside the observed range of at least one predictor (mask over complete rows)."""
        mask = np.zeros(self.rows, dtype=bool)
        for column_mask in self.outside.values():
            mask |= column_mask
        return mask[self.complete]

    @property
    def hidden(self) -> np.ndarray:
        """Complete rows inside every observed range but beyond the data's largest leverage (mask over complete rows)."""
        return ~self.outside_any & (self.leverage > self.largest_leverage)


@dataclass(frozen=True)
class TermRows:
    """A table's rows through given design terms: which are complete, their design rows, and what the terms never saw.

    ``outside`` maps each predictor to a mask over all rows: a value outside
    ``observed`` or a category level the terms lack; ``X`` holds the complete rows.
    """

    complete: np.ndarray
    X: np.ndarray
    outside: Mapping[str, np.ndarray]
    unseen_levels: Mapping[str, tuple[str, ...]]


def rows_through_terms(
    table: pa.Table,
    terms: Sequence[Term],
    observed: Mapping[str, tuple[float, float]],
    path: str,
    converted: Mapping[str, tuple[float, float]] | None = None,
    unseen_complete: bool = True,
) -> TermRows:
    """Design rows of ``table`` with the given terms and reference levels.

    A row whose category level the terms lack gets all-zero indicator
    columns, or, without ``unseen_complete``, counts as incomplete.

    ``converted`` maps a numeric column to ``(scale, offset)``: its values
    are read as ``(value - offset) / scale`` (back into the units the terms
    were fitted in).
    """
    rows = table.num_rows
    complete = np.ones(rows, dtype=bool)
    blocks: list[np.ndarray] = []
    outside: dict[str, np.ndarray] = {}
    unseen: dict[str, tuple[str, ...]] = {}
    for term in terms:
        if term.kind is None:
            blocks.append(np.ones((rows, 1)))
            continue
        column = table.column(term.source)
        if term.kind in NUMERIC_KINDS:
            values = _numbers(column, term.source, path)
            if converted and term.source in converted:
                scale, offset = converted[term.source]
                values = (values - offset) / scale
            present = np.isfinite(values)
            if term.source in observed:
                low, high = observed[term.source]
                outside[term.source] = present & ((values < low) | (values > high))
            complete &= present
            blocks.append(np.where(present, values, 0.0)[:, None])
            continue
        codes, levels = category_codes(column, term.kind)
        present = codes >= 0
        labels = np.array(levels, dtype=object)[np.where(present, codes, 0)] if levels else np.full(rows, None, dtype=object)
        known = set(term.levels) | ({term.reference} if term.reference is not None else set())
        is_unseen = present & np.array([label not in known for label in labels], dtype=bool)
        outside[term.source] = is_unseen
        if is_unseen.any():
            unseen[term.source] = tuple(sorted({str(label) for label in labels[is_unseen]}))
        complete &= present if unseen_complete else present & ~is_unseen
        if term.levels:
            blocks.append(np.column_stack([(labels == level) & present for level in term.levels]).astype(np.float64))
    X = np.hstack(blocks)[complete] if blocks else np.empty((int(complete.sum()), 0))
    return TermRows(complete, np.ascontiguousarray(X), outside, unseen)


def score_rows(score: ScoreTable, design: Design, roles: Roles, fit: PreliminaryFit, data_leverage: np.ndarray) -> ScoredRows:
    """Build design rows for the scoring table with the fitted design's terms and reference levels.

    The leverage of a new row, x' (X'X)^-1 x, comes from a triangular solve
    with the design's R factor (O(rows p^2)); no rows x rows matrix is formed.
    """
    names = design.column_names
    observed: dict[str, tuple[float, float]] = {}
    for term in design.terms:
        if term.kind in NUMERIC_KINDS:
            fitted = design.X[:, names.index(term.columns[0])]
            observed[term.source] = (float(fitted.min()), float(fitted.max())) if fitted.size else (np.nan, np.nan)
    through = rows_through_terms(score.table, design.terms, observed, score.info.path)
    X = through.X
    leverage = fit.score_rows(X, np.zeros(X.shape[0])).hat if X.shape[0] else np.zeros(0)
    largest = float(data_leverage.max()) if data_leverage.size else float("nan")
    return ScoredRows(
        rows=score.table.num_rows,
        complete=through.complete,
        X=X,
        leverage=leverage,
        outside=through.outside,
        observed=observed,
        unseen_levels=through.unseen_levels,
        largest_leverage=largest,
        info=score.info,
        labels=_labels(score.table, roles.id),
    )


def _labels(table: pa.Table, id_column: str | None) -> tuple[str | int, ...]:
    if id_column is None or id_column not in table.column_names:
        return tuple(range(1, table.num_rows + 1))
    column = table.column(id_column)
    values = column.to_pylist() if pa.types.is_integer(column.type) else label_values(column)
    return tuple("" if v is None else v for v in values)

"""The design matrix, built once and explicitly: intercept, numeric columns, treatment-coded categories."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Callable, Mapping

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .roles import INTERCEPT as INTERCEPT
from .roles import Kind, Roles, label_values, numeric_values


@dataclass(frozen=True)
class Term:
    """One model term: a source column and the design columns it becomes.

    A categorical term with k levels among complete cases becomes k-1
    dummy columns named ``column=level``; ``reference`` is the level left out.
    """

    source: str
    kind: Kind | None
    columns: tuple[str, ...]
    levels: tuple[str, ...] = ()
    reference: str | None = None

    @property
    def df(self) -> int:
        """Parameters this term costs."""
        return len(self.columns)


@dataclass(frozen=True)
class Design:
    """The complete-case design matrix ``X`` (n x p), the target ``y`` and how they were built.

    ``positions`` are the 0-based table rows of the complete cases, in table order.
    """

    terms: tuple[Term, ...]
    intercept: bool
    X: np.ndarray
    y: np.ndarray
    positions: np.ndarray
    table_rows: int
    missing_by_column: Mapping[str, int]

    @property
    def n(self) -> int:
        """Complete cases."""
        return int(self.X.shape[0])

    @property
    def p(self) -> int:
        """Estimated parameters, the intercept and every dummy included."""
        return int(self.X.shape[1])

    @cached_property
    def column_names(self) -> tuple[str, ...]:
        """Names of the design columns, in order."""
        return tuple(c for t in self.terms for c in t.columns)

    @cached_property
    def column_sources(self) -> tuple[str, ...]:
        """For each design column, the table column (or the intercept) it comes from."""
        return tuple(t.source for t in self.terms for _ in t.columns)

    @cached_property
    def column_index(self) -> Mapping[str, int]:
        """Each design column's position, by name."""
        return {name: j for j, name in enumerate(self.column_names)}

    @cached_property
    def _terms_by_source(self) -> Mapping[str, Term]:
        return {t.source: t for t in self.terms}

    def term(self, source: str) -> Term:
        """The term built from table column ``source``."""
        return self._terms_by_source[source]

    def describe(self) -> dict[str, object]:
        """The hidden choices, said out loud for every report."""
        return {
            "intercept": self.intercept,
            "coding": "treatment (dummy) coding; reference level = most frequent among complete cases",
            "terms": [
                {
                    "column": t.source,
                    "kind": str(t.kind) if t.kind else "intercept",
                    "parameters": t.df,
                    **({"reference": t.reference, "levels": list(t.levels)} if t.reference is not None else {}),
                }
                for t in self.terms
            ],
            "rows_dropped": self.table_rows - self.n,
        }


def category_codes(column: pa.ChunkedArray, kind: Kind) -> tuple[np.ndarray, list[str]]:
    """Integer codes (-1 for missing) and the level labels of a categorical or boolean column."""
    if pa.types.is_dictionary(column.type):
        column = column.cast(column.type.value_type)
    if not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
        column = pa.chunked_array([pa.array(label_values(column), pa.string())])
    encoded = pc.dictionary_encode(column).combine_chunks()
    codes = encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int64)
    levels = [str(v) for v in encoded.dictionary.to_pylist()]
    if kind is Kind.BOOLEAN:
        levels = [level.lower() for level in levels]
    return codes, levels


FILL_ROWS = 8_192


def _fill_design(
    X: np.ndarray,
    positions: np.ndarray | None,
    intercept: bool,
    sources: list[tuple[np.ndarray, tuple[int, ...]]],
) -> None:
    """Write every design column into the preallocated ``X`` (rows x p, C order), ``FILL_ROWS`` rows at a time.

    ``sources`` holds, per predictor in design order, its values over all table
    rows (floats, or integer level codes) and the codes of its dummy columns
    (empty for a numeric column, which fills one column). ``positions`` picks
    the complete rows (None: every row). Each block of rows stays in cache while
    its columns are written, and no temporary is larger than one block.
    """
    first = 1 if intercept else 0
    if intercept:
        X[:, 0] = 1.0
    for start in range(0, X.shape[0], FILL_ROWS):
        stop = min(start + FILL_ROWS, X.shape[0])
        rows = slice(start, stop) if positions is None else positions[start:stop]
        block = X[start:stop]
        column = first
        for values, dummies in sources:
            picked = values[rows]
            if not dummies:
                block[:, column] = picked
                column += 1
                continue
            for code in dummies:
                np.equal(picked, code, out=block[:, column], casting="unsafe")
                column += 1


@dataclass(frozen=True)
class ModelColumns:
    """The target and predictors of a table (or row batch) before coding: values over all rows and which rows are complete.

    ``numeric`` holds float64 values (NaN for missing) of numeric and date
    predictors; ``categories`` the integer level codes (-1 for missing) and
    level labels of the others.
    """

    y: np.ndarray
    complete: np.ndarray
    numeric: Mapping[str, np.ndarray]
    categories: Mapping[str, tuple[np.ndarray, list[str]]]
    missing_by_column: Mapping[str, int]

    @classmethod
    def of(cls, table: pa.Table, roles: Roles, values: Callable[[str], np.ndarray] | None = None) -> "ModelColumns":
        """Read the model columns: a row is complete with the target and every predictor present and finite.

        ``values`` converts a numeric column to float64 (default: :func:`numeric_values`
        of the table's column); the run context passes its shared, cached conversion.
        """
        if values is None:
            values = lambda name: numeric_values(table.column(name))  # noqa: E731
        n_rows = table.num_rows
        y = values(roles.target) if roles.kinds[roles.target] in (Kind.NUMERIC, Kind.BOOLEAN) else np.full(n_rows, np.nan)
        complete = np.isfinite(y)
        missing_by_column: dict[str, int] = {roles.target: int(n_rows - np.count_nonzero(complete))}
        numeric: dict[str, np.ndarray] = {}
        categories: dict[str, tuple[np.ndarray, list[str]]] = {}
        for name in roles.predictors:
            kind = roles.kinds[name]
            column = table.column(name)
            if kind in (Kind.NUMERIC, Kind.DATETIME):
                numeric[name] = values(name)
                present = np.isfinite(numeric[name])
            else:
                categories[name] = category_codes(column, kind)
                present = categories[name][0] >= 0
            missing_by_column[name] = int(n_rows - np.count_nonzero(present))
            complete &= present
        return cls(y, complete, numeric, categories, missing_by_column)

    def coded(self, roles: Roles, intercept: bool, dummies: Mapping[str, tuple[str, ...]]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The design rows ``X``, target ``y`` and 0-based positions of the complete rows.

        ``dummies[name]`` lists the levels of a categorical predictor that
        become indicator columns, in order (a level this table lacks gives a
        column of zeros).
        """
        every_row = bool(self.complete.all())
        positions = np.arange(self.complete.size) if every_row else np.flatnonzero(self.complete)
        sources: list[tuple[np.ndarray, tuple[int, ...]]] = []
        for name in roles.predictors:
            if name in self.numeric:
                sources.append((self.numeric[name], ()))
                continue
            codes, levels = self.categories[name]
            index = {level: i for i, level in enumerate(levels)}
            wanted = tuple(index.get(level, -2) for level in dummies.get(name, ()))
            if wanted:
                sources.append((codes, wanted))
        p = (1 if intercept else 0) + sum(1 if not d else len(d) for _, d in sources)
        X = np.empty((positions.size, p), dtype=np.float64)
        _fill_design(X, None if every_row else positions, intercept, sources)
        y = np.ascontiguousarray(self.y, dtype=np.float64) if every_row else self.y[positions]
        return X, y, positions


def build_design(table: pa.Table, roles: Roles, intercept: bool = True, values: Callable[[str], np.ndarray] | None = None) -> Design:
    """Build the complete-case design: rows with the target and every predictor present and finite.

    The design is written straight into one preallocated C-ordered float64
    array (row batches of it are contiguous for the batched QR and row
    scoring); ``values`` is as for :meth:`ModelColumns.of`.
    """
    columns = ModelColumns.of(table, roles, values)
    terms: list[Term] = [Term(INTERCEPT, None, (INTERCEPT,))] if intercept else []
    for name in roles.predictors:
        kind = roles.kinds[name]
        if name in columns.numeric:
            terms.append(Term(name, kind, (name,)))
            continue
        all_codes, all_levels = columns.categories[name]
        kept = all_codes[columns.complete]
        if kept.size == 0:
            terms.append(Term(name, kind, ()))
            continue
        counts = np.bincount(kept, minlength=len(all_levels))
        terms.append(treatment_term(name, kind, {all_levels[i]: int(c) for i, c in enumerate(counts) if c > 0}))
    X, y, positions = columns.coded(roles, intercept, {t.source: t.levels for t in terms if t.reference is not None})
    return Design(
        terms=tuple(terms),
        intercept=intercept,
        X=X,
        y=y,
        positions=positions,
        table_rows=table.num_rows,
        missing_by_column=columns.missing_by_column,
    )


def treatment_term(name: str, kind: Kind, counts: Mapping[str, int]) -> Term:
    """The treatment-coded term of a category from its level counts among complete rows.

    The reference is the most frequent level (ties: first in sorted order);
    the other levels become indicator columns in sorted order.
    """
    reference = min(counts, key=lambda level: (-counts[level], level))
    others = tuple(sorted(level for level in counts if level != reference))
    return Term(name, kind, tuple(f"{name}={level}" for level in others), others, reference)

"""The design matrix, built once and explicitly: intercept, numeric columns, treatment-coded categories."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .roles import Kind, Roles, label_values, numeric_values

INTERCEPT = "(intercept)"


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

    @property
    def column_names(self) -> tuple[str, ...]:
        """Names of the design columns, in order."""
        return tuple(c for t in self.terms for c in t.columns)

    @property
    def column_sources(self) -> tuple[str, ...]:
        """For each design column, the table column (or the intercept) it comes from."""
        return tuple(t.source for t in self.terms for _ in t.columns)

    def term(self, source: str) -> Term:
        """The term built from table column ``source``."""
        for t in self.terms:
            if t.source == source:
                return t
        raise KeyError(source)

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


def _reference_and_levels(codes: np.ndarray, levels: list[str]) -> tuple[int, list[int]]:
    """The most frequent level (ties: first in sorted order) and the other present levels, sorted."""
    counts = np.bincount(codes, minlength=len(levels))
    present = [i for i in range(len(levels)) if counts[i] > 0]
    reference = min(present, key=lambda i: (-counts[i], levels[i]))
    return reference, sorted((i for i in present if i != reference), key=lambda i: levels[i])


def build_design(table: pa.Table, roles: Roles, intercept: bool = True) -> Design:
    """Build the complete-case design: rows with the target and every predictor present and finite."""
    n_rows = table.num_rows
    y_all = numeric_values(table.column(roles.target)) if roles.kinds[roles.target] in (Kind.NUMERIC, Kind.BOOLEAN) else np.full(n_rows, np.nan)
    complete = np.isfinite(y_all)
    missing_by_column: dict[str, int] = {roles.target: int((~np.isfinite(y_all)).sum())}
    numeric: dict[str, np.ndarray] = {}
    categories: dict[str, tuple[np.ndarray, list[str]]] = {}
    for name in roles.predictors:
        kind = roles.kinds[name]
        column = table.column(name)
        if kind in (Kind.NUMERIC, Kind.DATETIME):
            values = numeric_values(column)
            present = np.isfinite(values)
            numeric[name] = values
        else:
            categories[name] = category_codes(column, kind)
            present = categories[name][0] >= 0
        missing_by_column[name] = int((~present).sum())
        complete &= present
    positions = np.flatnonzero(complete)
    terms: list[Term] = [Term(INTERCEPT, None, (INTERCEPT,))] if intercept else []
    blocks: list[np.ndarray] = [np.ones((positions.size, 1))] if intercept else []
    for name in roles.predictors:
        kind = roles.kinds[name]
        if name in numeric:
            terms.append(Term(name, kind, (name,)))
            blocks.append(numeric[name][positions, None])
            continue
        all_codes, all_levels = categories[name]
        kept = all_codes[positions]
        if kept.size == 0:
            terms.append(Term(name, kind, ()))
            continue
        reference, others = _reference_and_levels(kept, all_levels)
        names = tuple(all_levels[i] for i in others)
        terms.append(Term(name, kind, tuple(f"{name}={level}" for level in names), names, all_levels[reference]))
        if others:
            blocks.append(np.column_stack([(kept == i).astype(np.float64) for i in others]))
    X = np.hstack(blocks) if blocks else np.empty((positions.size, 0))
    return Design(
        terms=tuple(terms),
        intercept=intercept,
        X=np.ascontiguousarray(X, dtype=np.float64),
        y=y_all[positions].astype(np.float64),
        positions=positions,
        table_rows=n_rows,
        missing_by_column=missing_by_column,
    )

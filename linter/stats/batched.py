"""Statistics of a table merged from its row batches: the indicator R factor, the pass-1 statistics, and the balanced merge.

Merging the statistics of the batches of a table, in table order, gives
those of the whole table (:mod:`prefit.engines.passes` computes them per batch).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Protocol, Sequence, TypeVar

import numpy as np

from ..design import INTERCEPT, ModelColumns, Term, treatment_term
from ..roles import Kind, Roles
from .factor import DesignFactor
from .grouping import GroupFactors, GroupRows
from .mergeable import Moments, TriangularFactor, triangular
from .summaries import ColumnTally


@dataclass(frozen=True)
class IndicatorFactor:
    """The R factor of ``[intercept | predictors, one indicator per level | target]`` over complete rows.

    ``levels`` lists, per categorical predictor, every level seen among
    complete rows (sorted), with ``level_counts`` their counts; ``target``
    holds the moments of the target over complete rows.
    """

    predictors: tuple[str, ...]
    intercept: bool
    levels: Mapping[str, tuple[str, ...]]
    level_counts: Mapping[str, Mapping[str, int]]
    factor: TriangularFactor
    target: Moments
    groups: GroupFactors | None = None

    @classmethod
    def of(cls, columns: ModelColumns, roles: Roles, intercept: bool, groups_of_rows: Sequence[str] | None = None) -> "IndicatorFactor":
        """The factor of one batch's complete rows; with ``groups_of_rows`` (each batch row's group) also the per-group factors."""
        levels: dict[str, tuple[str, ...]] = {}
        counts: dict[str, dict[str, int]] = {}
        for name, (codes, labels) in columns.categories.items():
            tally = np.bincount(codes[columns.complete], minlength=len(labels))
            counts[name] = {labels[i]: int(c) for i, c in enumerate(tally) if c > 0}
            levels[name] = tuple(sorted(counts[name]))
        X, y, positions = columns.coded(roles, intercept, levels)
        block = np.column_stack([X, y])
        groups = None if groups_of_rows is None else GroupFactors.of(X, y, GroupRows.of([groups_of_rows[int(p)] for p in positions]))
        return cls(roles.predictors, intercept, levels, counts, TriangularFactor.of(block), Moments.of(y), groups)

    def layout(self) -> dict[tuple[str, str | None], int]:
        """The column index of each (predictor, level) pair; numeric predictors have level None, the target is last."""
        index: dict[tuple[str, str | None], int] = {}
        if self.intercept:
            index[(INTERCEPT, None)] = 0
        for name in self.predictors:
            for level in self.levels.get(name, (None,)):
                index[(name, level)] = len(index)
        return index

    def merge(self, other: "IndicatorFactor") -> "IndicatorFactor":
        """The factor of both batches: each R is placed in the union of their columns, stacked and re-factored."""
        levels = {name: tuple(sorted(set(self.levels[name]) | set(other.levels[name]))) for name in self.levels}
        counts = {name: _add_counts(self.level_counts[name], other.level_counts[name]) for name in self.levels}
        merged = IndicatorFactor(self.predictors, self.intercept, levels, counts, self.factor, self.target.merge(other.target))
        union = merged.layout()
        width = len(union) + 1
        stacked = np.vstack([part._placed(union, width) for part in (self, other)])
        groups = None
        if self.groups is not None and other.groups is not None:
            groups = self.groups.placed(self._destination(union, width), width).merge(other.groups.placed(other._destination(union, width), width))
        return IndicatorFactor(
            self.predictors, self.intercept, levels, counts,
            TriangularFactor(triangular(stacked), self.factor.rows + other.factor.rows),
            merged.target,
            groups,
        )

    def _destination(self, union: Mapping[tuple[str, str | None], int], width: int) -> list[int]:
        return [union[key] for key in self.layout()] + [width - 1]

    def _placed(self, union: Mapping[tuple[str, str | None], int], width: int) -> np.ndarray:
        placed = np.zeros((self.factor.r.shape[0], width))
        placed[:, self._destination(union, width)] = self.factor.r
        return placed

    @property
    def rows(self) -> int:
        """Complete rows counted."""
        return self.factor.rows

    def total_sum_of_squares(self, intercept: bool) -> float:
        """The target's sum of squares over complete rows: about its mean with an intercept, about zero without."""
        moments = self.target
        return moments.m2 if intercept else moments.m2 + moments.count * moments.mean**2

    def terms(self, kinds: Mapping[str, Kind]) -> tuple[Term, ...]:
        """The design terms, treatment-coded exactly as :func:`prefit.design.build_design` codes them."""
        terms: list[Term] = [Term(INTERCEPT, None, (INTERCEPT,))] if self.intercept else []
        for name in self.predictors:
            if name not in self.levels:
                terms.append(Term(name, kinds[name], (name,)))
            elif not self.level_counts[name]:
                terms.append(Term(name, kinds[name], ()))
            else:
                terms.append(treatment_term(name, kinds[name], self.level_counts[name]))
        return tuple(terms)

    def _chosen(self, terms: Sequence[Term]) -> list[int]:
        """The columns of the treatment-coded design in this factor's layout, then the target's."""
        index = self.layout()
        chosen: list[int] = []
        for term in terms:
            if term.source == INTERCEPT:
                chosen.append(index[(INTERCEPT, None)])
            elif term.reference is None:
                chosen.extend(index[(term.source, None)] for _ in term.columns)
            else:
                chosen.extend(index[(term.source, level)] for level in term.levels)
        chosen.append(len(index))
        return chosen

    def design_groups(self, terms: Sequence[Term]) -> GroupFactors | None:
        """The per-group factors of the treatment-coded design and the target (None when pass 1 kept no groups)."""
        return None if self.groups is None else self.groups.select(self._chosen(terms))

    def design_factor(self, terms: Sequence[Term]) -> DesignFactor:
        """The pivoted QR factor of the treatment-coded design: the R of the chosen columns, re-factored and unit-scaled.

        ``X[:, S] = Q R[:, S]``, so the R factor of any column subset follows
        from this one; column norms of R are those of the design.
        """
        chosen = self._chosen(terms)
        r = triangular(self.factor.r[:, chosen])
        p = len(chosen) - 1
        norms = np.sqrt(np.einsum("ij,ij->j", r[:, :p], r[:, :p]))
        scales = np.where(norms > 0, norms, 1.0)
        r[:, :p] /= scales
        return DesignFactor.from_triangular(TriangularFactor(r, self.rows), scales)


def _add_counts(first: Mapping[str, int], second: Mapping[str, int]) -> dict[str, int]:
    merged = dict(first)
    for key, value in second.items():
        merged[key] = merged.get(key, 0) + value
    return merged


@dataclass(frozen=True)
class TableStatistics:
    """What pass 1 learns about a table: rows, a tally per column (when asked for) and the indicator factor."""

    rows: int
    tallies: Mapping[str, ColumnTally]
    model: IndicatorFactor

    def merge(self, other: "TableStatistics") -> "TableStatistics":
        """The statistics of both batches, this one first."""
        return TableStatistics(
            self.rows + other.rows,
            {name: tally.merge(other.tallies[name]) for name, tally in self.tallies.items()},
            self.model.merge(other.model),
        )


class Mergeable(Protocol):
    """A statistic of some rows that combines with the same statistic of the rows after them."""

    def merge(self: MergeableT, other: MergeableT) -> MergeableT: ...


MergeableT = TypeVar("MergeableT", bound=Mergeable)


def merge_all(parts: Sequence[MergeableT]) -> MergeableT:
    """Merge batch statistics in order, pairwise as a balanced tree (the same tree a distributed reduction builds)."""
    level = list(parts)
    while len(level) > 1:
        level = [level[i].merge(level[i + 1]) if i + 1 < len(level) else level[i] for i in range(0, len(level), 2)]
    return level[0]

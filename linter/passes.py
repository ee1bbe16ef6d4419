"""The passes over row batches that the stream and Dask engines run: pure functions of one batch returning mergeable statistics.

Pass 1 (:func:`first_pass`) tallies every column, counts missing-value
patterns and accumulates the R factor of the complete rows with every level
of every category as its own indicator column; the treatment coding (whose
reference level is the most frequent one among complete rows, known only at
the end) is then a choice of columns of that factor; with grouped rows it
also accumulates each group's centred factor in the same columns
(:class:`prefit.stats.grouping.GroupFactors`). Pass 2
(:func:`second_pass`) scores every complete row against the fit pass 1 fixed
and keeps the counts beyond each cutoff and the most extreme rows.
Merging the statistics of the batches of a table, in table order, gives
those of the whole table.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping, Protocol, Sequence, TypeVar

import numpy as np
import pyarrow as pa

from .design import INTERCEPT, ModelColumns, Term, treatment_term
from .roles import Kind, Roles, group_labels, label_values
from .stats.distribution import dkw_rank_error
from .stats.factor import DesignFactor
from .stats.fit import PreliminaryFit
from .stats.grouping import GroupFactors, GroupRows
from .stats.influence import row_influence
from .stats.mergeable import Moments, TriangularFactor, triangular
from .stats.resistant import RESIDUAL_LIMIT, ResistantFit
from .stats.robust import squared_distances
from .stats.skewed import FENCE_MULTIPLE, AdjustedFences
from .stats.summaries import ColumnTally

TOP_ROWS = 20
SCREENED_RULES = {
    "leverage": "influence.leverage",
    "studentized_residual": "outliers.studentized-residual",
    "cooks_distance": "influence.cooks-distance",
    "dffits": "influence.dffits",
    "dfbetas": "influence.dfbetas",
    "robust_distance": "outliers.multivariate",
    "fence_score": "outliers.univariate",
    "robust_residual": "influence.robust-distortion",
}
ROBUST_QUANTILE = 0.975
FENCE_CONFIDENCE = 0.99


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


def first_pass(batch: pa.Table, roles: Roles, intercept: bool, tallies: bool = True) -> TableStatistics:
    """Pass 1 over one batch of table rows: the indicator factor, and with ``tallies`` each column's counts and moments.

    Beyond the row budget the rules read the sample's column summaries and
    only the factor of the whole table, so the engines leave the tallies out.
    """
    counts = {name: ColumnTally.of(batch.column(name), roles.kinds[name], cap=0) for name in batch.column_names} if tallies else {}
    labels = group_labels(batch.column(roles.group)) if roles.group is not None else None
    return TableStatistics(batch.num_rows, counts, IndicatorFactor.of(ModelColumns.of(batch, roles), roles, intercept, labels))


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


@dataclass(frozen=True)
class Cutoff:
    """One cutoff of a per-row measure and how many complete rows lie beyond it."""

    name: str
    value: float
    beyond: int


@dataclass(frozen=True)
class MeasureScreen:
    """How far the rows of one per-row measure go: counts beyond each cutoff and the most extreme rows."""

    measure: str
    cutoffs: tuple[Cutoff, ...]
    top_values: np.ndarray = field(repr=False)
    top_positions: np.ndarray = field(repr=False)
    top_labels: tuple[str | int, ...] = ()
    column: str | None = None

    @property
    def key(self) -> str:
        """The measure, and the column for a per-column measure (``fence_score:kwh``)."""
        return self.measure if self.column is None else f"{self.measure}:{self.column}"

    def merge(self, other: "MeasureScreen") -> "MeasureScreen":
        """Both batches: counts add, the most extreme rows of either stay (ties: earlier row first)."""
        cutoffs = tuple(Cutoff(a.name, a.value, a.beyond + b.beyond) for a, b in zip(self.cutoffs, other.cutoffs))
        values = np.concatenate([self.top_values, other.top_values])
        positions = np.concatenate([self.top_positions, other.top_positions])
        labels = self.top_labels + other.top_labels
        keep = np.lexsort((positions, -values))[:TOP_ROWS]
        return MeasureScreen(self.measure, cutoffs, values[keep], positions[keep], tuple(labels[i] for i in keep) if labels else (), self.column)

    def to_dict(self) -> dict[str, object]:
        """Plain JSON types: cutoffs with counts, and the top rows (label or 1-based row number, value)."""
        shown = self.top_labels or tuple(int(p) + 1 for p in self.top_positions)
        return {
            **({"column": self.column} if self.column is not None else {}),
            "cutoffs": [{"name": c.name, "value": c.value, "rows_beyond": c.beyond} for c in self.cutoffs],
            "top_rows": [
                {"row": label, "row_number": int(p) + 1, "value": float(v)} for label, p, v in zip(shown, self.top_positions, self.top_values)
            ],
        }


def row_screens(fit: PreliminaryFit) -> dict[str, tuple[tuple[str, float], ...]]:
    """The cutoffs pass 2 counts, per measure (the influence and outlier rules' default thresholds)."""
    import scipy.stats

    n, k = fit.n, fit.rank
    dof = fit.df_resid - 1
    bonferroni = float(scipy.stats.t.isf(0.05 / (2 * n), dof)) if dof > 0 else float("inf")
    return {
        "leverage": (("2p/n", 2 * k / n), ("3p/n", 3 * k / n)),
        "studentized_residual": (("3", 3.0), ("bonferroni 0.05", bonferroni)),
        "cooks_distance": (("4/n", 4 / n), ("median F(p, n-p)", float(scipy.stats.f.median(k, n - k)) if n > k else float("inf"))),
        "dffits": (("2 sqrt(p/n)", float(2 * np.sqrt(k / n))),),
        "dfbetas": (("2/sqrt(n)", float(2 / np.sqrt(n))), ("1", 1.0)),
    }


@dataclass(frozen=True)
class RobustCentre:
    """A robust location and scatter of some numeric predictors (MCD on the sample), to measure every row against."""

    columns: tuple[str, ...]
    location: np.ndarray
    scatter: np.ndarray
    bulk_cutoff: float | None = None

    def cutoffs(self) -> tuple[tuple[str, float], ...]:
        """The chi-square 0.975 quantile of the squared distance (Rousseeuw & van Zomeren 1990), or in many columns the sample's own-bulk one."""
        import scipy.stats

        if self.bulk_cutoff is not None:
            return (("own bulk 0.975", self.bulk_cutoff),)
        return (("chi-square 0.975", float(scipy.stats.chi2.ppf(ROBUST_QUANTILE, len(self.columns)))),)


@dataclass(frozen=True)
class ColumnFences:
    """The adjusted-boxplot fences of numeric columns in the sample, to screen every value of the table against.

    Beyond the row budget the sample the rules see is a uniform sample of
    rows, and it is the quantile sketch: by the Dvoretzky-Kiefer-Wolfowitz
    inequality with Massart's constant, a column's empirical distribution over
    its ``m`` sample values is within ``rank_error`` of the whole table's at
    every value, with probability :data:`FENCE_CONFIDENCE`. So the sample
    quartiles' ranks in the whole table are within ``rank_error`` of one
    quarter and three quarters.

    References
    ----------
    Dvoretzky, A., Kiefer, J., Wolfowitz, J. (1956). Ann. Math. Stat. 27(3), 642-669.
    Massart, P. (1990). The tight constant in the DKW inequality. Ann. Probab. 18(3), 1269-1283.
    """

    columns: tuple[str, ...]
    fences: tuple[AdjustedFences, ...]
    sample_values: tuple[int, ...]
    limit: float = FENCE_MULTIPLE

    def rank_error(self, column: str) -> float:
        """The largest gap between the sample's and the table's distribution of ``column`` at confidence 0.99."""
        return dkw_rank_error(self.sample_values[self.columns.index(column)], FENCE_CONFIDENCE)

    def to_dict(self) -> dict[str, object]:
        """Plain JSON types: per column, the sample's quartiles, medcouple and fences, its values and the rank error bound."""
        return {
            "from": "the uniform sample of rows the rules ran on",
            "confidence": FENCE_CONFIDENCE,
            "bound": "Dvoretzky-Kiefer-Wolfowitz inequality with Massart's constant (1990): rank error sqrt(ln(2 / (1 - confidence)) / (2 m))",
            "columns": {
                name: {**fence.to_dict(), "sample_values": m, "rank_error": dkw_rank_error(m, FENCE_CONFIDENCE)}
                for name, fence, m in zip(self.columns, self.fences, self.sample_values)
            },
        }


def second_pass(
    batch: pa.Table,
    offset: int,
    roles: Roles,
    terms: Sequence[Term],
    fit: PreliminaryFit | None,
    robust: RobustCentre | None = None,
    fences: ColumnFences | None = None,
    resistant: tuple[ResistantFit, Sequence[Term]] | None = None,
) -> tuple[MeasureScreen, ...]:
    """Pass 2 over one batch: every complete row's hat value and deletion measures against the whole-table fit.

    ``offset`` is the 0-based table position of the batch's first row;
    measures are compared in absolute value. With ``robust``, each complete
    row's squared robust distance from it is screened too; with ``fences``,
    every value of each fenced column (complete row or not) by its fence
    score against the sample's adjusted boxplot; with ``resistant`` (the
    sample's high-breakdown fit and the terms of the sample's design, whose
    reference levels may differ from the whole table's), each complete row's
    standardized robust residual.
    """
    columns = ModelColumns.of(batch, roles)
    screens: list[MeasureScreen] = []
    if fit is not None:
        dummies = {t.source: t.levels for t in terms if t.reference is not None}
        X, y, positions = columns.coded(roles, fit.has_intercept, dummies)
        influence = row_influence(fit, X, y)
        measured = {
            "leverage": influence.hat,
            "studentized_residual": np.abs(influence.studentized),
            "cooks_distance": influence.cooks,
            "dffits": np.abs(influence.dffits),
            "dfbetas": influence.dfbetas_largest,
        }
        all_cutoffs = dict(row_screens(fit))
        if robust is not None:
            data = np.column_stack([columns.numeric[name][positions] for name in robust.columns])
            measured["robust_distance"] = squared_distances(data, robust.location, robust.scatter)
            all_cutoffs["robust_distance"] = robust.cutoffs()
        if resistant is not None:
            line, line_terms = resistant
            line_X, line_y, _ = columns.coded(roles, fit.has_intercept, {t.source: t.levels for t in line_terms if t.reference is not None})
            measured["robust_residual"] = np.abs(line.standardized(line_X, line_y))
            all_cutoffs["robust_residual"] = ((f"{RESIDUAL_LIMIT:g}", RESIDUAL_LIMIT),)
        screens = [_screen(batch, offset, roles, measure, cutoffs, measured[measure], positions) for measure, cutoffs in all_cutoffs.items()]
    if fences is not None:
        cutoff = ((f"{fences.limit:g} IQR", fences.limit),)
        for name, fence in zip(fences.columns, fences.fences):
            values = columns.y if name == roles.target else columns.numeric[name]
            present = np.flatnonzero(np.isfinite(values))
            screens.append(_screen(batch, offset, roles, "fence_score", cutoff, fence.scores(values[present]), present, name))
    return tuple(screens)


def _screen(
    batch: pa.Table,
    offset: int,
    roles: Roles,
    measure: str,
    cutoffs: Sequence[tuple[str, float]],
    measured: np.ndarray,
    positions: np.ndarray,
    column: str | None = None,
) -> MeasureScreen:
    """One batch's screen of a measure taken at the batch rows ``positions``: counts beyond each cutoff, the top rows."""
    values = np.nan_to_num(measured, nan=-np.inf)
    counted = tuple(Cutoff(name, value, int(np.count_nonzero(values > value))) for name, value in cutoffs)
    keep = np.lexsort((positions, -values))[:TOP_ROWS]
    keep = keep[np.isfinite(values[keep])]
    labels = tuple(row_labels(batch.take(positions[keep]), roles) or ())
    return MeasureScreen(measure, counted, values[keep], positions[keep] + offset, labels, column)


def merge_screens(parts: Sequence[tuple[MeasureScreen, ...]]) -> tuple[MeasureScreen, ...]:
    """Merge the pass-2 screens of all batches."""
    merged = list(parts[0])
    for part in parts[1:]:
        merged = [a.merge(b) for a, b in zip(merged, part)]
    return tuple(merged)


def row_labels(batch: pa.Table, roles: Roles) -> list[str | int] | None:
    """The id labels of a batch's rows, or None without an id column."""
    if roles.id is None:
        return None
    column = batch.column(roles.id)
    if pa.types.is_integer(column.type):
        return [v if v is not None else "" for v in column.to_pylist()]
    return [v if v is not None else "" for v in label_values(column)]

"""The run context: the table, its roles and design, and shared statistics computed lazily and once."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Sequence

import numpy as np
import pyarrow as pa

from .baseline import BaselineProfile
from .comparison import ColumnComparison, ModelComparison, compare_columns, compare_model
from .design import Design, build_design
from .findings import MAX_LISTED_ROWS, RowLabel
from .options import CheckOptions
from .reading import TableInfo
from .roles import Kind, Roles, group_labels, numeric_values, row_labels
from .rule import top_rows
from .scoring import ScoredRows, ScoreTable, score_rows
from .stats.batched import IndicatorFactor, TableStatistics
from .stats.blas import one_blas_thread
from .stats.collinearity import Collinearity
from .stats.curvature import CurvatureCheck, curvature_checks
from .stats.factor import DesignFactor
from .stats.fit import PreliminaryFit, RowScores
from .stats.grouping import BETWEEN_ONLY, GroupFactors, GroupRows
from .stats.influence import RowInfluence, row_influence
from .stats.mergeable import Moments
from .stats.missingness import Holes
from .stats.resistant import ResistantFit, resistant_fit, resistant_stands_aside
from .stats.robust import (
    ESTIMATE_ROWS_PER_COLUMN,
    MCD_SAMPLE_ROWS,
    RobustColumns,
    RobustDistances,
    median_and_mad,
    robust_distances,
)
from .stats.skewed import AdjustedFences, adjusted_fences, adjusted_fences_of_block
from .stats.summaries import ColumnSummary, ColumnTally, summarise
from .stats.textnumbers import TextNumbers

BATCHED_FENCE_ROWS = 512

@dataclass
class RunContext:
    """Everything a rule may read. Each statistic is computed on first use and then shared.

    Rules must treat the context as read-only: they receive the same object
    and every cached array is shared between them.

    ``statistics``, when given, are the table's pass-1 statistics merged over
    row batches (stream and Dask engines): the column summaries and the R
    factor come from them instead of from ``table``. ``file_positions`` maps
    the rows of ``table`` to their positions in the file when ``table`` is a
    sample of it; ``table_model`` then holds the whole table's pass-1 factor,
    whose per-group factors the grouping rules read instead of the sample's.
    """

    table: pa.Table
    info: TableInfo
    roles: Roles
    options: CheckOptions
    replaced_codes: dict[str, int] = field(default_factory=dict)
    score: ScoreTable | None = None
    baseline: BaselineProfile | None = None
    statistics: TableStatistics | None = field(default=None, repr=False)
    whole_statistics: TableStatistics | None = field(default=None, repr=False)
    file_positions: np.ndarray | None = field(default=None, repr=False)
    table_model: IndicatorFactor | None = field(default=None, repr=False)
    _summaries: dict[str, ColumnSummary] = field(default_factory=dict, init=False, repr=False)
    _text_numbers: dict[str, TextNumbers] = field(default_factory=dict, init=False, repr=False)
    _values: dict[str, np.ndarray] = field(default_factory=dict, init=False, repr=False)
    _spreads: dict[str, tuple[float, float]] = field(default_factory=dict, init=False, repr=False)
    _fences: dict[str, AdjustedFences | None] = field(default_factory=dict, init=False, repr=False)
    _tallies: dict[str, ColumnTally] = field(default_factory=dict, init=False, repr=False)

    @cached_property
    def design(self) -> Design:
        """The complete-case design matrix and target (built once)."""
        return build_design(self.table, self.roles, intercept=self.options.intercept, values=self.values)

    @cached_property
    def factor(self) -> DesignFactor:
        """Pivoted QR of the unit-length-scaled design; O(n p^2), in row batches each too small to share across BLAS threads."""
        if self.statistics is not None:
            return self.statistics.model.design_factor(self.design.terms)
        with one_blas_thread():
            return DesignFactor.of(self.design.X, self.design.y)

    @cached_property
    def fit(self) -> PreliminaryFit:
        """Least squares on the complete cases, from :attr:`factor`."""
        y = self.design.y
        if self.statistics is not None:
            tss = self.statistics.model.total_sum_of_squares(self.options.intercept)
        else:
            tss = Moments.of(y).m2 if self.options.intercept else float(np.dot(y, y))
        return PreliminaryFit(self.factor, tss, self.options.intercept, self.design.X, y)

    @cached_property
    def group_rows(self) -> GroupRows | None:
        """The group of each complete case (None without grouping: no ``--group`` and no repeating ``--id``)."""
        if self.roles.group is None:
            return None
        labels = group_labels(self.table.column(self.roles.group))
        positions = self.design.positions
        return GroupRows.of([labels[int(p)] for p in positions])

    @cached_property
    def group_factors(self) -> GroupFactors | None:
        """Per group of complete cases: rows, means and centred R factor of ``[design | target]``; O(n p^2).

        From the merged pass-1 statistics when the engine computed them (every
        row of the table, whatever the rules see), else from the design.
        """
        if self.roles.group is None:
            return None
        model = self.statistics.model if self.statistics is not None else self.table_model
        if model is not None and model.groups is not None:
            return model.design_groups(self.design.terms)
        rows = self.group_rows
        assert rows is not None
        with one_blas_thread():
            return GroupFactors.of(self.design.X, self.design.y, rows)

    @cached_property
    def between_group_columns(self) -> tuple[str, ...]:
        """Predictors constant within every group, but not overall (site facts repeated on each site-day); empty without grouping."""
        factors = self.group_factors
        if factors is None:
            return ()
        share = factors.within_share()
        design = self.design
        constant: dict[str, bool] = {}
        for j, (name, source) in enumerate(zip(design.column_names, design.column_sources)):
            if source in self.roles.predictors:
                constant[source] = constant.get(source, True) and not np.nan_to_num(share[j], nan=1.0) > BETWEEN_ONLY
        return tuple(name for name, flag in constant.items() if flag)

    @cached_property
    def collinearity(self) -> Collinearity:
        """VIFs, predictor correlations and condition indices of the estimable design, from :attr:`factor`; O(p^3)."""
        return Collinearity.of(self.design, self.factor)

    @cached_property
    def row_scores(self) -> RowScores:
        """Leverage and residuals of every complete case; O(n p^2), never an n x n matrix."""
        return self.fit.score_rows(self.design.X, self.design.y)

    @cached_property
    def curvature(self) -> tuple[CurvatureCheck, ...]:
        """An added square per numeric predictor, tested against the preliminary fit's residuals; O(n p m)."""
        return curvature_checks(self.design, self.factor, self.row_scores.residual, self.numeric_predictors)

    @cached_property
    def influence(self) -> RowInfluence:
        """Studentized residuals, Cook's distance, DFFITS and DFBETAS of every complete case; O(n p^2)."""
        return row_influence(self.fit, self.design.X, self.design.y, self.row_scores)

    @cached_property
    def robust_columns(self) -> RobustColumns:
        """The numeric predictors over the complete cases, without those whose MAD is zero, with each one's median and MAD.

        With grouped rows the predictors constant within groups are left out:
        they hold one value per group, repeated on its rows, and are measured
        one point per group by ``grouping.group-outliers``.

        The medians and MADs are the shared whole-column ones
        (:meth:`median_and_mad`), so a row called unremarkable in every single
        column is one that ``outliers.univariate`` does not flag.
        """
        design = self.design
        index = design.column_index
        repeated = set(self.between_group_columns)
        chosen = [c for c in self.numeric_predictors if c in index and c not in repeated]
        if not chosen:
            return RobustColumns((), np.empty((design.n, 0)), np.empty(0), np.empty(0))
        indices = [index[c] for c in chosen]
        consecutive = indices == list(range(indices[0], indices[0] + len(indices)))
        data = design.X[:, indices[0] : indices[0] + len(indices)] if consecutive else design.X[:, indices]
        spread = np.array([self.median_and_mad(c) for c in chosen]).reshape(-1, 2)
        median, mad = spread[:, 0], spread[:, 1]
        keep = np.flatnonzero(np.isfinite(mad) & (mad > 0))
        kept = data if keep.size == len(chosen) else data[:, keep]
        return RobustColumns(tuple(chosen[j] for j in keep), kept, median[keep], mad[keep])

    @cached_property
    def robust(self) -> RobustDistances | None:
        """Every complete case's robust distance from the MCD estimate of :attr:`robust_columns` (None when it fails).

        None too when its sample would hold fewer than ``ESTIMATE_ROWS_PER_COLUMN`` rows per column (more than
        200 numeric predictors), so no wide table pays for an estimate no rule can use.

        Computed once: ``outliers.multivariate`` reads it, and beyond the row
        budget pass 2 measures every row of the table against its estimate.
        """
        columns = self.robust_columns
        if len(columns.names) < 2 or min(self.design.n, MCD_SAMPLE_ROWS) < ESTIMATE_ROWS_PER_COLUMN * len(columns.names):
            return None
        try:
            return robust_distances(columns.data, columns.names)
        except np.linalg.LinAlgError:
            return None

    @cached_property
    def resistant(self) -> ResistantFit | None:
        """The high-breakdown MM fit of the target on the estimable design (None when it cannot be fitted).

        Expensive: statsmodels' deterministic S- and MM-estimation, on at most
        1,000 rows chosen by their values (every row is then scored). Its
        starting subsets are chosen by the continuous predictors of
        :attr:`robust_columns`. Beyond the row budget it is fitted on the
        engine's row sample, and pass 2 scores every row of the table.
        """
        design = self.design
        if not self.target_is_numeric or self.fit.rank == 0 or resistant_stands_aside(design.n, self.fit.rank) is not None:
            return None
        names = design.column_names
        estimable = sorted(int(j) for j in self.factor.perm[: self.fit.rank])
        starts = [names.index(c) for c in self.robust_columns.names]
        try:
            with one_blas_thread():
                return resistant_fit(design.X, design.y, estimable, starts, names)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            # statsmodels divides by a zero scale on degenerate tables (ZeroDivisionError)
            return None

    @cached_property
    def scoring(self) -> ScoredRows | None:
        """The scoring table's rows through the fitted design, with their leverage; None without ``--score``."""
        if self.score is None:
            return None
        return score_rows(self.score, self.design, self.roles, self.fit, self.row_scores.hat)

    @cached_property
    def comparison(self) -> ColumnComparison | None:
        """The columns matched with the baseline's, unit changes recognised, shifts tested; None without ``--baseline``."""
        if self.baseline is None:
            return None
        return compare_columns(self, self.baseline)

    @cached_property
    def model_comparison(self) -> ModelComparison | None:
        """The new rows through the baseline's design and fit (O(n p^2)); None without a baseline fit to compare with."""
        columns = self.comparison
        if columns is None:
            return None
        return compare_model(self, columns)

    def summary(self, column: str) -> ColumnSummary:
        """Counts, moments and mode of one table column (all rows)."""
        if column not in self._summaries:
            kind = self.roles.kinds[column]
            if self.statistics is not None:
                self._summaries[column] = self.statistics.tallies[column].summary(column, kind, self.table.column(column))
            else:
                values = self.values(column) if kind in (Kind.NUMERIC, Kind.BOOLEAN) else None
                self._summaries[column] = summarise(column, self.table.column(column), kind, values)
        return self._summaries[column]

    def tally(self, column: str) -> ColumnTally:
        """Row, missing and non-finite counts and moments of a numeric or true/false column over all rows (computed once).

        The same counts and moments as :meth:`summary`, without its distinct
        values and mode, which cost a hash of every value.
        """
        if self.statistics is not None:
            return self.statistics.tallies[column]
        if column not in self._tallies:
            self._tallies[column] = ColumnTally.of(self.table.column(column), self.roles.kinds[column], cap=0, values=self.values(column))
        return self._tallies[column]

    def design_column(self, name: str) -> np.ndarray:
        """One column of the design matrix over the complete cases, as a contiguous array (not cached: no lasting memory).

        A numeric predictor's column is gathered from :meth:`values` (its
        shared read-only array itself when every row is complete); a dummy
        is copied out of ``design.X``, whose row-major layout makes every
        whole-column pass read the entire matrix.
        """
        design = self.design
        index = design.column_index[name]
        term = design.term(design.column_sources[index])
        if term.kind in (Kind.NUMERIC, Kind.DATETIME) and term.reference is None:
            values = self.values(term.source)
            return values if design.n == values.size else values[design.positions]
        return np.ascontiguousarray(design.X[:, index])

    @cached_property
    def holes(self) -> Holes:
        """Where the target and predictors are missing (null or NaN), row by row, and the row patterns."""
        return Holes.of(self.table, self.model_columns, self.roles.kinds, self.values)

    def text_numbers(self, column: str) -> TextNumbers:
        """How many values of a text column are numbers, formatted numbers or other tokens."""
        if column not in self._text_numbers:
            self._text_numbers[column] = TextNumbers.of(self.table.column(column))
        return self._text_numbers[column]

    def with_target(self, values: np.ndarray) -> pa.Table:
        """The table with the target column replaced by ``values`` (NaN missing), same rows in the same order: a repair's table."""
        target = self.roles.target
        return self.table.set_column(self.table.column_names.index(target), target, pa.array(values, from_pandas=True))

    def values(self, column: str) -> np.ndarray:
        """A numeric column over all table rows as float64 (NaN for missing); converted once, shared read-only."""
        if column not in self._values:
            converted = numeric_values(self.table.column(column))
            converted.setflags(write=False)
            self._values[column] = converted
        return self._values[column]

    def fences(self, column: str) -> AdjustedFences | None:
        """The adjusted boxplot of a numeric column's finite values over all table rows (computed once; None when the IQR is zero)."""
        if column not in self._fences:
            self._fences[column] = adjusted_fences(self.values(column))
        return self._fences[column]

    def prepare_fences(self, columns: Sequence[str], block_columns: int = 1_024) -> None:
        """Compute the adjusted boxplots of many columns together (the same values as :meth:`fences`, one by one).

        Columns without missing values are taken ``block_columns`` at a time
        through :func:`adjusted_fences_of_block` when the table has at most
        ``BATCHED_FENCE_ROWS`` rows (whose medcouple kernels are all written
        out); the others are left to :meth:`fences`. A wide table's per-column overhead is then paid once
        per block instead of once per column.
        """
        if self.table.num_rows > BATCHED_FENCE_ROWS:
            return  # long columns: the per-column overhead is small beside each column's own work
        waiting = [c for c in columns if c not in self._fences]
        whole = [c for c in waiting if not np.isnan(self.values(c)).any()]
        for start in range(0, len(whole), block_columns):
            chosen = whole[start : start + block_columns]
            block = np.column_stack([self.values(c) for c in chosen])
            if not np.isfinite(block).all():
                continue
            for column, fences in zip(chosen, adjusted_fences_of_block(block)):
                self._fences[column] = fences

    def median_and_mad(self, column: str) -> tuple[float, float]:
        """Median and median absolute deviation of a numeric column's finite values over all table rows (computed once)."""
        if column not in self._spreads:
            self._spreads[column] = median_and_mad(self.values(column))
        return self._spreads[column]

    @property
    def target_is_numeric(self) -> bool:
        """Whether the target can enter a least-squares fit (numeric or true/false)."""
        return self.roles.kinds[self.roles.target] in (Kind.NUMERIC, Kind.BOOLEAN)

    @property
    def value_screened_columns(self) -> tuple[str, ...]:
        """The columns ``outliers.univariate`` measures value by value: a numeric target and the numeric predictors,
        without those constant within groups (one value per group, measured one point per group instead)."""
        repeated = set(self.between_group_columns)
        target = [self.roles.target] if self.roles.kinds[self.roles.target] is Kind.NUMERIC else []
        return tuple(target + [c for c in self.numeric_predictors if c not in repeated])

    @property
    def model_columns(self) -> tuple[str, ...]:
        """The target followed by the predictors."""
        return (self.roles.target, *self.roles.predictors)

    @property
    def numeric_predictors(self) -> tuple[str, ...]:
        """Predictors that enter the design as one numeric column each."""
        return tuple(c for c in self.roles.predictors if self.roles.kinds[c] is Kind.NUMERIC)

    @cached_property
    def _labels(self) -> list[RowLabel] | None:
        return row_labels(self.table, self.roles)

    def row_label(self, position: int) -> RowLabel:
        """The label of 0-based table row ``position``: its id value, or its 1-based data row number in the file."""
        labels = self._labels
        if labels is not None:
            return labels[position]
        return int(self.file_positions[position] if self.file_positions is not None else position) + 1

    def listed_rows(
        self, positions: Sequence[int] | np.ndarray, measures: Sequence[float] | np.ndarray | None = None
    ) -> tuple[list[RowLabel], list[float | None], int]:
        """Labels, measured values and total count of rows for a finding, most extreme first, capped."""
        positions = np.asarray(positions, dtype=np.int64)
        total = int(positions.size)
        if measures is None:
            chosen = np.sort(positions)[:MAX_LISTED_ROWS]
            return [self.row_label(int(p)) for p in chosen], [], total
        chosen, values = top_rows(positions, np.asarray(measures, dtype=float))
        return [self.row_label(int(p)) for p in chosen], [float(v) for v in values], total

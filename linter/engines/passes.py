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

from typing import Mapping, Sequence

import numpy as np
import pyarrow as pa

from ..design import ModelColumns, Term
from ..roles import Roles, group_labels, row_labels
from ..rule import SCREEN_MEASURES, Cutoffs
from ..stats.batched import IndicatorFactor, TableStatistics
from ..stats.fit import PreliminaryFit
from ..stats.influence import row_influence
from ..stats.resistant import ResistantFit
from ..stats.robust import squared_distances
from ..stats.screens import TOP_ROWS, ColumnFences, Cutoff, MeasureScreen, RobustCentre
from ..stats.summaries import ColumnTally

INFLUENCE_MEASURES = ("leverage", "studentized_residual", "cooks_distance", "dffits", "dfbetas")
"""The deletion measures of :func:`prefit.stats.influence.row_influence`, computed together."""
FIT_MEASURES = (*INFLUENCE_MEASURES, "robust_distance", "robust_residual")
"""The measures taken over complete rows against the whole table's fit."""


def first_pass(batch: pa.Table, roles: Roles, intercept: bool, tallies: bool = True) -> TableStatistics:
    """Pass 1 over one batch of table rows: the indicator factor, and with ``tallies`` each column's counts and moments.

    Beyond the row budget the rules read the sample's column summaries and
    only the factor of the whole table, so the engines leave the tallies out.
    """
    counts = {name: ColumnTally.of(batch.column(name), roles.kinds[name], cap=0) for name in batch.column_names} if tallies else {}
    labels = group_labels(batch.column(roles.group)) if roles.group is not None else None
    return TableStatistics(batch.num_rows, counts, IndicatorFactor.of(ModelColumns.of(batch, roles), roles, intercept, labels))


def second_pass(
    batch: pa.Table,
    offset: int,
    roles: Roles,
    terms: Sequence[Term],
    fit: PreliminaryFit | None,
    robust: RobustCentre | None = None,
    fences: ColumnFences | None = None,
    resistant: tuple[ResistantFit, Sequence[Term]] | None = None,
    cutoffs: Mapping[str, Cutoffs] | None = None,
) -> tuple[MeasureScreen, ...]:
    """Pass 2 over one batch: every complete row's hat value and deletion measures against the whole-table fit.

    ``offset`` is the 0-based table position of the batch's first row;
    measures are compared in absolute value. With ``robust``, each complete
    row's squared robust distance from it is screened too; with ``fences``,
    every value of each fenced column (complete row or not) by its fence
    score against the sample's adjusted boxplot; with ``resistant`` (the
    sample's high-breakdown fit and the terms of the sample's design, whose
    reference levels may differ from the whole table's), each complete row's
    standardized robust residual. ``cutoffs`` are the counted cutoffs of each
    measure that a selected rule screens (:attr:`prefit.rule.RuleLike.screen`):
    only those measures are screened, in the order of :data:`prefit.rule.SCREEN_MEASURES`.
    """
    cutoffs = cutoffs or {}
    columns = ModelColumns.of(batch, roles)
    screens: list[MeasureScreen] = []
    if fit is not None and any(m in cutoffs for m in FIT_MEASURES):
        dummies = {t.source: t.levels for t in terms if t.reference is not None}
        X, y, positions = columns.coded(roles, fit.has_intercept, dummies)
        measured: dict[str, np.ndarray] = {}
        if any(m in cutoffs for m in INFLUENCE_MEASURES):
            influence = row_influence(fit, X, y)
            measured.update({
                "leverage": influence.hat,
                "studentized_residual": np.abs(influence.studentized),
                "cooks_distance": influence.cooks,
                "dffits": np.abs(influence.dffits),
                "dfbetas": influence.dfbetas_largest,
            })
        if robust is not None and "robust_distance" in cutoffs:
            data = np.column_stack([columns.numeric[name][positions] for name in robust.columns])
            measured["robust_distance"] = squared_distances(data, robust.location, robust.scatter)
        if resistant is not None and "robust_residual" in cutoffs:
            line, line_terms = resistant
            line_X, line_y, _ = columns.coded(roles, fit.has_intercept, {t.source: t.levels for t in line_terms if t.reference is not None})
            measured["robust_residual"] = np.abs(line.standardized(line_X, line_y))
        screens = [_screen(batch, offset, roles, measure, cutoffs[measure], measured[measure], positions) for measure in SCREEN_MEASURES if measure in measured and measure in cutoffs]
    if fences is not None and "fence_score" in cutoffs:
        for name, fence in zip(fences.columns, fences.fences):
            values = columns.y if name == roles.target else columns.numeric[name]
            present = np.flatnonzero(np.isfinite(values))
            screens.append(_screen(batch, offset, roles, "fence_score", cutoffs["fence_score"], fence.scores(values[present]), present, name))
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

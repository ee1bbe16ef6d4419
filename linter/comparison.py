"""The checked table against its baseline: columns matched by name or by their summaries, and the baseline fit applied to the new rows.

:class:`ColumnComparison` holds what the schema, level, unit, distribution and
missing-value rules read; :class:`ModelComparison` the new rows seen through
the baseline's design (coverage, the Chow test, coefficient shifts and the
prediction error). Both are computed once per run, on the run context.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Mapping

import numpy as np
import pyarrow as pa

from .baseline import BaselineProfile, ColumnProfile, complete_level_counts
from .roles import Kind
from .scoring import NUMERIC_KINDS, rows_through_terms
from .stats.distribution import Distribution, ValuesAt, ks_distance, ks_p_value, level_stability, numeric_stability, sorted_finite
from .stats.drift import ChowTest, UnitMatch, chow_test, cohens_h, holm, match_unit_change
from .stats.factor import DesignFactor
from .stats.fit import PreliminaryFit
from .stats.mergeable import Moments

if TYPE_CHECKING:
    from .context import RunContext

RENAME_LEVEL = 0.01
RENAME_SPREAD = 0.05
RENAME_LEVEL_OVERLAP = 0.8


@dataclass(frozen=True)
class ShiftTest:
    """One column's move between baseline and new extract: PSI, the test's distance and p-values (raw and Holm-adjusted)."""

    column: str
    test: str
    psi: float
    distance: float
    p_value: float
    adjusted: float
    baseline_values: int
    new_values: int
    rank_error: float = 0.0


@dataclass(frozen=True)
class MissingShift:
    """One column's missing share in baseline and new extract, the two-proportion test and Cohen's h."""

    column: str
    baseline_share: float
    new_share: float
    p_value: float
    adjusted: float
    effect: float


@dataclass(frozen=True)
class ColumnComparison:
    """The columns of the baseline and the new extract matched up, and per shared column what moved.

    ``names`` maps each baseline column still present (under its name or a
    new one) to its name in the new extract.
    """

    baseline: BaselineProfile
    names: Mapping[str, str]
    added: tuple[str, ...]
    removed: tuple[str, ...]
    renamed: Mapping[str, str]
    units: Mapping[str, UnitMatch]
    shifts: Mapping[str, ShiftTest]
    missing: Mapping[str, MissingShift]
    new_levels: Mapping[str, Mapping[str, int]]
    vanished_levels: Mapping[str, Mapping[str, int]]
    level_rows: Mapping[str, int]


def _kind_group(kind: Kind) -> str:
    return "numeric" if kind in (Kind.NUMERIC, Kind.DATETIME) else "levels" if kind in (Kind.CATEGORICAL, Kind.BOOLEAN) else "text"


def _rename_distance(old: ColumnProfile, ctx: "RunContext", name: str) -> float | None:
    """How far new column ``name`` is from baseline column ``old`` (KS distance, or 1 - level overlap); None when they differ.

    Numeric columns must agree in mean and SD within three standard errors
    (at least :data:`RENAME_SPREAD`) and pass the KS test at
    :data:`RENAME_LEVEL`; categorical ones must share :data:`RENAME_LEVEL_OVERLAP`
    of their levels.
    """
    kind = ctx.roles.kinds[name]
    if _kind_group(kind) != _kind_group(old.kind):
        return None
    if _kind_group(kind) == "numeric" and old.moments is not None and old.moments.count > 1:
        new = ctx.tally(name).moments
        if new.count < 2 or not (old.moments.std > 0 and new.std > 0):
            return None
        spread = max(RENAME_SPREAD, 3.0 * float(np.sqrt(0.5 / old.moments.count + 0.5 / new.count)))
        location = max(RENAME_SPREAD, 3.0 * float(np.sqrt(1.0 / old.moments.count + 1.0 / new.count)))
        if abs(np.log(new.std / old.moments.std)) > spread or abs(new.mean - old.moments.mean) > location * old.moments.std:
            return None
        if old.distribution is None:
            return 0.0
        values = ctx.values(name)
        distance = ks_distance(old.distribution, values)
        p = ks_p_value(max(distance - old.distribution.rank_error, 0.0), old.distribution.count, new.count)
        return distance if p > RENAME_LEVEL else None
    if old.levels is not None and name in ctx.roles.predictors:
        new_levels = set(complete_level_counts(ctx, name))
        union = set(old.levels) | new_levels
        overlap = len(set(old.levels) & new_levels) / len(union) if union else 0.0
        return 1.0 - overlap if overlap >= RENAME_LEVEL_OVERLAP else None
    return None


def compare_columns(ctx: "RunContext", baseline: BaselineProfile) -> ColumnComparison:
    """Match the columns, recognise unit changes, and test each shared model column for a shift (Holm-corrected)."""
    new_names = list(ctx.table.column_names)
    old_names = list(baseline.columns)
    removed = [c for c in old_names if c not in ctx.roles.kinds]
    added = [c for c in new_names if c not in baseline.columns]
    renamed: dict[str, str] = {}
    for dropped in removed:
        distances = {new: _rename_distance(baseline.columns[dropped], ctx, new) for new in added if new not in renamed.values()}
        close = {new: d for new, d in distances.items() if d is not None}
        if close:
            renamed[dropped] = min(close, key=lambda new: (close[new], new))
    names = {c: c for c in old_names if c in ctx.roles.kinds} | renamed
    model_columns = [baseline.target, *baseline.predictors]
    units: dict[str, UnitMatch] = {}
    raw_shifts: list[ShiftTest] = []
    raw_missing: list[MissingShift] = []
    new_levels: dict[str, dict[str, int]] = {}
    vanished: dict[str, dict[str, int]] = {}
    level_rows: dict[str, int] = {}
    design_ok = ctx.target_is_numeric
    for old_name in model_columns:
        if old_name not in names:
            continue
        name, old = names[old_name], baseline.columns[old_name]
        kind = ctx.roles.kinds[name]
        if old.rows and (old.kind in (Kind.NUMERIC, Kind.BOOLEAN) or old.kind is kind):
            new_missing = _missing_count(ctx, name)
            raw_missing.append(_missing_shift(old_name, old.missing + old.nonfinite, old.rows, new_missing, ctx.table.num_rows))
        if old.distribution is not None and kind is Kind.NUMERIC:
            ordered = sorted_finite(ctx.values(name))
            counted = ValuesAt.of_sorted(ordered, old.distribution.points)
            match = match_unit_change(old.moments or Moments.empty(), old.distribution, ordered, ctx.tally(name).moments)
            if match is not None:
                units[old_name] = match
                continue
            raw_shifts.append(_numeric_shift(old_name, old.distribution, counted))
        elif old.levels is not None and kind in (Kind.CATEGORICAL, Kind.BOOLEAN) and name in ctx.roles.predictors and design_ok:
            counts = complete_level_counts(ctx, name)
            fresh = {level: n for level, n in counts.items() if level not in old.levels}
            lost = {level: n for level, n in old.levels.items() if level not in counts}
            if fresh:
                new_levels[old_name] = fresh
            if lost:
                vanished[old_name] = lost
            level_rows[old_name] = sum(counts.values())
            known = {level: n for level, n in counts.items() if level in old.levels}
            if sum(known.values()) and len(old.levels) > 1:
                raw_shifts.append(_level_shift(old_name, old.levels, known))
    shifts = _adjusted(raw_shifts)
    missing = {
        m.column: MissingShift(m.column, m.baseline_share, m.new_share, m.p_value, a, m.effect)
        for m, a in zip(raw_missing, holm([m.p_value for m in raw_missing]))
    }
    return ColumnComparison(baseline, names, tuple(c for c in added if c not in renamed.values()), tuple(c for c in removed if c not in renamed), renamed, units, shifts, missing, new_levels, vanished, level_rows)


def _missing_count(ctx: "RunContext", name: str) -> int:
    kind = ctx.roles.kinds[name]
    if kind in (Kind.NUMERIC, Kind.BOOLEAN):
        tally = ctx.tally(name)
        return tally.missing + tally.nonfinite
    return int(ctx.table.column(name).null_count)


def _missing_shift(column: str, old_missing: int, old_rows: int, new_missing: int, new_rows: int) -> MissingShift:
    """A two-proportion test (chi-square on the 2 x 2 table, no continuity correction) of the missing shares."""
    import scipy.stats

    old_share, new_share = old_missing / old_rows, new_missing / new_rows
    table = np.array([[old_missing, old_rows - old_missing], [new_missing, new_rows - new_missing]], dtype=np.float64)
    if (table.sum(axis=0) == 0).any():
        p = 1.0
    else:
        p = float(scipy.stats.chi2_contingency(table, correction=False)[1])
    return MissingShift(column, old_share, new_share, p, p, cohens_h(old_share, new_share))


def _numeric_shift(column: str, reference: Distribution, counted: ValuesAt) -> ShiftTest:
    """KS distance (the sketch's rank error taken off before the test, so it keeps its level) and PSI over the baseline deciles."""
    distance = ks_distance(reference, counted)
    p = ks_p_value(max(distance - reference.rank_error, 0.0), reference.count, counted.count)
    return ShiftTest(column, "Kolmogorov-Smirnov", numeric_stability(reference, counted), distance, p, p, reference.count, counted.count, reference.rank_error)


def _level_shift(column: str, old: Mapping[str, int], new: Mapping[str, int]) -> ShiftTest:
    """Chi-square test of homogeneity of the level counts, with Cramer's V as the distance, and PSI over the levels."""
    import scipy.stats

    levels = sorted(old)
    table = np.array([[old[v] for v in levels], [new.get(v, 0) for v in levels]], dtype=np.float64)
    table = table[:, table.sum(axis=0) > 0]
    chi2, p = (float(v) for v in scipy.stats.chi2_contingency(table, correction=False)[:2]) if table.shape[1] > 1 else (0.0, 1.0)
    total = float(table.sum())
    return ShiftTest(column, "chi-square", level_stability(old, new), float(np.sqrt(chi2 / total)) if total else float("nan"), p, p, int(table[0].sum()), int(table[1].sum()))


def _adjusted(shifts: list[ShiftTest]) -> dict[str, ShiftTest]:
    adjusted = holm([s.p_value for s in shifts])
    return {
        s.column: ShiftTest(s.column, s.test, s.psi, s.distance, s.p_value, a, s.baseline_values, s.new_values, s.rank_error)
        for s, a in zip(shifts, adjusted)
    }


@dataclass(frozen=True)
class ModelComparison:
    """The new rows through the baseline's design, with unit changes undone.

    ``positions`` are the new table's complete rows (target and every
    baseline predictor present) without a level the baseline lacks (those are
    ``drift.levels``'s); ``outside`` and ``hidden`` mark them (beyond a
    baseline range, or inside every range but beyond the baseline's largest
    leverage); the Chow test, coefficient shifts and prediction error use them all.
    """

    positions: np.ndarray
    outside: np.ndarray
    outside_by_column: Mapping[str, int]
    hidden: np.ndarray
    leverage: np.ndarray
    largest_leverage: float
    fit_rows: int
    chow: ChowTest | None
    baseline_fit: PreliminaryFit
    new_fit: PreliminaryFit | None
    column_names: tuple[str, ...]
    prediction_rmse: float
    converted: Mapping[str, str]

    @property
    def shifts(self) -> np.ndarray:
        """Each coefficient's change in standard errors of the difference, ``(b_new - b_old) / sqrt(se_old^2 + se_new^2)``."""
        if self.new_fit is None:
            return np.full(len(self.column_names), np.nan)
        old, new = self.baseline_fit, self.new_fit
        return (new.coef - old.coef) / np.sqrt(old.se**2 + new.se**2)

    @property
    def error_ratio(self) -> float:
        """The baseline fit's root mean squared prediction error on the new rows over its own residual SD."""
        sigma = self.baseline_fit.sigma
        return self.prediction_rmse / sigma if sigma > 0 else float("nan")


def _beyond(values: np.ndarray, low: float, high: float) -> np.ndarray:
    return (values < low) | (values > high)


def _rows_in_baseline_terms(
    ctx: "RunContext", columns: ColumnComparison, converted: Mapping[str, tuple[float, float]]
) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[str, np.ndarray]]:
    """Positions, design rows and target of the complete new rows with known levels, in baseline units; per numeric predictor, rows beyond its range."""
    baseline = columns.baseline
    assert baseline.model is not None
    needed = [baseline.target, *baseline.predictors]
    view = pa.table({old_name: ctx.table.column(columns.names[old_name]) for old_name in needed})
    through = rows_through_terms(view, baseline.model.terms, baseline.model.observed, ctx.info.path, converted, unseen_complete=False)
    y = ctx.values(columns.names[baseline.target])
    if baseline.target in converted:
        scale, offset = converted[baseline.target]
        y = (y - offset) / scale
    usable = np.isfinite(y[through.complete])
    positions = np.flatnonzero(through.complete)[usable]
    outside = {name: mask[positions] for name, mask in through.outside.items() if baseline.columns[name].kind in NUMERIC_KINDS}
    return positions, through.X[usable], y[positions], outside


def compare_model(ctx: "RunContext", columns: ColumnComparison) -> ModelComparison | None:
    """The new rows through the baseline design; None when the baseline has no fit or a model column is gone or changed kind."""
    baseline = columns.baseline
    model = baseline.model
    if model is None:
        return None
    needed = [baseline.target, *baseline.predictors]
    if any(c not in columns.names for c in needed):
        return None
    for old_name in needed:
        new_kind = ctx.roles.kinds[columns.names[old_name]]
        old_kind = baseline.columns[old_name].kind
        if (old_kind in NUMERIC_KINDS) != (new_kind in NUMERIC_KINDS) or (old_name == baseline.target and new_kind not in (Kind.NUMERIC, Kind.BOOLEAN)):
            return None
    converted = {c: (m.change.scale, m.change.offset) for c, m in columns.units.items()}
    fit = model.fit
    if not converted and model.terms == ctx.design.terms and all(columns.names[c] == c for c in needed):
        # The new table's own design is the baseline's: its rows, outside masks and fit are already on the context.
        design = ctx.design
        positions, X, y_fit, new_fit = design.positions, design.X, design.y, ctx.fit if design.n > design.p else None
        outside_by = {name: _beyond(ctx.design_column(name), low, high) for name, (low, high) in model.observed.items()}
    else:
        positions, X, y_fit, outside_by = _rows_in_baseline_terms(ctx, columns, converted)
        new_fit = PreliminaryFit(DesignFactor.of(X, y_fit), float(Moments.of(y_fit).m2), model.intercept) if y_fit.size > X.shape[1] else None
    outside = np.zeros(positions.size, dtype=bool)
    by_column: dict[str, int] = {}
    for name, mask in outside_by.items():
        if mask.any():
            by_column[name] = int(mask.sum())
        outside |= mask
    leverage = fit.score_rows(X, np.zeros(positions.size)).hat if positions.size else np.zeros(0)
    hidden = ~outside & (leverage > model.largest_leverage)
    rmse = float(np.sqrt(np.mean((y_fit - X @ np.nan_to_num(fit.coef)) ** 2))) if y_fit.size else float("nan")
    chow = chow_test(fit, new_fit) if new_fit is not None else None
    return ModelComparison(
        positions, outside, by_column, hidden, leverage, model.largest_leverage, int(y_fit.size), chow, fit, new_fit,
        model.column_names, rmse, {c: m.change.name for c, m in columns.units.items()},
    )

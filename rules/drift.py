"""Drift rules: the checked table against its baseline (``--baseline``), the last extract the model was built on.

Each rule reads the shared comparison on the context (:mod:`prefit.comparison`):
columns matched by name or, when renamed, by their summaries; unit changes
recognised and undone before anything else is compared; shifts tested with
an effect size beside every p-value, so that a large extract does not fire on
a trivial move.
"""

from __future__ import annotations

from typing import Iterator

import numpy as np

from prefit.comparison import ColumnComparison, ModelComparison
from prefit.context import RunContext
from prefit.findings import Finding, Grade
from prefit.rule import COMMON_PRACTICE, NotApplicable, Rule, RuleSettings, Threshold, fmt

NO_BASELINE = "no baseline: give the last accepted extract (or its profile from --save-baseline) with --baseline"
PSI_SOURCE = (
    "population stability index bands 0.1 and 0.25 (common practice in credit scoring, as quoted on Cross Validated, "
    "question 219822; Siddiqi 2006, Credit Risk Scorecards, Wiley, ch. 8, from memory; Yurdakul 2018, Statistical "
    "Properties of Population Stability Index, Western Michigan University)"
)
TEST_SOURCE = (
    "two-sample Kolmogorov-Smirnov test (Smirnov 1948) or chi-square test of homogeneity, Holm (1979) adjusted across columns"
)
COHEN_H_SOURCE = "Cohen's h: 0.2 small, 0.5 medium (Cohen 1988, Statistical Power Analysis for the Behavioral Sciences, 2nd ed., sec. 6.2)"
ERROR_RATIO_SOURCE = (
    "RMS prediction error over the baseline residual SD: 1.1 (a fifth more squared error) and 1.5 (common practice; "
    "with no change the ratio is about sqrt(1 + p / n), Montgomery, Peck & Vining 2012, sec. 3.5)"
)
CHOW_SOURCE = "Chow, G. C. (1960). Tests of equality between sets of coefficients in two linear regressions. Econometrica 28(3), 591-605"
UNIT_SOURCE = "conversion factors of NIST SP 811 (2008), appendix B"
ALPHA_SOURCE = "significance level 0.05, family-wise across columns by Holm's step-down method (Holm 1979, Scand. J. Statist. 6, 65-70)"


def _columns(ctx: RunContext) -> ColumnComparison:
    comparison = ctx.comparison
    if comparison is None:
        raise NotApplicable(NO_BASELINE)
    return comparison


def _model(ctx: RunContext) -> ModelComparison:
    _columns(ctx)
    model = ctx.model_comparison
    if model is None:
        raise NotApplicable("the baseline's fit cannot be applied: it has none, or a model column is gone or changed kind (see drift.schema)")
    return model


def _schema(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    comparison = _columns(ctx)
    baseline = comparison.baseline
    model_columns = {baseline.target, *baseline.predictors}
    gone = [c for c in comparison.removed if c in model_columns]
    if gone:
        yield settings.finding(
            Grade.BLOCKS,
            f"{', '.join(gone)} {'was a' if len(gone) == 1 else 'were'} "
            + ("model column" if len(gone) == 1 else "model columns")
            + f" of the baseline {baseline.table.path} and {'is' if len(gone) == 1 else 'are'} missing here: the baseline model cannot be applied",
            columns=gone,
            remedy="ask for the missing columns to be exported again, or refit the model without them and accept that it is a new model",
            details={"removed": gone, "roles": {c: baseline.columns[c].role for c in gone}},
        )
    others = [c for c in comparison.removed if c not in model_columns]
    if others:
        yield settings.finding(
            Grade.NOTE,
            f"{len(others)} column{'s' if len(others) > 1 else ''} of the baseline {'are' if len(others) > 1 else 'is'} missing here: {', '.join(others)} (not model columns)",
            columns=others,
            remedy="check with whoever exports the extract that the columns were dropped on purpose",
            details={"removed": others},
        )
    for before, new in comparison.renamed.items():
        in_model = before in model_columns
        yield settings.finding(
            Grade.MISLEADS if in_model else Grade.NOTE,
            f"{new} looks like the baseline's {before} renamed: the baseline has no {new}, this table no {before}, and their "
            + ("distributions match" if baseline.columns[before].distribution is not None else "summaries match")
            + ("; code that selects the model's columns by name will miss it" if in_model else ""),
            columns=[before, new],
            remedy=f"rename {new} back to {before} (or map the name in the model's code) after confirming they hold the same quantity",
            details={"baseline_name": before, "new_name": new},
        )
    added_predictors = [c for c in comparison.added if c in ctx.roles.predictors]
    added_others = [c for c in comparison.added if c not in ctx.roles.predictors]
    if added_predictors:
        yield settings.finding(
            Grade.WEAKENS,
            f"{', '.join(added_predictors)} {'is' if len(added_predictors) == 1 else 'are'} new since the baseline and enter the design as "
            "predictors: the baseline fit has no coefficient for them",
            columns=added_predictors,
            remedy="exclude the new columns to compare like with like, or refit and treat the result as a new model",
            details={"added": added_predictors},
        )
    if added_others:
        yield settings.finding(
            Grade.NOTE,
            f"{', '.join(added_others)} {'is' if len(added_others) == 1 else 'are'} new since the baseline (not predictors here)",
            columns=added_others,
            remedy="check that the new columns are expected",
            details={"added": added_others},
        )
    for old_name, name in comparison.names.items():
        old = baseline.columns[old_name]
        kind = ctx.roles.kinds[name]
        role = _role(ctx, name)
        if old.kind is kind and old.role == role:
            continue
        in_model = old_name in model_columns or role in ("target", "predictor")
        changes = []
        if old.kind is not kind:
            changes.append(f"its kind changed from {old.kind} to {kind} (type {old.arrow_type} then, {ctx.table.column(name).type} now)")
        if old.role != role:
            changes.append(f"its role changed from {old.role} to {role}")
        yield settings.finding(
            Grade.MISLEADS if in_model else Grade.NOTE,
            f"{name}: " + " and ".join(changes) + ("; the baseline model does not see it as it was fitted" if in_model else ""),
            columns=[name],
            remedy=f"export {name} as it was in the baseline (numbers as numbers, the same codes), or declare its role with the same options",
            details={"baseline_kind": str(old.kind), "kind": str(kind), "baseline_role": old.role, "role": role, "baseline_type": old.arrow_type, "type": str(ctx.table.column(name).type)},
        )


def _role(ctx: RunContext, name: str) -> str:
    roles = ctx.roles
    if name == roles.target:
        return "target"
    if name == roles.id:
        return "id"
    return "predictor" if name in roles.predictors else "left out"


def _levels(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    comparison = _columns(ctx)
    for column, fresh in comparison.new_levels.items():
        rows = sum(fresh.values())
        share = rows / comparison.level_rows[column] if comparison.level_rows[column] else float("nan")
        graded = settings.grade_of(share)
        grade, limit = graded if graded is not None else (Grade.WEAKENS, settings.threshold("weakens"))
        listing = ", ".join(f"{level} ({n:,} rows)" for level, n in sorted(fresh.items()))
        yield settings.finding(
            grade,
            f"{column} has level{'s' if len(fresh) > 1 else ''} the baseline never had: {listing}, {share:.1%} of complete cases; "
            "the baseline fit has no coefficient for them, so it cannot predict those rows",
            columns=[column],
            value=share,
            threshold=limit,
            remedy=f"refit with rows of the new {column} level{'s' if len(fresh) > 1 else ''}, or set those rows aside when applying the baseline model",
            details={"new_levels": dict(sorted(fresh.items())), "rows": rows, "complete_cases": comparison.level_rows[column]},
        )
    for column, gone in comparison.vanished_levels.items():
        yield settings.finding(
            Grade.NOTE,
            f"{column}: level{'s' if len(gone) > 1 else ''} {', '.join(sorted(gone))} of the baseline "
            f"({', '.join(f'{n:,}' for _, n in sorted(gone.items()))} complete cases there) {'do' if len(gone) > 1 else 'does'} not occur here",
            columns=[column],
            remedy=f"check whether the vanished {column} levels were renamed or merged",
            details={"vanished_levels": dict(sorted(gone.items()))},
        )


def _units(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    comparison = _columns(ctx)
    for column, match in comparison.units.items():
        name = comparison.names[column]
        yield settings.finding(
            Grade.MISLEADS,
            f"{name} looks converted: {match.change.name}. Its spread is {fmt(match.spread_ratio)} times the baseline's, and undoing "
            f"the conversion brings it back onto the baseline distribution (KS distance {fmt(match.distance_raw)} as exported, "
            f"{fmt(match.distance_converted)} converted back); the baseline coefficient would be applied in the wrong unit",
            columns=[name],
            value=match.distance_converted,
            threshold=settings.threshold("match"),
            source=f"{UNIT_SOURCE}; {settings.threshold('match').source}",
            remedy=f"ask for {name} in the baseline's unit, or convert it back before use; the other drift rules compared it converted back",
            details={
                "conversion": match.change.name,
                "scale": match.change.scale,
                "offset": match.change.offset,
                "spread_ratio": match.spread_ratio,
                "ks_as_exported": match.distance_raw,
                "ks_converted_back": match.distance_converted,
            },
        )


def _distribution(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    comparison = _columns(ctx)
    alpha = settings.limit("alpha")
    for column, shift in comparison.shifts.items():
        if not (shift.adjusted < alpha):
            continue
        graded = settings.grade_of(shift.psi)
        if graded is None:
            continue
        grade, limit = graded
        name = comparison.names[column]
        what = "KS distance" if shift.test == "Kolmogorov-Smirnov" else "Cramer's V"
        yield settings.finding(
            grade,
            f"{name} moved since the baseline: PSI {fmt(shift.psi)} over the baseline's "
            + ("deciles" if shift.test == "Kolmogorov-Smirnov" else "levels")
            + f", {what} {fmt(shift.distance)} ({shift.test} p {shift.adjusted:.2g} adjusted across columns, "
            f"{shift.baseline_values:,} values then, {shift.new_values:,} now)",
            columns=[name],
            value=shift.psi,
            threshold=limit,
            source=f"{limit.source}; {TEST_SOURCE}",
            remedy=f"find out why {name} moved (a new site mix, a season, a sensor change) before applying the baseline model; "
            "refit if the new range matters",
            details={
                "psi": shift.psi,
                "test": shift.test,
                "distance": shift.distance,
                "p_value": shift.p_value,
                "p_value_adjusted": shift.adjusted,
                "baseline_values": shift.baseline_values,
                "new_values": shift.new_values,
                "sketch_rank_error": shift.rank_error,
            },
        )


def _missing(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    comparison = _columns(ctx)
    alpha = settings.limit("alpha")
    for column, shift in comparison.missing.items():
        if not (shift.adjusted < alpha):
            continue
        graded = settings.grade_of(abs(shift.effect))
        if graded is None:
            continue
        grade, limit = graded if shift.effect > 0 else (Grade.NOTE, graded[1])
        name = comparison.names[column]
        yield settings.finding(
            grade,
            f"{name} is missing in {shift.new_share:.1%} of rows, against {shift.baseline_share:.1%} in the baseline "
            f"(Cohen's h {fmt(shift.effect)}, p {shift.adjusted:.2g} adjusted across columns)",
            columns=[name],
            value=abs(shift.effect),
            threshold=limit,
            source=f"{limit.source}; {ALPHA_SOURCE}",
            remedy=f"ask why {name} is {'missing more' if shift.effect > 0 else 'present more'} often than before; holes that appear "
            "in one month are rarely random",
            details={"baseline_share": shift.baseline_share, "share": shift.new_share, "cohens_h": shift.effect, "p_value": shift.p_value, "p_value_adjusted": shift.adjusted},
        )


def _coverage(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    model = _model(ctx)
    flagged = model.outside | model.hidden
    count = int(flagged.sum())
    total = int(model.positions.size)
    if count == 0 or total == 0:
        return
    share = count / total
    graded = settings.grade_of(share)
    grade, limit = graded if graded is not None else (Grade.NOTE, None)
    ratio = model.leverage / model.largest_leverage if model.largest_leverage > 0 else model.leverage
    labels, values, listed = ctx.listed_rows(model.positions[flagged], ratio[flagged])
    columns = [c for c in model.outside_by_column]
    parts = []
    if model.outside.any():
        parts.append(f"{int(model.outside.sum()):,} outside the baseline's range (" + ", ".join(f"{c} {n:,}" for c, n in model.outside_by_column.items()) + ")")
    if model.hidden.any():
        parts.append(f"{int(model.hidden.sum()):,} inside every range but off the baseline's joint cloud (leverage above its largest, {fmt(model.largest_leverage)})")
    converted = f"; compared after converting {', '.join(model.converted)} back to the baseline's unit" if model.converted else ""
    yield settings.finding(
        grade,
        f"{count:,} of {total:,} rows ({share:.1%}) lie where the baseline fit never saw data: " + "; ".join(parts) + converted,
        columns=columns,
        rows=labels,
        row_values=values,
        row_count=listed,
        value=share,
        threshold=limit,
        source=f"{limit.source if limit is not None else COMMON_PRACTICE}; hidden extrapolation: leverage beyond the data's largest "
        "(Montgomery, Peck & Vining 2012, Introduction to Linear Regression Analysis, 5th ed., sec. 3.8)",
        remedy="treat the baseline model's predictions for these rows as extrapolations; refit on both extracts if the new conditions will recur",
        details={
            "rows_compared": total,
            "outside_range": int(model.outside.sum()),
            "outside_by_column": dict(model.outside_by_column),
            "hidden_extrapolation": int(model.hidden.sum()),
            "baseline_largest_leverage": model.largest_leverage,
            "converted_back": dict(model.converted),
        },
    )


def _relationship(ctx: RunContext, settings: RuleSettings) -> Iterator[Finding]:
    model = _model(ctx)
    chow = model.chow
    if chow is None:
        raise NotApplicable("too few complete rows with known levels to fit the baseline's design on this table")
    f_squared = (chow.rss_pooled - chow.rss_first - chow.rss_second) / (chow.rss_first + chow.rss_second)
    if not chow.p_value < settings.limit("alpha"):
        return
    graded = settings.grade_of(model.error_ratio)
    if graded is None:
        return
    grade, limit = graded
    shifts = model.shifts
    order = [int(i) for i in np.argsort(-np.abs(np.nan_to_num(shifts, nan=0.0)), kind="stable")]
    named = [f"{model.column_names[i]} {shifts[i]:+.1f} SE" for i in order[:3] if np.isfinite(shifts[i])]
    yield settings.finding(
        grade,
        f"the relationship changed since the baseline: the baseline fit predicts these rows with an RMS error {fmt(model.error_ratio)} "
        f"times its own residual SD; Chow F {fmt(chow.f)} on {chow.df_num} and {chow.df_den} df (p {chow.p_value:.2g}), "
        f"separate coefficients remove {chow.added_share:.1%} of the pooled residual sum of squares (Cohen's f^2 {fmt(f_squared)}); "
        f"largest coefficient shifts: {', '.join(named)}",
        columns=[c for c in dict.fromkeys(model.column_names[i].split("=")[0] for i in order[:3] if np.isfinite(shifts[i])) if c != "(intercept)"],
        value=model.error_ratio,
        threshold=limit,
        source=f"{limit.source}; {CHOW_SOURCE}",
        remedy="do not apply the baseline coefficients to this extract; find what changed (equipment, metering, operation) and refit",
        details={
            "chow_f": chow.f,
            "df_num": chow.df_num,
            "df_den": chow.df_den,
            "p_value": chow.p_value,
            "rss_baseline": chow.rss_first,
            "rss_new": chow.rss_second,
            "rss_pooled": chow.rss_pooled,
            "cohens_f2": f_squared,
            "coefficient_shifts_in_se": {model.column_names[i]: float(shifts[i]) for i in order if np.isfinite(shifts[i])},
            "prediction_rmse": model.prediction_rmse,
            "baseline_residual_sd": model.baseline_fit.sigma,
            "prediction_error_ratio": model.error_ratio,
            "rows_compared": model.fit_rows,
            "converted_back": dict(model.converted),
        },
    )


ALPHA = Threshold("alpha", 0.05, ALPHA_SOURCE)

RULES = [
    Rule(
        id="drift.schema",
        summary="Columns of the baseline missing here, renamed (matched by their summaries), new, or with another kind or role.",
        why="A model is applied by column name and kind. A predictor or target that is gone makes the baseline model "
        "impossible to apply; a renamed one is silently dropped by code that selects columns by name; a numeric column "
        "exported as text, or a predictor now left out, changes the design the coefficients belong to.",
        remedy="export the extract with the baseline's columns, names and types, or refit and call it a new model",
        check=_schema,
        grades=(Grade.BLOCKS, Grade.MISLEADS, Grade.WEAKENS, Grade.NOTE),
        needs=frozenset({"baseline"}),
    ),
    Rule(
        id="drift.levels",
        summary="Category levels the baseline never had (its fit has no coefficient for them), and baseline levels that vanished; "
        "value: the share of complete cases with a new level.",
        why="Treatment coding gives each level seen in the baseline its own coefficient. A new level, such as a new equipment "
        "type, has none: the baseline model either fails on those rows or silently treats them as the reference level, "
        "whose energy use may be quite different.",
        remedy="refit with rows of the new level, or set those rows aside",
        check=_levels,
        thresholds=(
            Threshold("misleads", 0.05, COMMON_PRACTICE, Grade.MISLEADS, ">="),
            Threshold("weakens", 0.0, COMMON_PRACTICE, Grade.WEAKENS, ">"),
        ),
        grades=(Grade.NOTE,),
        needs=frozenset({"baseline"}),
    ),
    Rule(
        id="drift.units",
        summary="A numeric column whose location and spread moved by a unit conversion (x10, x100, x1000, Celsius to Fahrenheit, "
        "kg to lb, feet to metres, x3.6, or back), named as the conversion rather than as drift; value: the KS distance "
        "after converting back.",
        why="A coefficient is per unit of its predictor. Exported in Fahrenheit instead of Celsius, a temperature's slope "
        "applied by the baseline model is 1.8 times too steep per degree and offset by 32 degrees; a meter read in Wh "
        "instead of kWh is off by a factor of 1000. Nothing else in the table looks wrong.",
        remedy="ask for the column in the baseline's unit, or convert it back",
        check=_units,
        thresholds=(Threshold("match", 0.5, "a conversion must at least halve the KS distance to the baseline (common practice)"),),
        grades=(Grade.MISLEADS,),
        needs=frozenset({"baseline"}),
    ),
    Rule(
        id="drift.distribution",
        summary="A model column whose distribution moved since the baseline: PSI 0.1 or more with a significant KS or chi-square "
        "test, adjusted across columns; value: the PSI.",
        why="The baseline coefficients were estimated over the baseline's mix of conditions. When a predictor's distribution "
        "moves, the fit is applied where it had fewer rows (wider uncertainty), and any curvature it missed matters more; "
        "when the target moves, something the predictors do not explain has changed.",
        remedy="find out why the column moved before applying the baseline model",
        check=_distribution,
        thresholds=(
            Threshold("misleads", 0.25, PSI_SOURCE, Grade.MISLEADS, ">="),
            Threshold("weakens", 0.10, PSI_SOURCE, Grade.WEAKENS, ">="),
            ALPHA,
        ),
        needs=frozenset({"baseline"}),
    ),
    Rule(
        id="drift.missing",
        summary="A model column whose share of missing values changed since the baseline (Cohen's h 0.2 or more, significant "
        "after adjustment across columns); value: |h|.",
        why="Complete-case fitting drops every row with a hole. A column that is suddenly missing more often shrinks the "
        "sample and, when the holes follow a cause (a site, a sensor, a season), biases what remains.",
        remedy="ask why the column is missing more often than before",
        check=_missing,
        thresholds=(
            Threshold("misleads", 0.5, COHEN_H_SOURCE, Grade.MISLEADS, ">="),
            Threshold("weakens", 0.2, COHEN_H_SOURCE, Grade.WEAKENS, ">="),
            ALPHA,
        ),
        grades=(Grade.NOTE,),
        needs=frozenset({"baseline"}),
    ),
    Rule(
        id="drift.coverage",
        summary="Complete rows of the new extract outside the baseline's predictor ranges, or off its joint cloud (leverage "
        "beyond the baseline's largest); value: their share of the rows compared (new levels are drift.levels').",
        why="The baseline fit was only checked where the baseline's data are. Rows beyond its ranges ask it to extrapolate; "
        "rows inside every range but off the cloud the predictors formed together are extrapolations too (hidden "
        "extrapolation), with a prediction variance larger than anywhere in the baseline.",
        remedy="treat those predictions as extrapolations, or refit on data that covers them",
        check=_coverage,
        thresholds=(
            Threshold("misleads", 0.25, COMMON_PRACTICE, Grade.MISLEADS, ">"),
            Threshold("weakens", 0.05, COMMON_PRACTICE, Grade.WEAKENS, ">"),
        ),
        grades=(Grade.NOTE,),
        needs=frozenset({"baseline", "rows"}),
    ),
    Rule(
        id="drift.relationship",
        summary="Coefficients that differ between the baseline and the new extract (Chow test significant), graded by the "
        "baseline fit's RMS prediction error on the new rows over its residual SD (the value); with each coefficient's "
        "shift in standard errors and Cohen's f^2.",
        why="Even when every column looks as before, the way energy responds to them can change (new equipment, a changed "
        "defrost schedule, a meter swapped). Then the baseline coefficients predict the new rows worse than their "
        "residual SD promises, and decisions based on them are off.",
        remedy="do not apply the baseline coefficients; find what changed and refit",
        check=_relationship,
        thresholds=(
            Threshold("misleads", 1.5, ERROR_RATIO_SOURCE, Grade.MISLEADS, ">="),
            Threshold("weakens", 1.1, ERROR_RATIO_SOURCE, Grade.WEAKENS, ">="),
            ALPHA,
        ),
        needs=frozenset({"baseline", "rows", "fit"}),
    ),
]

"""The teaching view: for each rule, a small live demonstration of the damage it guards against.

Every demonstration builds an invented cold-storage warehouse table with a
fixed seed (numbers are invented, not measurements), fits it with and without
the problem, and returns what changed as plain text of at most
:data:`MAX_LINES` lines together with the numbers behind it, so that tests
can check that the damage shown is real. It also returns the table itself,
with the problem in it, and the options to check it with: its rule fires on
that table (:mod:`prefit.teaching.checking` runs it), and `prefit why RULE`
prints what the rule reports there.
"""

from __future__ import annotations

import importlib
from typing import Callable, Mapping

from ..rule import rule_family
from .base import MAX_LINES, Demonstration

__all__ = ["DEMONSTRATIONS", "MAX_LINES", "Demonstration", "demonstration_for"]

DEMONSTRATIONS: Mapping[str, tuple[str, str]] = {
    "assumptions": ("assumptions", "uneven_spread"),
    "assumptions.autocorrelation": ("assumptions", "autocorrelated_days"),
    "assumptions.heteroscedasticity": ("assumptions", "uneven_spread"),
    "assumptions.nonlinearity": ("assumptions", "heat_bend"),
    "assumptions.residual-normality": ("assumptions", "skewed_errors"),
    "collinearity": ("collinearity", "area_and_racks"),
    "collinearity.condition": ("collinearity", "area_and_racks"),
    "collinearity.exact": ("collinearity", "parts_and_total"),
    "collinearity.pairwise": ("collinearity", "five_measures_of_size"),
    "collinearity.precision": ("collinearity", "lost_digits"),
    "collinearity.vif": ("collinearity", "dock_follows_outdoor"),
    "design": ("design", "codes_as_numbers"),
    "design.excluded-column": ("design", "date_as_a_number"),
    "design.possible-code": ("design", "codes_as_numbers"),
    "drift": ("drift", "fahrenheit_export"),
    "drift.coverage": ("drift", "hotter_month"),
    "drift.distribution": ("drift", "larger_sites_join"),
    "drift.levels": ("drift", "new_compressor_type"),
    "drift.missing": ("drift", "humidity_sensor_fails"),
    "drift.relationship": ("drift", "changed_defrost_schedule"),
    "drift.schema": ("drift", "dropped_column"),
    "drift.units": ("drift", "fahrenheit_export"),
    "grouping": ("grouping", "shared_site_effect"),
    "grouping.between-predictors": ("grouping", "noise_site_facts"),
    "grouping.few-groups": ("grouping", "few_sites"),
    "grouping.group-influence": ("grouping", "one_site_decides"),
    "grouping.group-outliers": ("grouping", "one_large_site"),
    "grouping.residual-correlation": ("grouping", "shared_site_effect"),
    "grouping.within-between": ("grouping", "warm_sites_cold_days"),
    "hygiene": ("hygiene", "duplicated_days"),
    "hygiene.constant-predictor": ("hygiene", "one_setpoint"),
    "hygiene.duplicate-rows": ("hygiene", "duplicated_days"),
    "hygiene.high-cardinality": ("hygiene", "levels_eat_rows"),
    "hygiene.identifier": ("hygiene", "site_number_as_predictor"),
    "hygiene.non-finite": ("hygiene", "one_infinite_reading"),
    "hygiene.numeric-as-text": ("hygiene", "kwh_as_text"),
    "hygiene.rare-levels": ("hygiene", "two_row_level"),
    "hygiene.scale-disparity": ("hygiene", "watt_hours_beside_degrees"),
    "hygiene.target-leak": ("hygiene", "leaked_target"),
    "influence": ("influence", "mega_site"),
    "influence.cooks-distance": ("influence", "mega_site"),
    "influence.dfbetas": ("influence", "one_day_moves_one_slope"),
    "influence.dffits": ("influence", "own_prediction_pull"),
    "influence.leverage": ("influence", "lever_site"),
    "influence.robust-distortion": ("influence", "masked_group"),
    "missingness": ("missingness", "dropout_codes"),
    "missingness.column-rate": ("missingness", "one_column_with_holes"),
    "missingness.complete-cases": ("missingness", "deleted_rows"),
    "missingness.disguised-codes": ("missingness", "dropout_codes"),
    "missingness.informative": ("missingness", "holes_that_follow_energy"),
    "missingness.mcar": ("missingness", "holes_by_pattern"),
    "missingness.pattern": ("missingness", "sites_that_stop_reporting"),
    "outliers": ("outliers", "tenfold_reading"),
    "outliers.multivariate": ("outliers", "unusual_combination"),
    "outliers.studentized-residual": ("outliers", "tenfold_reading"),
    "outliers.univariate": ("outliers", "square_feet_slip"),
    "range": ("ranges", "narrow_setpoint"),
    "range.extrapolation": ("ranges", "heat_wave_beyond_the_data"),
    "range.narrow": ("ranges", "narrow_setpoint"),
    "range.near-constant": ("ranges", "mostly_one_value"),
    "sample-size": ("sample_size", "small_extract"),
    "sample-size.minimum": ("sample_size", "residual_sd_unsettled"),
    "sample-size.per-parameter": ("sample_size", "small_extract"),
    "sample-size.power": ("sample_size", "too_few_to_see"),
    "target": ("target", "skewed_energy"),
    "target.censored": ("target", "saturated_meter"),
    "target.constant": ("target", "flat_meter"),
    "target.missing-values": ("target", "unread_days"),
    "target.not-numeric": ("target", "yes_no_target"),
    "target.skewed": ("target", "skewed_energy"),
}
"""Demonstrations by rule id or by family (the part of a rule id before the dot): module and function.

Every built-in rule has a function of its own (no two rules share one), whose table makes that rule fire;
a family's entry names one of its rules' demonstrations, shown by `prefit why FAMILY`.
"""


def demonstration_for(rule_id: str) -> Callable[[], Demonstration] | None:
    """The demonstration for a rule: its own if it has one, else its family's, else None."""
    for key in (rule_id, rule_family(rule_id)):
        if key in DEMONSTRATIONS:
            module, function = DEMONSTRATIONS[key]
            return getattr(importlib.import_module(f"{__name__}.{module}"), function)
    return None

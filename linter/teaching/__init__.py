"""The teaching view: for each rule, a small live demonstration of the damage it guards against.

Every demonstration builds an invented warehouse table with a fixed seed
(numbers are invented, not measurements), fits it with and without the
problem, and returns what changed as plain text of at most
:data:`MAX_LINES` lines together with the numbers behind it, so that tests
can check that the damage shown is real.
"""

from __future__ import annotations

import importlib
from typing import Callable, Mapping

from ..rule import rule_family
from .base import MAX_LINES, Demonstration

__all__ = ["DEMONSTRATIONS", "MAX_LINES", "Demonstration", "demonstration_for"]

DEMONSTRATIONS: Mapping[str, tuple[str, str]] = {
    "assumptions": ("assumptions", "uneven_spread"),
    "assumptions.heteroscedasticity": ("assumptions", "uneven_spread"),
    "assumptions.nonlinearity": ("assumptions", "heat_bend"),
    "assumptions.residual-normality": ("assumptions", "skewed_errors"),
    "assumptions.autocorrelation": ("assumptions", "autocorrelated_days"),
    "collinearity": ("collinearity", "area_and_racks"),
    "collinearity.vif": ("collinearity", "area_and_racks"),
    "collinearity.pairwise": ("collinearity", "area_and_racks"),
    "collinearity.condition": ("collinearity", "area_and_racks"),
    "design": ("design", "codes_as_numbers"),
    "drift": ("drift", "fahrenheit_export"),
    "design.possible-code": ("design", "codes_as_numbers"),
    "hygiene": ("hygiene", "duplicated_days"),
    "hygiene.duplicate-rows": ("hygiene", "duplicated_days"),
    "influence": ("influence", "mega_site"),
    "influence.cooks-distance": ("influence", "mega_site"),
    "influence.dfbetas": ("influence", "mega_site"),
    "influence.leverage": ("influence", "mega_site"),
    "missingness": ("missingness", "dropout_codes"),
    "missingness.disguised-codes": ("missingness", "dropout_codes"),
    "outliers": ("outliers", "tenfold_reading"),
    "outliers.studentized-residual": ("outliers", "tenfold_reading"),
    "outliers.univariate": ("outliers", "tenfold_reading"),
    "range": ("ranges", "narrow_setpoint"),
    "range.narrow": ("ranges", "narrow_setpoint"),
    "ranges": ("ranges", "narrow_setpoint"),
    "sample-size": ("sample_size", "small_extract"),
    "sample-size.per-parameter": ("sample_size", "small_extract"),
    "sample-size.minimum": ("sample_size", "small_extract"),
    "target": ("target", "skewed_energy"),
    "target.skewed": ("target", "skewed_energy"),
}
"""Demonstrations by rule id or by family (the part of a rule id before the dot): module and function."""


def demonstration_for(rule_id: str) -> Callable[[], Demonstration] | None:
    """The demonstration for a rule: its own if it has one, else its family's, else None."""
    for key in (rule_id, rule_family(rule_id)):
        if key in DEMONSTRATIONS:
            module, function = DEMONSTRATIONS[key]
            return getattr(importlib.import_module(f"{__name__}.{module}"), function)
    return None

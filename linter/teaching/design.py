"""Design: compressor types coded 1-4 and fitted as one number instead of as categories."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, fit_line, generator

TYPES = ("screw", "scroll", "reciprocating", "CO2 transcritical")
TYPE_EFFECT_KWH = np.array([0.0, 350.0, 650.0, -300.0])


def codes_as_numbers() -> Demonstration:
    """Residual SD and the CO2 sites' average error with type codes as one slope, and as categories."""
    rng = generator(9)
    code = rng.integers(0, 4, 200)
    energy = 7_000 + TYPE_EFFECT_KWH[code] + rng.normal(0, 200, code.size)
    as_number = fit_line(energy, code + 1.0)
    as_levels = fit_line(energy, *((code == level).astype(float) for level in (1, 2, 3)))
    co2 = code == 3
    misses = (float(as_number.residual[co2].mean()), float(np.round(as_levels.residual[co2].mean(), 6)))
    return Demonstration(
        (
            "200 invented site-days; compressor_type exported as codes 1=screw 2=scroll 3=reciprocating 4=CO2.",
            "",
            "                         residual SD   average error on CO2 sites",
            f"  codes as one slope     {fmt(as_number.sigma):>11}   {fmt(misses[0]):>26}",
            f"  codes as categories    {fmt(as_levels.sigma):>11}   {fmt(misses[1]):>26}",
            "",
            "One slope across codes assumes each step costs the same; the CO2 sites (code 4, the cheapest) are",
            f"predicted {fmt(-misses[0])} kWh too high on average. As categories (--categorical) every type gets its own level.",
        ),
        {"sigma_codes": as_number.sigma, "sigma_levels": as_levels.sigma, "co2_error_codes": misses[0], "co2_error_levels": misses[1]},
    )


def date_as_a_number() -> Demonstration:
    """The slope on a date read as a number (days since 1970), and its intercept: a coefficient at year 1970."""
    rng = generator(49)
    days = np.arange(20_454.0, 20_544.0)  # 90 days of 2026, counted from 1970-01-01
    energy = 6_000 + 15 * (days - days[0]) + rng.normal(0, 300, days.size)
    line = fit_line(energy, days)
    return Demonstration(
        (
            "90 invented days of 2026; energy creeps up by 15 kWh a day as the season warms.",
            "",
            f"  fitted on the raw date (days since 1970): slope {fmt(float(line.coef[1]))} kWh per day, intercept {fmt(float(line.coef[0]))} kWh",
            "",
            "The intercept is the energy predicted for 1 January 1970, 56 years outside the data, and the slope mixes",
            "the season with every other trend. prefit leaves raw dates out of the design; derive a trend, a season or a",
            "weekday column on purpose instead.",
        ),
        {"slope": float(line.coef[1]), "intercept": float(line.coef[0])},
    )

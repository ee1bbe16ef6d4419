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
        table={"compressor_type": code + 1, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def date_as_a_number() -> Demonstration:
    """A date exported as the whole number YYYYMMDD, fitted as one: jumps at every month's end, and an intercept at year 0."""
    rng = generator(49)
    days = np.datetime64("2026-01-01") + np.arange(90)  # January to March 2026
    elapsed = np.arange(days.size, dtype=float)
    as_number = np.array([int(str(d).replace("-", "")) for d in days], dtype=float)  # 20260101 ... 20260331
    energy = 6_000 + 15 * elapsed + rng.normal(0, 300, days.size)
    read_as_number, read_as_days = fit_line(energy, as_number), fit_line(energy, elapsed)
    return Demonstration(
        (
            "90 invented days of 2026, January to March; energy creeps up by 15 kWh a day as the season turns.",
            "The export writes the date as the whole number YYYYMMDD: 20260131 is followed by 20260201, a step of 70.",
            "",
            "                              slope                   intercept",
            f"  date read as a number       {fmt(float(read_as_number.coef[1])):>6} kWh per unit    {fmt(float(read_as_number.coef[0])):>12}",
            f"  days since 1 January        {fmt(float(read_as_days.coef[1])):>6} kWh per day     {fmt(float(read_as_days.coef[0])):>12}",
            "",
            f"Read as a number, the 90 days span {fmt(float(np.ptp(as_number)))} units (each month's end jumps by 70): the slope per unit",
            "is not a slope per day, it changes with how many month ends the extract holds, and the intercept is the",
            "energy of year 0.",
            "prefit leaves such columns out of the design; derive a trend (days since the first), a season or a",
            "weekday column on purpose instead.",
        ),
        {
            "slope": float(read_as_number.coef[1]),
            "intercept": float(read_as_number.coef[0]),
            "sigma_number": read_as_number.sigma,
            "sigma_days": read_as_days.sigma,
        },
        table={"day": as_number.astype(np.int64), "outdoor_c": (rng.normal(4, 5, days.size)).round(1), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )

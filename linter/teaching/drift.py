"""Drift: last month's fit applied to this month's extract, whose temperature arrived in Fahrenheit."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, fit_line, generator

TRUE_SLOPE = 55.0


def fahrenheit_export() -> Demonstration:
    """The baseline fit's prediction error on a new month, with outdoor_c in Celsius and exported in Fahrenheit."""
    rng = generator(20)
    rows = 600
    june, july = rng.normal(16, 5, rows), rng.normal(17, 5, rows)
    energy_june = 2_000 + TRUE_SLOPE * june + rng.normal(0, 300, rows)
    energy_july = 2_000 + TRUE_SLOPE * july + rng.normal(0, 300, rows)
    baseline = fit_line(energy_june, june)
    as_celsius = energy_july - (baseline.coef[0] + baseline.coef[1] * july)
    as_fahrenheit = energy_july - (baseline.coef[0] + baseline.coef[1] * (july * 1.8 + 32))
    rms = (float(np.sqrt(np.mean(as_celsius**2))), float(np.sqrt(np.mean(as_fahrenheit**2))))
    return Demonstration(
        (
            f"{rows} invented site-days in June fit energy = {fmt(baseline.coef[0])} + {fmt(baseline.coef[1])} x outdoor_c",
            f"(residual SD {fmt(baseline.sigma)} kWh). July's extract is the same process, but its export writes degrees Fahrenheit.",
            "",
            "                                  RMS error of the June fit on July",
            f"  outdoor_c in Celsius             {fmt(rms[0]):>10} kWh",
            f"  outdoor_c exported in Fahrenheit {fmt(rms[1]):>10} kWh",
            "",
            f"Nothing in July's table looks wrong on its own, yet the June model is off by {fmt(rms[1] / rms[0])} times its usual",
            "error: every coefficient is per unit, and the unit changed under it.",
        ),
        {"rms_celsius": rms[0], "rms_fahrenheit": rms[1], "residual_sd": baseline.sigma},
    )

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

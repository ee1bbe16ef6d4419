"""Hygiene: the same site-days exported several times look like more evidence than there is."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, Line, fit_line, generator


def _width(line: Line) -> float:
    """Width of the normal-theory 95% interval of the slope."""
    return float(2 * 1.96 * line.se[1])


def duplicated_days() -> Demonstration:
    """Standard error of the outdoor-temperature slope from 40 site-days, and from the same rows exported four times."""
    rng = generator(5)
    outdoor = rng.uniform(-5, 35, 40).round(1)
    energy = 8_000 + 55 * outdoor + rng.normal(0, 600, outdoor.size)
    once, repeated = fit_line(energy, outdoor), fit_line(np.tile(energy, 4), np.tile(outdoor, 4))
    return Demonstration(
        (
            "40 invented site-days; an export glitch repeats every row four times (160 rows, no new information).",
            "",
            "                      outdoor_c slope   std. error   95% interval width   rows",
            f"  each day once      {fmt(once.coef[1]):>15}   {fmt(once.se[1]):>10}   {fmt(_width(once)):>18}   {40:>4}",
            f"  each day 4 times   {fmt(repeated.coef[1]):>15}   {fmt(repeated.se[1]):>10}   {fmt(_width(repeated)):>18}   {160:>4}",
            "",
            f"The slope is identical, but the repeated rows shrink its standard error to {repeated.se[1] / once.se[1]:.0%}:",
            "the fit claims twice the precision the 40 real days support, and p-values follow.",
        ),
        {"se_ratio": float(repeated.se[1] / once.se[1]), "slope_difference": float(repeated.coef[1] - once.coef[1])},
    )


def leaked_target() -> Demonstration:
    """R-squared and the outdoor slope with and without a column computed from the energy itself (the gross meter reading)."""
    rng = generator(24)
    rows = 200
    outdoor = rng.uniform(-5, 35, rows).round(1)
    energy = 6_000 + 110 * outdoor + rng.normal(0, 900, rows)
    gross = 1.08 * energy + rng.normal(0, 20, rows)  # the site meter: refrigeration plus a near-constant share
    honest, leaking = fit_line(energy, outdoor), fit_line(energy, outdoor, gross)
    return Demonstration(
        (
            f"{rows} invented site-days; gross_kwh is the site meter, read after the fact, which contains the energy_kwh to be explained.",
            "",
            "                                R^2     outdoor_c slope",
            f"  energy on outdoor_c           {honest.r_squared:.2f}   {fmt(honest.coef[1]):>15}",
            f"  ... plus gross_kwh            {leaking.r_squared:.2f}   {fmt(leaking.coef[1]):>15}",
            "",
            "With the leaked column the fit looks perfect and the outdoor slope all but vanishes: gross_kwh already holds",
            "the answer, so nothing else seems to matter. Such a model cannot be used where the answer is not yet known.",
        ),
        {"r2_honest": honest.r_squared, "r2_leaking": leaking.r_squared, "slope_honest": float(honest.coef[1]), "slope_leaking": float(leaking.coef[1])},
    )

"""Outliers: one meter reading entered ten times too large."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, fit_line, floor_areas, generator


def tenfold_reading() -> Demonstration:
    """Slope, residual spread and R^2 with one reading typed ten times too large, and after correcting it."""
    rng = generator(3)
    area = floor_areas(rng, 60)
    energy = 900 + 0.3 * area + rng.normal(0, 800, area.size)
    typo = energy.copy()
    wrong = int(np.argmin(np.abs(area - np.median(area))))
    typo[wrong] = 10 * energy[wrong]
    bad, good = fit_line(typo, area), fit_line(energy, area)
    return Demonstration(
        (
            f"60 invented site-days; one ordinary site's reading of {fmt(energy[wrong])} kWh was typed as {fmt(typo[wrong])}.",
            "",
            "                      floor_area_m2 slope   std. error   residual SD   R^2",
            f"  with the typo      {fmt(bad.coef[1]):>19}   {fmt(bad.se[1]):>10}   {fmt(bad.sigma):>11}   {bad.r_squared:.2f}",
            f"  reading corrected  {fmt(good.coef[1]):>19}   {fmt(good.se[1]):>10}   {fmt(good.sigma):>11}   {good.r_squared:.2f}",
            "",
            f"One wrong row of 60 multiplies the residual SD by {bad.sigma / good.sigma:.1f} and the slope's standard error by",
            f"{bad.se[1] / good.se[1]:.1f}: every interval and test of the model is built on a spread that is not there.",
        ),
        {"sigma_ratio": float(bad.sigma / good.sigma), "se_ratio": float(bad.se[1] / good.se[1]), "r_squared_bad": bad.r_squared, "r_squared_good": good.r_squared},
    )

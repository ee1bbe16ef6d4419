"""Influence: one mega-site far beyond the others decides the slope on its own."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, fit_line, floor_areas, generator


def mega_site() -> Demonstration:
    """The floor-area slope with and without one site five times larger than the rest."""
    rng = generator(2)
    area = np.append(floor_areas(rng, 29), 200_000.0)
    energy = 900 + 0.3 * area + rng.normal(0, 800, area.size)
    energy[-1] = 900 + 0.15 * area[-1]
    with_it, without = fit_line(energy, area), fit_line(energy[:-1], area[:-1])
    cooks = float(with_it.residual[-1] ** 2 / (2 * with_it.sigma**2) * with_it.hat[-1] / (1 - with_it.hat[-1]) ** 2)
    change = float(with_it.coef[1] / without.coef[1] - 1)
    return Demonstration(
        (
            "30 invented sites; 29 have 2,000-40,000 m2, one mega-site has 200,000 m2 and runs",
            "more efficiently per m2 than the others (an invented 0.15 instead of 0.30 kWh per m2).",
            "",
            "                       floor_area_m2 slope   std. error",
            f"  all 30 sites         {fmt(with_it.coef[1]):>19}   {fmt(with_it.se[1]):>10}",
            f"  mega-site left out   {fmt(without.coef[1]):>19}   {fmt(without.se[1]):>10}",
            "",
            f"The mega-site has leverage {with_it.hat[-1]:.2f} and Cook's distance {fmt(cooks)}: one row of 30 moves",
            f"the slope by {change:+.0%}, so the fitted line describes the mega-site, not the typical site.",
        ),
        {"slope_change": change, "cooks_distance": cooks, "leverage": float(with_it.hat[-1])},
    )


def own_prediction_pull() -> Demonstration:
    """How far one site-day moves its own fitted value: fitted with it, and predicted from the other rows."""
    rng = generator(41)
    rows = 60
    doors = rng.uniform(100, 500, rows)
    doors[-1] = 1_400.0  # a stock-take day with three times the usual dock traffic
    energy = 4_000 + 6 * doors + rng.normal(0, 300, rows)
    energy[-1] = 4_000 + 2 * doors[-1]  # the extra openings were brief: far less energy than the line expects
    with_it, without = fit_line(energy, doors), fit_line(energy[:-1], doors[:-1])
    fitted_with = with_it.coef[0] + with_it.coef[1] * doors[-1]
    fitted_without = without.coef[0] + without.coef[1] * doors[-1]
    dffits = float((fitted_with - fitted_without) / (without.sigma * np.sqrt(with_it.hat[-1])))
    return Demonstration(
        (
            f"{rows} invented site-days; one stock-take day had 1,400 door openings (the others 100-500).",
            "",
            "                                  fitted energy on that day",
            f"  line fitted with the day         {fmt(float(fitted_with)):>10}",
            f"  line fitted without it           {fmt(float(fitted_without)):>10}",
            f"  what the day actually used       {fmt(float(energy[-1])):>10}",
            "",
            f"DFFITS {dffits:.1f} (cut-off 2*sqrt(p/n) = {2 * np.sqrt(2 / rows):.2f}): the day drags the line to itself, so its",
            "own residual looks small while the line no longer describes the other days.",
        ),
        {"dffits": dffits, "cutoff": float(2 * np.sqrt(2 / rows))},
    )

"""Outliers: a reading ten times too large, floor areas keyed in square feet, and a site unusual only in combination."""

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
        table={"floor_area_m2": area, "energy_kwh": typo.round(1)},
        options={"target": "energy_kwh"},
    )


def unusual_combination() -> Demonstration:
    """A site small in floor area but huge in racked volume: ordinary in each column, far in the pair."""
    rng = generator(42)
    rows = 80
    area = rng.uniform(5_000, 30_000, rows)
    racks = area * 7.5 + rng.normal(0, 6_000, rows)
    area[-1], racks[-1] = 8_000.0, 215_000.0  # a high-bay site: each value in range, the pair is not
    energy = 1_000 + 0.25 * area + 0.02 * racks + rng.normal(0, 900, rows)
    z = [(abs(c[-1] - np.median(c)) / (1.4826 * np.median(np.abs(c - np.median(c))))) for c in (area, racks)]
    centred = np.column_stack([area, racks]) - np.column_stack([area, racks])[:-1].mean(axis=0)
    inverse = np.linalg.inv(np.cov(np.column_stack([area, racks])[:-1], rowvar=False))
    distance = float(np.sqrt(centred[-1] @ inverse @ centred[-1]))
    with_it, without = fit_line(energy, area, racks), fit_line(energy[:-1], area[:-1], racks[:-1])
    return Demonstration(
        (
            f"{rows} invented sites; racked volume follows floor area, except one high-bay site with a small floor.",
            "",
            f"  robust z of its floor area {z[0]:.1f}, of its rack volume {z[1]:.1f}: unremarkable one column at a time",
            f"  its distance from the other sites in the pair: {distance:.1f} (a chi-square(2) cut-off at 0.975 is 2.7)",
            "",
            "                        floor_area_m2 slope   rack_volume_m3 slope",
            f"  with the site         {fmt(with_it.coef[1]):>19}   {fmt(with_it.coef[2]):>20}",
            f"  without it            {fmt(without.coef[1]):>19}   {fmt(without.coef[2]):>20}",
            "",
            "Only the combination is unusual, and it is exactly what separates the two slopes: check such rows first.",
        ),
        {"z_area": float(z[0]), "z_racks": float(z[1]), "distance": distance, "slope_with": float(with_it.coef[1]), "slope_without": float(without.coef[1])},
        table={"floor_area_m2": area.round(), "rack_volume_m3": racks.round(), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


SQUARE_FEET_PER_M2 = 10.7639


def square_feet_slip() -> Demonstration:
    """Three sites' floor areas keyed in square feet among areas in square metres: the slope before and after converting them back."""
    rng = generator(60)
    rows, slipped = 60, 3
    area = floor_areas(rng, rows)
    energy = 900 + 0.3 * area + rng.normal(0, 800, rows)
    keyed = area.copy()
    keyed[:slipped] = (area[:slipped] * SQUARE_FEET_PER_M2).round(-1)
    wrong, right = fit_line(energy, keyed), fit_line(energy, area)
    median = float(np.median(keyed))
    spread = 1.4826 * float(np.median(np.abs(keyed - median)))
    z = np.abs(keyed[:slipped] - median) / spread
    return Demonstration(
        (
            f"{rows} invented sites; {slipped} of them had their floor area keyed in square feet (10.76 times the number",
            "in square metres) by a new clerk; their energy is what their real size uses.",
            "",
            "                              floor_area_m2 slope   std. error   R^2",
            f"  three areas in square feet  {fmt(wrong.coef[1]):>19}   {fmt(wrong.se[1]):>10}   {wrong.r_squared:.2f}",
            f"  converted back to m2        {fmt(right.coef[1]):>19}   {fmt(right.se[1]):>10}   {right.r_squared:.2f}",
            "",
            f"Each slipped value lies {z.min():.0f} to {z.max():.0f} robust SDs above the median floor area: far beyond any site in",
            f"the table, and each sits far from the line. The slope falls to {wrong.coef[1] / right.coef[1]:.0%} of the truth and R^2 collapses.",
            "Check values far out in one column at the source first; a unit slip is a common cause.",
        ),
        {"slope_slipped": float(wrong.coef[1]), "slope_right": float(right.coef[1]), "smallest_z": float(z.min())},
        table={"floor_area_m2": keyed, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )

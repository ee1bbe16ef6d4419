"""Influence: rows that decide the slope on their own, pull their own fitted value, move one coefficient, or hide as a group."""

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
        table={"site_id": np.char.mod("CS-%03d", np.arange(1, area.size + 1)), "floor_area_m2": area, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh", "id": "site_id"},
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
        table={"door_openings": doors.round(), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def masked_group() -> Demonstration:
    """Eight mis-keyed site-days far out in door openings pull the least-squares line onto themselves; a robust (MM) fit is not pulled."""
    import warnings

    from statsmodels.robust.resistant_linear_model import RLMDetSMM

    rng = generator(57)
    rows, wrong = 60, 8
    doors, outdoor = rng.uniform(100, 500, rows), rng.uniform(-5, 30, rows)
    energy = 4_000 + 6 * doors + 55 * outdoor + rng.normal(0, 250, rows)
    doors[:wrong] = rng.uniform(1_800, 2_000, wrong)  # counts keyed from a weekly total instead of a daily one
    energy[:wrong] = 4_000 + 6 * rng.uniform(100, 500, wrong) + 55 * outdoor[:wrong] + rng.normal(0, 250, wrong)
    with_them, without = fit_line(energy, doors, outdoor), fit_line(energy[wrong:], doors[wrong:], outdoor[wrong:])
    hat, sigma = with_them.hat[:wrong], with_them.sigma
    studentized = float(np.max(np.abs(with_them.residual[:wrong] / (sigma * np.sqrt(1 - hat)))))
    X = np.column_stack([np.ones(rows), doors, outdoor])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        robust = RLMDetSMM(energy, X).fit()
    robust_slope = float(robust.params[1])
    off_line = float(np.min(np.abs(energy[:wrong] - X[:wrong] @ robust.params)) / float(robust.scale))
    return Demonstration(
        (
            f"{rows} invented site-days; {wrong} have door counts keyed from a weekly total (1,800-2,000",
            "instead of 100-500) while their energy is an ordinary day's.",
            "",
            "                                 door_openings slope",
            f"  least squares, all rows        {fmt(float(with_them.coef[1])):>10}",
            f"  least squares, {wrong} rows left out {fmt(float(without.coef[1])):>8}",
            f"  robust (MM) fit, all rows      {fmt(robust_slope):>10}",
            "",
            f"The {wrong} rows pull the least-squares line onto themselves: their largest studentized residual",
            f"is only {studentized:.1f}, so least-squares diagnostics hide them. Against the robust fit each lies",
            f"at least {off_line:.1f} robust SDs off the line: bad leverage points.",
        ),
        {"slope_all": float(with_them.coef[1]), "slope_without": float(without.coef[1]), "slope_robust": robust_slope, "largest_studentized": studentized, "robust_residual_least": off_line},
        table={"door_openings": doors.round(), "outdoor_c": outdoor.round(1), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def lever_site() -> Demonstration:
    """A site far beyond the others that sits on the line: harmless today, yet any error in its reading moves the slope."""
    rng = generator(58)
    area = np.append(floor_areas(rng, 29), 160_000.0)
    energy = 900 + 0.3 * area + rng.normal(0, 800, area.size)
    energy[-1] = 900 + 0.3 * area[-1]  # exactly on the line
    line = fit_line(energy, area)
    typical = int(np.argmin(np.abs(area[:-1] - np.median(area[:-1]))))
    moved = {}
    for name, row in (("far", area.size - 1), ("typical", typical)):
        misread = energy.copy()
        misread[row] *= 1.10  # a meter reading 10% high
        moved[name] = float(np.round(fit_line(misread, area).coef[1] / line.coef[1] - 1, 3)) + 0.0
    return Demonstration(
        (
            "30 invented sites; 29 have 2,000-40,000 m2, one has 160,000 m2 and uses exactly what the line predicts.",
            "",
            f"  leverage of the large site {line.hat[-1]:.2f}; of a typical site {line.hat[typical]:.3f} (average p/n = {2 / area.size:.3f})",
            "",
            "                                     floor_area_m2 slope moves by",
            f"  the large site's meter 10% high     {moved['far']:>+8.1%}",
            f"  a typical site's meter 10% high     {moved['typical']:>+8.1%}",
            "",
            f"The large site decides {line.hat[-1]:.0%} of its own fitted value: the slope is in effect a line from the cloud to",
            "that one row. Today it agrees with the others; the fit cannot check it, and an error in that one row",
            "moves the slope as if it were many sites. Check high-leverage rows at the source.",
        ),
        {"leverage": float(line.hat[-1]), "leverage_typical": float(line.hat[typical]), "moved_far": moved["far"], "moved_typical": moved["typical"]},
        table={"site_id": np.char.mod("CS-%03d", np.arange(1, area.size + 1)), "floor_area_m2": area, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh", "id": "site_id"},
    )


def one_day_moves_one_slope() -> Demonstration:
    """A stock-take day far out in door openings, with ordinary energy: it moves the door slope, little else."""
    rng = generator(59)
    rows = 120
    outdoor, doors = rng.uniform(-5, 30, rows), rng.uniform(100, 500, rows)
    energy = 4_000 + 55 * outdoor + 4 * doors + rng.normal(0, 300, rows)
    doors[-1] = 1_100.0  # a stock-take day: doors open all day ...
    energy[-1] = 4_000 + 55 * outdoor[-1] + 4 * 300 + rng.normal(0, 300)  # ... but the dock was sealed off
    with_it, without = fit_line(energy, outdoor, doors), fit_line(energy[:-1], outdoor[:-1], doors[:-1])
    moved = (with_it.coef[1:] - without.coef[1:]) / with_it.se[1:]
    return Demonstration(
        (
            f"{rows} invented site-days; on one stock-take day the doors opened 1,100 times (the others 100-500), but",
            "the dock was sealed off from the cold rooms, so energy stayed at an ordinary day's level.",
            "",
            "                          outdoor_c slope   door_openings slope",
            f"  with the day            {fmt(with_it.coef[1]):>15}   {fmt(with_it.coef[2]):>19}",
            f"  without it              {fmt(without.coef[1]):>15}   {fmt(without.coef[2]):>19}",
            f"  moved, in std. errors   {moved[0]:>+15.2f}   {moved[1]:>+19.2f}",
            "",
            f"One day of {rows} moves the door slope by {abs(moved[1]):.1f} standard errors, the outdoor slope by {abs(moved[0]):.1f}: DFBETAS",
            "measure the move coefficient by coefficient, so they name which conclusion rests on the row.",
        ),
        {"moved_outdoor": float(moved[0]), "moved_doors": float(moved[1]), "slope_with": float(with_it.coef[2]), "slope_without": float(without.coef[2])},
        table={"outdoor_c": outdoor.round(1), "door_openings": doors.round(), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )

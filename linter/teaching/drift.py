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
        table={"outdoor_c": (july * 1.8 + 32).round(1), "energy_kwh": energy_july.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"outdoor_c": june.round(1), "energy_kwh": energy_june.round(1)}},
    )


def _june_july(rng: np.random.Generator, rows: int) -> tuple[np.ndarray, np.ndarray]:
    return rng.normal(16, 5, rows), rng.normal(17, 5, rows)


def new_compressor_type() -> Demonstration:
    """July's rows of a compressor type June never had, predicted by the June fit as if they were the reference type."""
    rng = generator(21)
    rows = 600
    june, july = _june_july(rng, rows)
    new_type = np.arange(rows) % 10 == 0
    types_june = np.where(np.arange(rows) % 2 == 0, "screw", "scroll")
    types_july = np.where(new_type, "CO2 transcritical", np.where(np.arange(rows) % 2 == 0, "screw", "scroll"))
    energy_june = 2_000 + 55 * june + rng.normal(0, 300, rows)
    energy_july = 2_000 + 55 * july - 1_200 * new_type + rng.normal(0, 300, rows)
    baseline = fit_line(energy_june, june)
    error = energy_july - (baseline.coef[0] + baseline.coef[1] * july)
    rms = (float(np.sqrt(np.mean(error[~new_type] ** 2))), float(np.sqrt(np.mean(error[new_type] ** 2))))
    return Demonstration(
        (
            f"An invented June fit knows the compressor types it saw (residual SD {fmt(baseline.sigma)} kWh). In July a tenth of the site-days",
            "run a new type (CO2 transcritical) that uses 1,200 kWh a day less; the June model has no coefficient for it.",
            "",
            f"  RMS error on July's known types  {fmt(rms[0]):>8} kWh",
            f"  RMS error on the new type        {fmt(rms[1]):>8} kWh",
            "",
            "Every new-type prediction carries the reference type's energy: a bias no residual SD warns about.",
        ),
        {"rms_known": rms[0], "rms_new_type": rms[1], "residual_sd": baseline.sigma},
        table={"outdoor_c": july.round(1), "compressor_type": types_july, "energy_kwh": energy_july.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"outdoor_c": june.round(1), "compressor_type": types_june, "energy_kwh": energy_june.round(1)}},
    )


def hotter_month() -> Demonstration:
    """A June fit of a response that bends at high temperatures, applied to a July far hotter than any June day."""
    rng = generator(22)
    rows = 600
    june, july = rng.normal(12, 3, rows), rng.normal(27, 3, rows)

    def energy(outdoor: np.ndarray) -> np.ndarray:
        return 2_000 + 40 * outdoor + 3 * np.maximum(outdoor - 15, 0) ** 2 + rng.normal(0, 300, outdoor.size)

    energy_june, energy_july = energy(june), energy(july)
    baseline = fit_line(energy_june, june)
    error = energy_july - (baseline.coef[0] + baseline.coef[1] * july)
    rms = float(np.sqrt(np.mean(error**2)))
    return Demonstration(
        (
            f"Invented June days span {fmt(float(june.min()))} to {fmt(float(june.max()))} C; a straight line fits them (residual SD {fmt(baseline.sigma)} kWh).",
            f"July's days span {fmt(float(july.min()))} to {fmt(float(july.max()))} C, where the compressors' response bends upward.",
            "",
            f"  RMS error of the June fit on July  {fmt(rms):>8} kWh  ({fmt(rms / baseline.sigma)} times June's residual SD)",
            "",
            "The June fit was never checked where July lies: a moved distribution turns prediction into extrapolation.",
        ),
        {"rms_july": rms, "residual_sd": baseline.sigma},
        table={"outdoor_c": july.round(1), "energy_kwh": energy_july.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"outdoor_c": june.round(1), "energy_kwh": energy_june.round(1)}},
    )


def changed_defrost_schedule() -> Demonstration:
    """Same columns, same ranges, but each defrost cycle costs twice as much in July: the June coefficients no longer hold."""
    rng = generator(24)
    rows = 600
    defrost_june, defrost_july = rng.integers(0, 9, rows).astype(float), rng.integers(0, 9, rows).astype(float)
    energy_june = 3_000 + 140 * defrost_june + rng.normal(0, 300, rows)
    energy_july = 3_000 + 280 * defrost_july + rng.normal(0, 300, rows)
    june, july = fit_line(energy_june, defrost_june), fit_line(energy_july, defrost_july)
    error = energy_july - (june.coef[0] + june.coef[1] * defrost_july)
    rms = float(np.sqrt(np.mean(error**2)))
    shift = float((july.coef[1] - june.coef[1]) / np.hypot(june.se[1], july.se[1]))
    return Demonstration(
        (
            "In two invented months the defrost cycles range over 0 to 8 and every column looks as before.",
            f"  kWh per defrost cycle  June {fmt(june.coef[1])}, July {fmt(july.coef[1])}  (a shift of {fmt(shift)} standard errors)",
            f"  RMS error of the June fit on July  {fmt(rms)} kWh, against June's residual SD {fmt(june.sigma)} kWh",
            "",
            "A changed relationship shows only when the old coefficients meet the new rows.",
        ),
        {"rms_july": rms, "residual_sd": june.sigma, "shift_in_se": shift},
        table={"defrost_cycles": defrost_july, "energy_kwh": energy_july.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"defrost_cycles": defrost_june, "energy_kwh": energy_june.round(1)}},
    )


def dropped_column() -> Demonstration:
    """July's export lacks pallets_stored: refitting without it moves the floor-area slope, which now carries the stock too."""
    rng = generator(25)
    rows = 600
    area = rng.uniform(2_000, 40_000, rows)
    pallets = area * 0.4 * rng.uniform(0.6, 1.4, rows)
    energy = 600 + 0.22 * area + 0.08 * pallets + rng.normal(0, 400, rows)
    full, short = fit_line(energy, area, pallets), fit_line(energy, area)
    july_area = rng.uniform(2_000, 40_000, rows)
    july_energy = 600 + 0.22 * july_area + 0.08 * july_area * 0.4 * rng.uniform(0.6, 1.4, rows) + rng.normal(0, 400, rows)
    return Demonstration(
        (
            "An invented June model uses floor_area_m2 and pallets_stored; July's extract arrives without pallets_stored.",
            f"  floor_area_m2 slope with pallets_stored     {fmt(full.coef[1])} kWh per m2",
            f"  floor_area_m2 slope refitted without it     {fmt(short.coef[1])} kWh per m2",
            "",
            "The June model cannot be applied, and a refit without the column is a different model whose slopes mean other things.",
        ),
        {"slope_with": float(full.coef[1]), "slope_without": float(short.coef[1])},
        table={"floor_area_m2": july_area.round(), "energy_kwh": july_energy.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"floor_area_m2": area.round(), "pallets_stored": pallets.round(), "energy_kwh": energy.round(1)}},
    )


def larger_sites_join() -> Demonstration:
    """The same range of floor areas, but July's extract is mostly large sites: the June fit is leaned on where it had few rows."""
    rng = generator(26)
    rows = 600
    june = np.exp(rng.uniform(np.log(2_000), np.log(40_000), rows)).round(-1)  # mostly small sites
    july = (40_000 - np.exp(rng.uniform(np.log(1), np.log(38_000), rows))).clip(june.min(), june.max()).round(-1)  # mostly large

    def energy(area: np.ndarray) -> np.ndarray:
        return 40 * area**0.7 + rng.normal(0, 300, area.size)  # large sites use less per m2

    energy_june, energy_july = energy(june), energy(july)
    baseline = fit_line(energy_june, june)
    error = energy_july - (baseline.coef[0] + baseline.coef[1] * july)
    rms = float(np.sqrt(np.mean(error**2)))
    large = (june > 25_000).mean(), (july > 25_000).mean()
    return Demonstration(
        (
            "Invented June and July extracts over the same floor areas, 2,000 to 40,000 m2; in July new large sites",
            f"joined: sites above 25,000 m2 are {large[0]:.0%} of June's rows and {large[1]:.0%} of July's.",
            "",
            f"  June fit's residual SD                    {fmt(baseline.sigma):>8} kWh",
            f"  RMS error of the June fit on July         {fmt(rms):>8} kWh",
            "",
            "No July row lies outside June's range, yet the June line was estimated mostly from small sites and",
            "missed how large ones bend away from it: a moved mix of conditions leans on the part of the fit the",
            "baseline barely supported.",
        ),
        {"rms_july": rms, "residual_sd": baseline.sigma, "large_share_june": float(large[0]), "large_share_july": float(large[1])},
        table={"floor_area_m2": july, "energy_kwh": energy_july.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"floor_area_m2": june, "energy_kwh": energy_june.round(1)}},
    )


def humidity_sensor_fails() -> Demonstration:
    """July's humidity readings are missing on nearly half the days, hot days above all: the rows a complete-case refit keeps."""
    rng = generator(27)
    rows = 600
    outdoor_june, outdoor_july = rng.normal(16, 5, rows), rng.normal(17, 5, rows)
    humidity_june, humidity_july = rng.uniform(40, 95, rows).round(), rng.uniform(40, 95, rows).round()
    energy_june = 2_000 + 55 * outdoor_june + 6 * humidity_june + rng.normal(0, 300, rows)
    energy_july = 2_000 + 55 * outdoor_july + 6 * humidity_july + rng.normal(0, 300, rows)
    missing_june = rng.random(rows) < 0.02
    missing_july = rng.random(rows) < np.clip((outdoor_july - 8) / 20, 0.02, 0.9)  # the sensor overheats
    kept = ~missing_july
    return Demonstration(
        (
            f"Invented June and July extracts of {rows} site-days. June's humidity_pct is missing on {missing_june.mean():.0%} of days,",
            f"July's on {missing_july.mean():.0%}: the dock sensor overheats, more often the hotter the day.",
            "",
            "                                   rows   mean outdoor_c   mean energy_kwh",
            f"  July, every day                  {rows:>4}   {fmt(float(outdoor_july.mean())):>14}   {fmt(float(energy_july.mean())):>15}",
            f"  July, days with humidity         {int(kept.sum()):>4}   {fmt(float(outdoor_july[kept].mean())):>14}   {fmt(float(energy_july[kept].mean())):>15}",
            "",
            "A complete-case fit of July keeps the cooler days only: fewer rows, and a sample that no longer",
            "describes the month. Holes that appear in one month have a cause; find it before refitting.",
        ),
        {"share_june": float(missing_june.mean()), "share_july": float(missing_july.mean()), "mean_outdoor_all": float(outdoor_july.mean()), "mean_outdoor_kept": float(outdoor_july[kept].mean())},
        table={"outdoor_c": outdoor_july.round(1), "humidity_pct": np.where(missing_july, np.nan, humidity_july), "energy_kwh": energy_july.round(1)},
        options={"target": "energy_kwh"},
        companions={"baseline": {"outdoor_c": outdoor_june.round(1), "humidity_pct": np.where(missing_june, np.nan, humidity_june), "energy_kwh": energy_june.round(1)}},
    )

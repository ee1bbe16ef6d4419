"""Missingness: stand-in codes fitted as readings, rows lost to deletion, and holes that do or do not bias a slope."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, fit_line, generator

DROPOUT = -999.0
TRUE_SLOPE = 12.0


def dropout_codes() -> Demonstration:
    """The humidity slope with -999 dropouts fitted as numbers, and after declaring them missing."""
    rng = generator(4)
    humidity = rng.uniform(40, 95, 200).round(1)
    energy = 6_000 + TRUE_SLOPE * humidity + rng.normal(0, 300, humidity.size)
    coded = humidity.copy()
    coded[rng.random(humidity.size) < 0.08] = DROPOUT
    read = coded != DROPOUT
    naive, declared = fit_line(energy, coded), fit_line(energy[read], coded[read])
    return Demonstration(
        (
            f"200 invented site-days; the dock humidity sensor dropped out on {int((~read).sum())} days, exported as -999.",
            f"True effect: +{TRUE_SLOPE:g} kWh per percentage point of humidity.",
            "",
            "                            humidity_pct slope   std. error   rows",
            f"  -999 fitted as a value    {fmt(naive.coef[1]):>18}   {fmt(naive.se[1]):>10}   {humidity.size:>4}",
            f"  -999 declared missing     {fmt(declared.coef[1]):>18}   {fmt(declared.se[1]):>10}   {int(read.sum()):>4}",
            "",
            f"Fitted as numbers, the dropouts pin the line at humidity -999 and the slope shrinks to {naive.coef[1] / TRUE_SLOPE:.0%}",
            "of the true effect; declared missing (--missing-codes humidity_pct=-999), the slope is recovered.",
        ),
        {"slope_coded": float(naive.coef[1]), "slope_declared": float(declared.coef[1]), "true_slope": TRUE_SLOPE},
        table={"humidity_pct": coded, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def _site_days(rng: np.random.Generator, rows: int) -> tuple[np.ndarray, np.ndarray]:
    """Invented outdoor temperatures and the energy they drive (true slope +110 kWh per degree)."""
    outdoor = rng.uniform(-5, 35, rows).round(1)
    return outdoor, 6_000 + 110 * outdoor + rng.normal(0, 900, rows)


def deleted_rows() -> Demonstration:
    """The outdoor slope's standard error from all rows, and after deleting rows with a hole in an unused column."""
    rng = generator(21)
    outdoor, energy = _site_days(rng, 240)
    kept = rng.random(outdoor.size) >= 0.6
    full, complete = fit_line(energy, outdoor), fit_line(energy[kept], outdoor[kept])
    return Demonstration(
        (
            f"{outdoor.size} invented site-days; a door-sensor column has holes on {int((~kept).sum())} of them, at random.",
            "Deleting every incomplete row (the default of most fitting software) drops those days from the fit.",
            "",
            "                              outdoor_c slope   std. error   rows",
            f"  every row                   {fmt(full.coef[1]):>15}   {fmt(full.se[1]):>10}   {outdoor.size:>4}",
            f"  complete rows only          {fmt(complete.coef[1]):>15}   {fmt(complete.se[1]):>10}   {int(kept.sum()):>4}",
            "",
            f"The holes are random, so the slope stays near the truth (+110), but its standard error grows by "
            f"{complete.se[1] / full.se[1] - 1:.0%}:",
            "every deleted row is information lost, even about the columns that had no hole.",
        ),
        {"se_full": float(full.se[1]), "se_complete": float(complete.se[1]), "kept": float(kept.sum())},
        table={"outdoor_c": outdoor, "humidity_pct": np.where(kept, rng.uniform(40, 95, outdoor.size).round(), np.nan), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def holes_by_pattern() -> Demonstration:
    """Mean energy of the rows with and without holes when dropouts happen on hot days: the complete rows are not a random part."""
    rng = generator(22)
    outdoor, energy = _site_days(rng, 300)
    hot_dropout = rng.random(outdoor.size) < np.clip((outdoor - 15) / 25, 0, 1)
    complete = ~hot_dropout
    return Demonstration(
        (
            f"{outdoor.size} invented site-days; the humidity sensor drops out more often the hotter the day "
            f"({int(hot_dropout.sum())} dropouts).",
            "",
            "                       rows   mean outdoor_c   mean energy_kwh",
            f"  complete rows       {int(complete.sum()):>4}   {fmt(outdoor[complete].mean()):>14}   {fmt(energy[complete].mean()):>15}",
            f"  rows with a hole    {int(hot_dropout.sum()):>4}   {fmt(outdoor[hot_dropout].mean()):>14}   {fmt(energy[hot_dropout].mean()):>15}",
            "",
            "The incomplete rows differ systematically from the complete ones: the holes are not missing completely at",
            "random, which Little's test detects from the pattern means. Whether deletion then biases the slopes depends",
            "on what the holes follow: a predictor (here outdoor_c, which stays in the model) leaves the coefficients",
            "unbiased; the response itself does not (see missingness.informative). Either way the complete rows describe",
            "cooler days than the table as a whole.",
        ),
        {"mean_outdoor_complete": float(outdoor[complete].mean()), "mean_outdoor_holes": float(outdoor[hot_dropout].mean())},
        table={"outdoor_c": outdoor, "humidity_pct": np.where(complete, rng.uniform(40, 95, outdoor.size).round(), np.nan), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def holes_that_follow_energy() -> Demonstration:
    """The outdoor slope after deleting rows whose holes follow a predictor, and rows whose holes follow the energy itself."""
    rng = generator(23)
    outdoor, energy = _site_days(rng, 400)
    by_predictor = rng.random(outdoor.size) < np.clip((outdoor + 5) / 40, 0, 1) * 0.6
    by_response = energy > np.quantile(energy, 0.6)
    full = fit_line(energy, outdoor)
    after_predictor = fit_line(energy[~by_predictor], outdoor[~by_predictor])
    after_response = fit_line(energy[~by_response], outdoor[~by_response])
    return Demonstration(
        (
            f"{outdoor.size} invented site-days, true outdoor slope +110 kWh per degree; two ways of losing rows:",
            "",
            "                                        outdoor_c slope   rows kept",
            f"  no holes                              {fmt(full.coef[1]):>15}   {outdoor.size:>9}",
            f"  holes more likely on hot days         {fmt(after_predictor.coef[1]):>15}   {int((~by_predictor).sum()):>9}",
            f"  holes on the high-energy days         {fmt(after_response.coef[1]):>15}   {int((~by_response).sum()):>9}",
            "",
            "Holes that depend only on a predictor in the model leave the slope unbiased after deletion (Little 1992,",
            f"JASA 87). Holes that depend on the response cut off the top of the cloud and flatten the slope to "
            f"{after_response.coef[1] / 110:.0%}",
            "of the truth: that is the case missingness.informative looks for.",
        ),
        {
            "slope_full": float(full.coef[1]),
            "slope_holes_by_predictor": float(after_predictor.coef[1]),
            "slope_holes_by_response": float(after_response.coef[1]),
        },
        table={"outdoor_c": outdoor, "humidity_pct": np.where(by_response, np.nan, rng.uniform(40, 95, outdoor.size).round()), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def one_column_with_holes() -> Demonstration:
    """Rows left for the fit when one of five predictors misses 40% of its values, and the slopes' precision."""
    rng = generator(25)
    outdoor, energy = _site_days(rng, 250)
    others = rng.normal(size=(outdoor.size, 4))
    present = rng.random(outdoor.size) >= 0.4  # a humidity sensor offline 40% of the time
    full, complete = fit_line(energy, outdoor, *others.T), fit_line(energy[present], outdoor[present], *others[present].T)
    return Demonstration(
        (
            f"{outdoor.size} invented site-days, five predictors; humidity_pct is missing on {int((~present).sum())} days, the others never.",
            "",
            "                          rows in the fit   outdoor_c std. error",
            f"  humidity complete       {outdoor.size:>15}   {fmt(full.se[1]):>20}",
            f"  humidity 40% missing    {int(present.sum()):>15}   {fmt(complete.se[1]):>20}",
            "",
            "One column's holes remove whole rows from the fit, and with them the information the other columns carried.",
            "Ask whether the column is worth its holes: drop it, impute it from the others, or recover the readings.",
        ),
        {"rows_full": float(outdoor.size), "rows_complete": float(present.sum()), "se_full": float(full.se[1]), "se_complete": float(complete.se[1])},
        table={
            "outdoor_c": outdoor,
            "humidity_pct": np.where(present, (70 + 12 * others[:, 0]).round(), np.nan),
            "door_openings": (300 + 80 * others[:, 1]).round(),
            "defrost_cycles": (4 + 1.5 * others[:, 2]).round(1),
            "pallets_stored": (12_000 + 2_000 * others[:, 3]).round(),
            "energy_kwh": energy.round(1),
        },
        options={"target": "energy_kwh"},
    )


def sites_that_stop_reporting() -> Demonstration:
    """A monotone pattern: sites whose gateway fails partway through the extract, one feed after another, and the days the fit keeps."""
    rng = generator(26)
    sites, days = 30, 90
    failing = rng.random(sites) < 0.3
    first_stop = np.where(failing, rng.integers(20, 60, sites), days)  # the humidity feed stops first ...
    second_stop = np.where(failing, np.minimum(first_stop + rng.integers(5, 20, sites), days), days)  # ... then the door counter
    day = np.tile(np.arange(days), sites)
    site = np.repeat(np.arange(sites), days)
    outdoor = np.linspace(-2, 30, days)[day] + rng.normal(0, 2, day.size)  # the extract runs from winter into summer
    doors = rng.uniform(100, 500, day.size).round()
    humidity = rng.uniform(40, 95, day.size).round()
    energy = 4_000 + 55 * outdoor + 4 * doors + 6 * humidity + rng.normal(0, 300, day.size)
    no_humidity, no_doors = day >= first_stop[site], day >= second_stop[site]
    complete = ~no_humidity
    return Demonstration(
        (
            f"{sites} invented sites x {days} days from winter into summer; at {int(failing.sum())} sites the gateway fails partway:",
            "first the humidity feed stops, days later the door counter too, and neither comes back.",
            "",
            f"  rows missing humidity_pct only              {int((no_humidity & ~no_doors).sum()):>5,}",
            f"  rows missing humidity_pct and door_openings {int(no_doors.sum()):>5,}",
            f"  mean outdoor_c of all days {outdoor.mean():.1f} C, of the complete days {outdoor[complete].mean():.1f} C",
            "",
            "The sets of missing columns are nested (a monotone pattern), as drop-out produces: holes that, once",
            "they start in a series, grow and continue to the end usually have one cause, here a failing gateway.",
            "The complete days are cooler than the extract, so ask what stopped the feeds before deleting or imputing.",
        ),
        {"mean_all": float(outdoor.mean()), "mean_kept": float(outdoor[complete].mean()), "share_kept": float(complete.mean())},
        table={
            "site_id": np.char.mod("CS-%03d", site + 1),
            "day": np.datetime64("2026-01-05") + day,
            "outdoor_c": outdoor.round(1),
            "door_openings": np.where(no_doors, np.nan, doors),
            "humidity_pct": np.where(no_humidity, np.nan, humidity),
            "energy_kwh": energy.round(1),
        },
        options={"target": "energy_kwh", "id": "site_id", "exclude": ["day"]},
    )

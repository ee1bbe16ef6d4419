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
    )


def sites_that_stop_reporting() -> Demonstration:
    """A monotone pattern: sites that stop sending data partway through the extract, and the days the fit keeps."""
    rng = generator(26)
    sites, days = 30, 90
    stops = np.where(rng.random(sites) < 0.3, rng.integers(20, 70, sites), days)
    reported = np.arange(days)[None, :] < stops[:, None]
    hot_late = np.linspace(-2, 30, days)  # the extract runs from winter into summer
    kept_mean = float(np.mean(np.broadcast_to(hot_late, reported.shape)[reported]))
    return Demonstration(
        (
            f"{sites} invented sites x {days} days from winter into summer; {int((stops < days).sum())} sites stop reporting partway.",
            "",
            f"  site-days in the extract: {sites * days:,}; with data: {int(reported.sum()):,}",
            f"  mean outdoor temperature of all days {np.mean(hot_late):.1f} C, of the days with data {kept_mean:.1f} C",
            "",
            "Holes that, once they start in a row's series, continue to the end (a monotone pattern) usually have one",
            "cause, here a failed data link; the days with data are then cooler than the extract, so ask what stopped",
            "the reports before deleting or imputing.",
        ),
        {"mean_all": float(np.mean(hot_late)), "mean_kept": kept_mean, "share_kept": float(reported.mean())},
    )

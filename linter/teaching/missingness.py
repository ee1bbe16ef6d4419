"""Missingness: humidity sensor dropouts coded -999 and fitted as if they were readings."""

from __future__ import annotations

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

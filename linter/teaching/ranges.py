"""Ranges: a setpoint that barely moves cannot show its effect."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, fit_line, generator

TRUE_SLOPE = -180.0


def narrow_setpoint() -> Demonstration:
    """Confidence interval of the setpoint slope when setpoints span 1 C, and when they span chilled to frozen."""
    rng = generator(6)
    rows = 90
    narrow, wide = rng.uniform(1.5, 2.5, rows).round(1), rng.uniform(-25, 5, rows).round(1)
    noise = rng.normal(0, 700, rows)
    tight, spread = fit_line(8_000 + TRUE_SLOPE * narrow + noise, narrow), fit_line(8_000 + TRUE_SLOPE * wide + noise, wide)
    widths = (2 * 1.96 * tight.se[1], 2 * 1.96 * spread.se[1])
    return Demonstration(
        (
            f"{rows} invented site-days, the same noise, true effect {TRUE_SLOPE:g} kWh per degree of setpoint.",
            "",
            "                                   setpoint_c slope   95% interval",
            f"  setpoints 1.5 to 2.5 C (chilled)  {fmt(tight.coef[1]):>16}   {fmt(tight.coef[1] - widths[0] / 2)} to {fmt(tight.coef[1] + widths[0] / 2)}",
            f"  setpoints -25 to 5 C (mixed)      {fmt(spread.coef[1]):>16}   {fmt(spread.coef[1] - widths[1] / 2)} to {fmt(spread.coef[1] + widths[1] / 2)}",
            "",
            f"The narrow range gives an interval {widths[0] / widths[1]:.0f} times wider. Both estimates are unbiased, but one degree",
            "of setpoint variation holds almost no information about the slope: the narrow estimate can land anywhere in its",
            "wide interval, and the data cannot say how energy responds to setpoints outside 1.5 to 2.5 C. (The table",
            "checked below is the chilled one, with --range setpoint_c=-25:5, the range the model is meant for.)",
        ),
        {"width_ratio": float(widths[0] / widths[1]), "narrow_width": float(widths[0]), "wide_width": float(widths[1])},
        table={"setpoint_c": narrow, "energy_kwh": (8_000 + TRUE_SLOPE * narrow + noise).round(1)},
        options={"target": "energy_kwh", "ranges": {"setpoint_c": [-25, 5]}},
    )


def heat_wave_beyond_the_data() -> Demonstration:
    """Prediction error of a straight line inside the observed temperatures, and on heat-wave days beyond them."""
    rng = generator(43)
    outdoor = rng.uniform(-5, 28, 300)

    def truth(t: np.ndarray) -> np.ndarray:
        return 6_000 + 90 * t + 6 * np.maximum(t - 20, 0) ** 2  # compressors struggle on hot days

    energy = truth(outdoor) + rng.normal(0, 400, outdoor.size)
    line = fit_line(energy, outdoor)
    inside, beyond = np.array([10.0, 20.0, 27.0]), np.array([33.0, 36.0, 39.0])
    error = {name: float(np.mean(np.abs(line.coef[0] + line.coef[1] * t - truth(t)))) for name, t in (("inside", inside), ("beyond", beyond))}
    return Demonstration(
        (
            "300 invented site-days between -5 and 28 C; the line is fitted there, then asked about a heat wave.",
            "",
            "                                  mean prediction error",
            f"  days at 10, 20 and 27 C          {fmt(error['inside']):>10} kWh",
            f"  heat-wave days at 33, 36, 39 C   {fmt(error['beyond']):>10} kWh",
            "",
            "Inside the data the line is checked by the data; beyond it nothing checks it, and a bend that was barely",
            "visible below 28 C dominates above it. Score only rows inside the observed range, or collect hot days.",
        ),
        {"error_inside": error["inside"], "error_beyond": error["beyond"]},
        table={"outdoor_c": outdoor.round(1), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
        companions={"score": {"outdoor_c": np.concatenate([inside, beyond])}},
    )


def mostly_one_value() -> Demonstration:
    """Standard error of a defrost effect when 97% of days share one value, against an even split."""
    rng = generator(44)
    rows = 200
    rare, even = (rng.random(rows) < 0.03).astype(float), (np.arange(rows) % 2).astype(float)
    noise = rng.normal(0, 800, rows)
    lopsided, balanced = fit_line(7_000 + 600 * rare + noise, rare), fit_line(7_000 + 600 * even + noise, even)
    return Demonstration(
        (
            f"{rows} invented site-days; extra_defrost is 1 on {int(rare.sum())} days (true effect +600 kWh).",
            "",
            "                                 extra_defrost effect   std. error",
            f"  1 on {int(rare.sum())} of {rows} days              {fmt(lopsided.coef[1]):>20}   {fmt(lopsided.se[1]):>10}",
            f"  1 on half the days             {fmt(balanced.coef[1]):>20}   {fmt(balanced.se[1]):>10}",
            "",
            "With nearly every row at one value the effect rests on a handful of days: its standard error is",
            f"{lopsided.se[1] / balanced.se[1]:.1f} times that of a balanced column, and one odd day can flip it.",
        ),
        {"se_lopsided": float(lopsided.se[1]), "se_balanced": float(balanced.se[1])},
        table={"outdoor_c": rng.uniform(-5, 30, rows).round(1), "extra_defrost": rare.astype(np.int64), "energy_kwh": (7_000 + 600 * rare + noise).round(1)},
        options={"target": "energy_kwh"},
    )

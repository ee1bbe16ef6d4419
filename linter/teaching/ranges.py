"""Ranges: a setpoint that barely moves cannot show its effect."""

from __future__ import annotations

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
            "wide interval, and the data cannot say how energy responds to setpoints outside 1.5 to 2.5 C.",
        ),
        {"width_ratio": float(widths[0] / widths[1]), "narrow_width": float(widths[0]), "wide_width": float(widths[1])},
    )

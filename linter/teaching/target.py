"""Target: a right-skewed, multiplicative energy response fitted on its own scale and on a log scale."""

from __future__ import annotations

import numpy as np

from .base import Demonstration, Line, fit_line, floor_areas, generator


def _spread_ratio(line: Line, area: np.ndarray) -> float:
    """Residual SD of the largest quarter of sites over that of the smallest quarter."""
    low, high = np.quantile(area, [0.25, 0.75])
    return float(np.std(line.residual[area >= high]) / np.std(line.residual[area <= low]))


def skewed_energy() -> Demonstration:
    """Residual spread of small and large sites, raw energy against log energy."""
    rng = generator(8)
    area = floor_areas(rng, 300)
    energy = 0.9 * area**0.95 * np.exp(rng.normal(0, 0.35, area.size))
    raw, logged = fit_line(energy, area), fit_line(np.log(energy), np.log(area))
    skewness = float(np.mean((energy - energy.mean()) ** 3) / np.std(energy) ** 3)
    ratios = (_spread_ratio(raw, area), _spread_ratio(logged, area))
    return Demonstration(
        (
            f"300 invented sites; energy grows by proportions with floor area (skewness {skewness:.1f},",
            f"largest day {energy.max() / energy.min():.0f} times the smallest).",
            "",
            "                          residual SD, largest quarter / smallest quarter of sites",
            f"  energy_kwh on area      {ratios[0]:>8.1f}",
            f"  log energy on log area  {ratios[1]:>8.1f}",
            "",
            f"On the raw scale the big sites' residuals are {ratios[0]:.0f} times wider, so they dominate the fit and the",
            "usual standard errors are wrong; on the log scale the spread is even and slopes read as percentages.",
        ),
        {"spread_ratio_raw": ratios[0], "spread_ratio_log": ratios[1], "skewness": skewness},
    )

"""Grouping: days of one site share an unmeasured site effect, and the usual standard errors count days as sites."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from ..stats.grouping import GroupFactors, GroupRows, one_way_icc
from .base import Demonstration, fit_line, floor_areas, generator

SITES, DAYS, DRAWS = 40, 60, 200
NOISE_KWH, SITE_EFFECT_KWH = 400.0, 300.0


def shared_site_effect() -> Demonstration:
    """The usual standard error of a site-level slope against the slope's real spread over repeated extracts."""
    rng = generator(18)
    area = np.repeat(floor_areas(rng, SITES), DAYS)
    outdoor = rng.normal(12, 5, area.size)
    site = np.repeat(np.arange(SITES), DAYS)
    rows = GroupRows.of(np.char.mod("CS-%03d", site))
    slopes, usual, iccs = [], [], []
    for _ in range(DRAWS):
        effect = rng.normal(0, SITE_EFFECT_KWH, SITES)[site]
        energy = 600 + 0.22 * area + 55 * outdoor + effect + rng.normal(0, NOISE_KWH, area.size)
        line = fit_line(energy, area, outdoor)
        slopes.append(line.coef[1])
        usual.append(line.se[1])
        factors = GroupFactors.of(np.ones((area.size, 1)), line.residual, rows)
        means, within = factors.residual_sums(np.zeros(1))
        iccs.append(one_way_icc(factors.counts, means, within).icc)
    actual, reported = float(np.std(slopes, ddof=1)), float(np.mean(usual))
    icc = float(np.mean(iccs))
    design_effect = 1 + (DAYS - 1) * icc
    ratio = actual / reported
    return Demonstration(
        (
            f"{SITES} invented sites x {DAYS} days; each site runs an invented {SITE_EFFECT_KWH:g} kWh (SD) above or below",
            "the model on all its days (door seals, insulation), on top of day-to-day noise.",
            f"The same extract drawn {DRAWS} times, floor_area_m2 slope fitted by ordinary least squares:",
            "",
            f"  usual standard error (mean over draws)        {fmt(reported):>10}",
            f"  real spread of the slope over the draws       {fmt(actual):>10}",
            "",
            f"Residual intraclass correlation {fmt(icc, 2)}: design effect 1 + ({DAYS} - 1) x {fmt(icc, 2)} = {fmt(design_effect)},",
            f"so {SITES * DAYS:,} site-days carry the information of about {fmt(SITES * DAYS / design_effect)} independent rows.",
            f"The usual standard error is {fmt(ratio)} times too small: intervals and p-values treat every day as a",
            "new site. Cluster-robust standard errors by site, or a mixed model, count the sites.",
        ),
        {"se_ratio": ratio, "icc": icc, "design_effect": design_effect},
    )

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
    slopes, usual, iccs, first = [], [], [], None
    for _ in range(DRAWS):
        effect = rng.normal(0, SITE_EFFECT_KWH, SITES)[site]
        energy = 600 + 0.22 * area + 55 * outdoor + effect + rng.normal(0, NOISE_KWH, area.size)
        first = energy if first is None else first
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
        table={"site_id": np.char.mod("CS-%03d", site), "floor_area_m2": area, "outdoor_c": outdoor.round(1), "energy_kwh": np.asarray(first).round(1)},
        options={"target": "energy_kwh", "group": "site_id"},
    )


def noise_site_facts() -> Demonstration:
    """Twelve site facts unrelated to energy, on 40 sites: with a shared site effect the usual t tests find some anyway."""
    rng = generator(19)
    sites, days, facts = 40, 60, 12
    site = np.repeat(np.arange(sites), days)
    noise = rng.normal(size=(sites, facts))[site]
    outdoor = rng.normal(12, 5, site.size)
    significant, first = [], None
    for _ in range(50):
        energy = 600 + 55 * outdoor + rng.normal(0, SITE_EFFECT_KWH, sites)[site] + rng.normal(0, NOISE_KWH, site.size)
        first = energy if first is None else first
        line = fit_line(energy, outdoor, *noise.T)
        significant.append(int(np.sum(np.abs(line.coef[2:] / line.se[2:]) > 1.96)))
    mean = float(np.mean(significant))
    return Demonstration(
        (
            f"{sites} invented sites x {days} days, and {facts} site facts that have nothing to do with energy.",
            "Each site runs above or below the model on all its days (an unmeasured site effect).",
            "",
            f"  site facts 'significant' at 5% (mean of 50 draws)   {mean:.1f} of {facts}",
            f"  expected by chance with honest standard errors       {0.05 * facts:.1f} of {facts}",
            "",
            f"The site facts are measured on {sites} sites, not {sites * days:,} rows: {sites} groups for {facts} site-level",
            "parameters is too few, and the usual tests count every day as a new site.",
        ),
        {"noise_significant": mean, "expected": 0.05 * facts},
        table={
            "site_id": np.char.mod("CS-%03d", site),
            "outdoor_c": outdoor.round(1),
            **{f"site_fact_{k + 1}": noise[:, k].round(3) for k in range(facts)},
            "energy_kwh": np.asarray(first).round(1),
        },
        options={"target": "energy_kwh", "group": "site_id"},
    )


def few_sites() -> Demonstration:
    """Cluster-robust standard errors from 8 sites understate the real spread of a site-level slope."""
    from ..stats.factor import DesignFactor
    from ..stats.fit import PreliminaryFit
    from ..stats.grouping import cr1_covariance

    rng = generator(20)
    sites, days = 8, 60
    site = np.repeat(np.arange(sites), days)
    area = np.repeat(floor_areas(rng, sites), days)
    X = np.column_stack([np.ones(site.size), area])
    rows = GroupRows.of(np.char.mod("CS-%03d", site))
    slopes, robust, first = [], [], None
    for _ in range(DRAWS):
        energy = 600 + 0.22 * area + rng.normal(0, SITE_EFFECT_KWH, sites)[site] + rng.normal(0, NOISE_KWH, site.size)
        first = energy if first is None else first
        fit = PreliminaryFit(DesignFactor.of(X, energy), float("nan"), True)
        factors = GroupFactors.of(X, energy, rows)
        slopes.append(fit.coef[1])
        robust.append(float(np.sqrt(cr1_covariance(fit, factors.scores(fit.coef))[1, 1])))
    actual, reported = float(np.std(slopes, ddof=1)), float(np.mean(robust))
    return Demonstration(
        (
            f"{sites} invented sites x {days} days with a shared site effect; floor_area_m2 slope over {DRAWS} draws:",
            "",
            f"  cluster-robust (CR1) standard error, mean     {fmt(reported):>10}",
            f"  real spread of the slope over the draws       {fmt(actual):>10}",
            "",
            f"With {sites} groups the cluster-robust standard error is itself estimated from {sites} numbers and runs",
            f"{fmt(actual / reported)} times too small: a wild cluster bootstrap or a mixed model does better.",
        ),
        {"understated": actual / reported},
        table={"site_id": np.char.mod("CS-%03d", site), "floor_area_m2": area, "energy_kwh": np.asarray(first).round(1)},
        options={"target": "energy_kwh", "group": "site_id"},
    )


def warm_sites_cold_days() -> Demonstration:
    """Warm-climate sites are better insulated, yet each site's warmer days cost more: two slopes, one pooled."""
    rng = generator(21)
    sites, days = 40, 60
    site = np.repeat(np.arange(sites), days)
    climate = rng.uniform(5, 25, sites)
    outdoor = climate[site] + rng.normal(0, 3, site.size)
    energy = 9_000 - 120 * climate[site] + 80 * (outdoor - climate[site]) + rng.normal(0, NOISE_KWH, site.size)
    pooled = fit_line(energy, outdoor).coef[1]
    means = np.bincount(site, weights=outdoor) / days
    energy_means = np.bincount(site, weights=energy) / days
    within = fit_line(energy - energy_means[site], outdoor - means[site]).coef[1]
    between = fit_line(energy_means, means).coef[1]
    return Demonstration(
        (
            f"{sites} invented sites x {days} days: warm-climate sites are better insulated (an invented -120 kWh per",
            "degree between sites), while a site's warmer days cost more (an invented +80 kWh per degree).",
            "",
            f"  within each site (centred on site means)   {fmt(float(within)):>8}",
            f"  between sites (site means)                 {fmt(float(between)):>8}",
            f"  pooled slope of outdoor_c                  {fmt(float(pooled)):>8}",
            "",
            "The pooled slope mixes the two and describes neither; centring on site means (or site fixed",
            "effects) separates them.",
        ),
        {"within": float(within), "between": float(between), "pooled": float(pooled)},
        table={"site_id": np.char.mod("CS-%03d", site), "outdoor_c": outdoor.round(1), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh", "group": "site_id"},
    )


def one_large_site() -> Demonstration:
    """One large site's floor area is 90 unusual rows when counted row by row, one unusual site when counted per site."""
    rng = generator(22)
    sites, days = 40, 90
    area = floor_areas(rng, sites)
    area[-1] = 3 * area.max()
    rows_area = np.repeat(area, days)
    median, mad = float(np.median(rows_area)), float(np.median(np.abs(rows_area - np.median(rows_area))))
    row_flags = int(np.sum(np.abs(0.6745 * (rows_area - median) / mad) > 3.5))
    site = np.repeat(np.arange(sites), days)
    outdoor = rng.normal(12, 5, site.size)
    energy = 900 + 0.3 * rows_area + 55 * outdoor + rng.normal(0, SITE_EFFECT_KWH, sites)[site] + rng.normal(0, NOISE_KWH, site.size)
    site_median, site_mad = float(np.median(area)), float(np.median(np.abs(area - np.median(area))))
    site_flags = int(np.sum(np.abs(0.6745 * (area - site_median) / site_mad) > 3.5))
    return Demonstration(
        (
            f"{sites} invented sites x {days} days; one site three times the size of the largest other one.",
            "",
            f"  floor areas beyond |modified z| 3.5, counted per row    {row_flags:>4}",
            f"  floor areas beyond |modified z| 3.5, counted per site   {site_flags:>4}",
            "",
            "A site fact repeated on every day is one observation: counted row by row it looks like many",
            "independent extremes; counted per site it is the one unusual site it is.",
        ),
        {"row_flags": row_flags, "site_flags": site_flags},
        table={"site_id": np.char.mod("CS-%03d", site), "floor_area_m2": rows_area, "outdoor_c": outdoor.round(1), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh", "group": "site_id"},
    )


def one_site_decides() -> Demonstration:
    """Deleting any one day of a large site changes nothing; deleting the site changes the slope."""
    rng = generator(23)
    sites, days = 20, 60
    area = floor_areas(rng, sites)
    area[-1] = 150_000.0
    site = np.repeat(np.arange(sites), days)
    energy = 900 + 0.3 * area[site] + rng.normal(0, NOISE_KWH, site.size)
    last = site == sites - 1
    energy[last] -= 0.15 * area[-1]
    everything = fit_line(energy, area[site]).coef[1]
    one_day = fit_line(np.delete(energy, np.flatnonzero(last)[0]), np.delete(area[site], np.flatnonzero(last)[0])).coef[1]
    whole_site = fit_line(energy[~last], area[site][~last]).coef[1]
    return Demonstration(
        (
            f"{sites} invented sites x {days} days; one site of 150,000 m2 uses half the energy per m2 of the others.",
            "",
            "                                    floor_area_m2 slope",
            f"  all rows                             {fmt(float(everything)):>10}",
            f"  one day of the large site left out   {fmt(float(one_day)):>10}",
            f"  the whole large site left out        {fmt(float(whole_site)):>10}",
            "",
            "Each of its days hides behind the other days of the site; deleting the site as a whole shows that",
            "it alone decides the slope.",
        ),
        {"all": float(everything), "one_day": float(one_day), "whole_site": float(whole_site)},
        table={"site_id": np.char.mod("CS-%03d", site), "floor_area_m2": area[site], "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh", "group": "site_id"},
    )

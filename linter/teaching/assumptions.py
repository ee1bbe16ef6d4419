"""Assumptions: what changing spread, a missed bend, skewed errors and autocorrelated days do to a fit."""

from __future__ import annotations

import numpy as np
import scipy.linalg
from scipy import stats

from ..rule import fmt
from .base import Demonstration, fit_line, floor_areas, generator

SIMULATIONS = 400
Z95 = 1.96


def _slope_coverage(area: np.ndarray, energies: np.ndarray, true_slope: float) -> tuple[float, float]:
    """Shares of simulated extracts (rows of ``energies``) whose usual and HC3 95% slope intervals hold the true slope."""
    X = np.column_stack([np.ones(area.size), area])
    q, r = scipy.linalg.qr(X, mode="economic")
    r_inverse = scipy.linalg.solve_triangular(r, np.eye(2))
    coef = (r_inverse @ (q.T @ energies.T)).T
    residual = energies - coef @ X.T
    sigma2 = np.sum(residual**2, axis=1) / (area.size - 2)
    usual_se = np.sqrt(sigma2 * np.sum(r_inverse[1] ** 2))
    hat = np.sum(q**2, axis=1)
    slope_row = q @ r_inverse[1]
    hc3_se = np.sqrt(np.sum((slope_row * residual / (1 - hat)) ** 2, axis=1))
    miss = np.abs(coef[:, 1] - true_slope)
    return float(np.mean(miss <= Z95 * usual_se)), float(np.mean(miss <= Z95 * hc3_se))


def uneven_spread() -> Demonstration:
    """Coverage of nominal 95% intervals for the area slope when spread grows with site size: usual against HC3."""
    rng = generator(10)
    area = floor_areas(rng, 80)
    noise = rng.normal(0, 1, (SIMULATIONS, area.size))
    energies = 900 + 0.3 * area + noise * 2_500 * (area / 40_000) ** 3
    shares = _slope_coverage(area, energies, 0.3)
    sites = np.char.mod("CS-%03d", np.arange(1, area.size + 1))
    return Demonstration(
        (
            f"{SIMULATIONS} invented extracts of 80 sites; the daily spread grows with floor area (small sites vary",
            "by a few kWh, the largest by about 2,500). True effect: +0.30 kWh per m2.",
            "",
            "                               nominal 95% interval for the area slope holds in",
            f"  usual standard errors        {shares[0]:>6.0%} of extracts",
            f"  HC3 standard errors          {shares[1]:>6.0%} of extracts",
            "",
            "The usual standard error averages the spread over all sites; the slope is decided by the big, noisy",
            "sites, so the usual interval is too narrow. HC3 uses each row's own residual and keeps its promise.",
        ),
        {"coverage_usual": shares[0], "coverage_hc3": shares[1]},
        table={"site_id": sites, "floor_area_m2": area, "energy_kwh": energies[0].round(1)},
        options={"target": "energy_kwh", "id": "site_id"},
    )


def heat_bend() -> Demonstration:
    """Average error on the hottest days of a straight line, and of a line with a square term, when energy bends above 24 C."""
    rng = generator(11)
    outdoor = rng.uniform(-5, 36, 400).round(1)
    energy = 8_000 + 55 * outdoor + 260 * np.clip(outdoor - 24, 0, None) + rng.normal(0, 300, outdoor.size)
    hot = outdoor >= 32
    straight = fit_line(energy, outdoor)
    curved = fit_line(energy, outdoor, (outdoor - outdoor.mean()) ** 2)
    misses = (float(straight.residual[hot].mean()), float(curved.residual[hot].mean()))
    return Demonstration(
        (
            "400 invented site-days; above 24 C every further degree costs 315 kWh instead of 55 (compressors struggle).",
            "",
            f"                              average error on the {int(hot.sum())} days at 32 C or hotter",
            f"  straight line in outdoor_c   {fmt(misses[0]):>8} kWh",
            f"  with a square of outdoor_c   {fmt(misses[1]):>8} kWh",
            "",
            f"The straight line under-predicts the hottest days by {fmt(misses[0])} kWh on average: exactly the heat-wave",
            "days an energy budget must get right. The square term takes most of the bend out.",
        ),
        {"hot_error_straight": misses[0], "hot_error_curved": misses[1]},
        table={"outdoor_c": outdoor, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def skewed_errors() -> Demonstration:
    """How often 95% prediction intervals miss above and below when errors are right-skewed (15 site-days)."""
    rng = generator(12)
    outdoor = rng.uniform(0, 30, 15)
    above = below = 0
    quantile = stats.t.ppf(0.975, outdoor.size - 2)
    for _ in range(SIMULATIONS):
        errors = rng.lognormal(0, 1, outdoor.size + 1) - np.exp(0.5)
        energy = 8_000 + 55 * outdoor + 400 * errors[:-1]
        line = fit_line(energy, outdoor)
        new = 8_000 + 55 * 15 + 400 * errors[-1]
        centre = line.coef[0] + line.coef[1] * 15
        half = quantile * line.sigma * np.sqrt(1 + 1 / outdoor.size + (15 - outdoor.mean()) ** 2 / np.sum((outdoor - outdoor.mean()) ** 2))
        above += new > centre + half
        below += new < centre - half
    shares = (float(above / SIMULATIONS), float(below / SIMULATIONS))
    table_outdoor = rng.uniform(0, 30, 60)  # one longer extract of the same process, for prefit to check
    table_energy = 8_000 + 55 * table_outdoor + 400 * (rng.lognormal(0, 1, table_outdoor.size) - np.exp(0.5))
    return Demonstration(
        (
            f"{SIMULATIONS} invented extracts of 15 site-days whose errors are right-skewed (rare very bad days).",
            "A 95% prediction interval should miss 2.5% of new days above and 2.5% below.",
            "",
            f"  new day above the interval   {shares[0]:>6.1%}",
            f"  new day below the interval   {shares[1]:>6.1%}",
            "",
            "With few rows and skewed errors the interval is in the wrong place: the expensive surprises land",
            "above it far more often than promised, and cheap days never fall below it. (The table checked below",
            "is one extract of 60 such days: 15 are often too few for any test to tell skew from chance.)",
        ),
        {"miss_above": shares[0], "miss_below": shares[1]},
        table={"outdoor_c": table_outdoor.round(1), "energy_kwh": table_energy.round(1)},
        options={"target": "energy_kwh"},
    )


def autocorrelated_days() -> Demonstration:
    """Spread of the temperature slope across extracts against the usual standard error when daily errors persist."""
    rng = generator(13)
    days = 120
    outdoor = 14 + 10 * np.sin(np.linspace(0, np.pi, days))
    slopes, errors, series = [], [], []
    for _ in range(SIMULATIONS):
        shock = rng.normal(0, 300, days)
        noise = np.empty(days)
        noise[0] = shock[0]
        for day in range(1, days):
            noise[day] = 0.8 * noise[day - 1] + shock[day]
        series.append(8_000 + 55 * outdoor + noise)
        line = fit_line(series[-1], outdoor)
        slopes.append(line.coef[1])
        errors.append(line.se[1])
    actual, claimed = float(np.std(slopes)), float(np.mean(errors))
    return Demonstration(
        (
            f"{SIMULATIONS} invented 120-day series of one site; a warm spell's extra load carries over to the next",
            "day (lag-1 autocorrelation 0.8), and outdoor temperature follows the season.",
            "",
            f"  usual standard error of the outdoor_c slope      {fmt(claimed):>8}",
            f"  actual spread of the slope across the series     {fmt(actual):>8}",
            "",
            f"The usual standard error is {actual / claimed:.1f} times too small: 120 correlated days carry the information",
            "of far fewer independent ones, and the slope looks much surer than it is.",
        ),
        {"se_understatement": actual / claimed},
        table={"day": np.datetime64("2026-03-01") + np.arange(days), "outdoor_c": outdoor.round(1), "energy_kwh": series[0].round(1)},
        options={"target": "energy_kwh", "order": "day"},
    )

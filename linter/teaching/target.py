"""Target: a right-skewed energy response on its own and on a log scale; a meter that saturates, fitted three ways."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
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
        table={"floor_area_m2": area, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def tobit_coefficients(y: np.ndarray, limit: float, *columns: np.ndarray) -> np.ndarray:
    """Tobin's censored-regression model by maximum likelihood, ``y`` censored from above at ``limit``.

    Returns the intercept, one slope per column and the error SD. A response
    censored from below at L is the negated response censored from above at
    -L, with negated coefficients.

    References
    ----------
    Tobin, J. (1958). Estimation of relationships for limited dependent variables. Econometrica 26(1), 24-36.
    """
    from scipy import optimize, stats

    X = np.column_stack([np.ones(y.size), *columns])
    censored = y >= limit
    start = fit_line(y, *columns)

    def negative_log_likelihood(theta: np.ndarray) -> float:
        coef, log_sigma = theta[:-1], theta[-1]
        z = (y - X @ coef) / np.exp(log_sigma)
        inside = stats.norm.logpdf(z[~censored]) - log_sigma
        beyond = stats.norm.logsf(z[censored])
        return -float(inside.sum() + beyond.sum())

    theta = np.append(start.coef, np.log(start.sigma))
    result = optimize.minimize(negative_log_likelihood, theta, method="BFGS", options={"gtol": 1e-8, "maxiter": 10_000})
    return np.append(result.x[:-1], np.exp(result.x[-1]))


def saturated_meter() -> Demonstration:
    """Slope of energy on outdoor temperature when the meter stops at its largest reading: full, censored, Tobit."""
    rng = generator(9)
    outdoor = rng.uniform(-5, 35, 400).round(1)
    energy = 9_000 + 150 * outdoor + rng.normal(0, 900, outdoor.size)
    limit = float(np.quantile(energy, 0.8).round(-2))
    logged = np.minimum(energy, limit)
    kept = logged < limit
    slopes = (
        fit_line(energy, outdoor).coef[1],
        fit_line(logged, outdoor).coef[1],
        fit_line(logged[kept], outdoor[kept]).coef[1],
        float(tobit_coefficients(logged, limit, outdoor)[1]),
    )
    share = float(np.mean(~kept))
    return Demonstration(
        (
            f"400 invented site-days; every degree warmer costs 150 kWh, but the meter logs at most {limit:,.0f} kWh a day,",
            f"so {share:.0%} of the days read exactly {limit:,.0f}.",
            "",
            "                                          slope, kWh per degree",
            f"  true readings (unknown in practice)      {slopes[0]:>6.0f}",
            f"  logged readings, least squares           {slopes[1]:>6.0f}",
            f"  limit days dropped, least squares        {slopes[2]:>6.0f}",
            f"  logged readings, censored regression     {slopes[3]:>6.0f}",
            "",
            f"Least squares takes {limit:,.0f} for the truth on the hottest days and flattens the slope by",
            f"{1 - slopes[1] / slopes[0]:.0%}; dropping those days flattens it too. Tobin's censored-regression model reads",
            "them as 'at least the limit' and recovers the slope.",
        ),
        {"slope_true": slopes[0], "slope_censored": slopes[1], "slope_dropped": slopes[2], "slope_tobit": slopes[3], "censored_share": share},
        table={"outdoor_c": outdoor, "energy_kwh": logged.round(1)},
        options={"target": "energy_kwh"},
    )


def flat_meter() -> Demonstration:
    """A target that holds one value: R-squared has nothing to explain."""
    rng = generator(46)
    rows = 60
    outdoor = rng.uniform(-5, 35, rows)
    energy = np.full(rows, 12_000.0)  # a meter stuck at its last reading
    with np.errstate(divide="ignore", invalid="ignore"):
        line = fit_line(energy, outdoor)
    total = float(np.sum((energy - energy.mean()) ** 2))
    return Demonstration(
        (
            f"{rows} invented site-days; the energy meter was stuck and reports 12,000 kWh every day.",
            "",
            f"  outdoor_c slope {abs(line.coef[1]):.3g}, total sum of squares {total:g}: R-squared is 0/0, undefined",
            "",
            "A constant target carries no information about any predictor: every slope is zero by construction and",
            "every test statistic is undefined. Check the meter or the export before modelling.",
        ),
        {"slope": float(line.coef[1]), "total_sum_of_squares": total},
        table={"outdoor_c": outdoor.round(1), "energy_kwh": energy},
        options={"target": "energy_kwh"},
    )


def unread_days() -> Demonstration:
    """Rows lost when the target is missing on the hottest days, and the slope fitted on the rest."""
    rng = generator(47)
    rows = 240
    outdoor = rng.uniform(-5, 35, rows)
    energy = 6_000 + 90 * outdoor + 5 * np.maximum(outdoor - 22, 0) ** 2 + rng.normal(0, 400, rows)
    read = outdoor < 28  # the meter gateway overheats on the hottest days
    full, kept = fit_line(energy, outdoor), fit_line(energy[read], outdoor[read])
    return Demonstration(
        (
            f"{rows} invented site-days; the energy reading is missing on the {int((~read).sum())} days above 28 C.",
            "",
            "                      outdoor_c slope   rows",
            f"  every day read      {fmt(full.coef[1]):>15}   {rows:>4}",
            f"  hot days unread     {fmt(kept.coef[1]):>15}   {int(read.sum()):>4}",
            "",
            "Rows without a target cannot enter the fit. When the missing readings are the unusual ones, the fit describes",
            "only the days that were read; never impute the response just to keep the rows.",
        ),
        {"slope_all": float(full.coef[1]), "slope_read": float(kept.coef[1])},
        table={"outdoor_c": outdoor.round(1), "energy_kwh": np.where(read, energy.round(1), np.nan)},
        options={"target": "energy_kwh"},
    )


def yes_no_target() -> Demonstration:
    """A 0/1 target (an alarm day) fitted by least squares: predictions outside 0 to 1."""
    rng = generator(48)
    rows = 300
    outdoor = rng.uniform(-5, 38, rows)
    alarm = (rng.random(rows) < 1 / (1 + np.exp(-(outdoor - 30) / 2))).astype(float)
    line = fit_line(alarm, outdoor)
    predicted = line.coef[0] + line.coef[1] * np.array([-5.0, 38.0])
    return Demonstration(
        (
            f"{rows} invented site-days; the target alarm is yes on a day with a temperature alarm ({int(alarm.sum())} alarms), else no.",
            "",
            f"  least-squares 'probability' of an alarm (yes = 1) at -5 C: {predicted[0]:.2f}; at 38 C: {predicted[1]:.2f}",
            "",
            "Coded 0/1 to force a least-squares fit, the straight line predicts impossible probabilities and has errors",
            "whose spread depends on the fitted value. Model a yes/no target with logistic regression instead.",
        ),
        {"predicted_cold": float(predicted[0]), "predicted_hot": float(predicted[1])},
        table={"outdoor_c": outdoor.round(1), "alarm": np.where(alarm == 1, "yes", "no")},
        options={"target": "alarm"},
    )

"""Sample size: too few rows per parameter, a residual SD that is not pinned down, and power too low to see an effect."""

from __future__ import annotations

import numpy as np

from .base import Demonstration, Line, fit_line, generator

PREDICTORS = 9
SMALL_EXTRACT_COLUMNS = (
    "outdoor_z", "doors_z", "humidity_z", "pallets_z", "staff_z", "trucks_z", "defrost_z", "lighting_z", "setpoint_z"
)
"""Nine standardised site-day measurements (z-scores), of which only the first two drive the energy."""


def _cross_validated_r_squared(energy: np.ndarray, line: Line) -> float:
    """Leave-one-out R^2 from the prediction residuals e_i / (1 - h_ii) (PRESS)."""
    press = np.sum((line.residual / (1 - line.hat)) ** 2)
    centred = energy - energy.mean()
    return float(1 - press / (centred @ centred))


def _unseen(r_squared: float) -> str:
    if r_squared < 0:
        return "it predicts worse than the plain average (R^2 below zero)"
    return f"it explains only {r_squared:.0%}"


def _extract(rng: np.random.Generator, rows: int) -> tuple[float, float, dict[str, np.ndarray]]:
    columns = [rng.normal(0, 1, rows) for _ in range(PREDICTORS)]
    energy = 9_000 + 900 * columns[0] + 500 * columns[1] + rng.normal(0, 1_200, rows)
    line = fit_line(energy, *columns)
    table = {**{name: c.round(3) for name, c in zip(SMALL_EXTRACT_COLUMNS, columns)}, "energy_kwh": energy.round(1)}
    return line.r_squared, _cross_validated_r_squared(energy, line), table


def small_extract() -> Demonstration:
    """Apparent against leave-one-out R^2 for 18 and for 300 invented site-days with 9 predictors."""
    rng = generator(7)
    (small_fit, small_cv, small_table), (large_fit, large_cv, _) = _extract(rng, 18), _extract(rng, 300)
    return Demonstration(
        (
            f"Invented site-days with {PREDICTORS} predictors (10 parameters); only two predictors matter.",
            "",
            "                 apparent R^2   leave-one-out R^2",
            f"  18 rows        {small_fit:>12.2f}   {small_cv:>17.2f}",
            f"  300 rows       {large_fit:>12.2f}   {large_cv:>17.2f}",
            "",
            f"With 1.8 rows per parameter the fit explains {small_fit:.0%} of the energy it was fitted to; on rows it",
            f"has not seen, {_unseen(small_cv)}: the rest is noise the fit memorised.",
        ),
        {"apparent_small": small_fit, "cv_small": small_cv, "apparent_large": large_fit, "cv_large": large_cv},
        table=small_table,
        options={"target": "energy_kwh"},
    )


def too_few_to_see() -> Demonstration:
    """How often a real effect is detected (F test at 5%) with 20 site-days and with 120, by simulation."""
    from scipy import stats

    rng = generator(45)
    trials, predictors, true_r2 = 400, 4, 0.15
    detected: dict[int, float] = {}
    first: dict[str, np.ndarray] = {}
    for rows in (20, 120):
        hits = 0
        for _ in range(trials):
            X = rng.normal(size=(rows, predictors))
            signal = X @ np.full(predictors, 1.0)
            noise_sd = np.sqrt(signal.var() * (1 - true_r2) / true_r2) if signal.var() > 0 else 1.0
            y = signal + rng.normal(0, noise_sd, rows)
            if not first:
                first = {**{f"{name}_z": X[:, j].round(3) for j, name in enumerate(("outdoor", "doors", "humidity", "pallets"))}, "energy_z": y.round(3)}
            line = fit_line(y, *X.T)
            f = (line.r_squared / predictors) / ((1 - line.r_squared) / (rows - predictors - 1))
            hits += int(stats.f.sf(f, predictors, rows - predictors - 1) < 0.05)
        detected[rows] = hits / trials
    return Demonstration(
        (
            f"Invented site-days where {predictors} predictors really explain {true_r2:.0%} of the energy; {trials} tables each.",
            "",
            "                 share of tables where the F test finds the effect (5% level)",
            f"  20 site-days   {detected[20]:.0%}",
            f"  120 site-days  {detected[120]:.0%}",
            "",
            "With 20 rows a real effect is missed most of the time, and a 'no effect' result says nothing: plan the",
            "sample for the smallest effect worth finding (80% power is the usual aim). The table checked below is one",
            f"of the 20-row tables, with --anticipated-r2 {true_r2:g}.",
        ),
        {"power_20": detected[20], "power_120": detected[120]},
        table=first,
        options={"target": "energy_z", "anticipated_r2": true_r2},
    )


def residual_sd_unsettled() -> Demonstration:
    """How often the residual SD of 60 and of 240 site-days misses the true one by more than 10%, with 3 predictors."""
    rng = generator(61)
    draws, sigma = 400, 600.0
    missed: dict[int, float] = {}
    table: dict[str, np.ndarray] = {}
    for rows in (60, 240):
        misses = 0
        for _ in range(draws):
            outdoor, doors, defrost = rng.uniform(-5, 30, rows), rng.uniform(100, 500, rows), rng.integers(0, 9, rows)
            energy = 4_000 + 55 * outdoor + 2 * doors + 40 * defrost + rng.normal(0, sigma, rows)
            estimate = fit_line(energy, outdoor, doors, defrost.astype(float)).sigma
            misses += int(not 1 / 1.1 <= estimate / sigma <= 1.1)
            if not table:
                table = {"outdoor_c": outdoor.round(1), "door_openings": doors.round(), "defrost_cycles": defrost, "energy_kwh": energy.round(1)}
        missed[rows] = misses / draws
    return Demonstration(
        (
            f"Invented site-days with 3 predictors and a true residual SD of {sigma:g} kWh; {draws} extracts each.",
            "",
            "                 residual SD off by more than 10% (either way)",
            f"  60 site-days   {missed[60]:.0%} of extracts",
            f"  240 site-days  {missed[240]:.0%} of extracts",
            "",
            "Sixty rows are 15 per parameter, which a rule of thumb calls ample, yet the fit's own estimate of its error",
            "is often off by more than a tenth, and every interval and prediction interval with it. Riley et al.'s",
            "criteria ask for enough rows to pin the residual SD, the R-squared and the shrinkage, not only the slopes.",
            "The table checked below is one of the 60-row extracts.",
        ),
        {"missed_60": missed[60], "missed_240": missed[240]},
        table=table,
        options={"target": "energy_kwh"},
    )

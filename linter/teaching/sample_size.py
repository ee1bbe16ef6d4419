"""Sample size: too few rows per parameter, and an R^2 that does not survive new data."""

from __future__ import annotations

import numpy as np

from .base import Demonstration, Line, fit_line, generator

PREDICTORS = 9


def _cross_validated_r_squared(energy: np.ndarray, line: Line) -> float:
    """Leave-one-out R^2 from the prediction residuals e_i / (1 - h_ii) (PRESS)."""
    press = np.sum((line.residual / (1 - line.hat)) ** 2)
    centred = energy - energy.mean()
    return float(1 - press / (centred @ centred))


def _unseen(r_squared: float) -> str:
    if r_squared < 0:
        return "it predicts worse than the plain average (R^2 below zero)"
    return f"it explains only {r_squared:.0%}"


def _extract(rng: np.random.Generator, rows: int) -> tuple[float, float]:
    columns = [rng.normal(0, 1, rows) for _ in range(PREDICTORS)]
    energy = 9_000 + 900 * columns[0] + 500 * columns[1] + rng.normal(0, 1_200, rows)
    line = fit_line(energy, *columns)
    return line.r_squared, _cross_validated_r_squared(energy, line)


def small_extract() -> Demonstration:
    """Apparent against leave-one-out R^2 for 18 and for 300 invented site-days with 9 predictors."""
    rng = generator(7)
    (small_fit, small_cv), (large_fit, large_cv) = _extract(rng, 18), _extract(rng, 300)
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
    )


def too_few_to_see() -> Demonstration:
    """How often a real effect is detected (F test at 5%) with 20 site-days and with 120, by simulation."""
    from scipy import stats

    rng = generator(45)
    trials, predictors, true_r2 = 400, 4, 0.15
    detected: dict[int, float] = {}
    for rows in (20, 120):
        hits = 0
        for _ in range(trials):
            X = rng.normal(size=(rows, predictors))
            signal = X @ np.full(predictors, 1.0)
            noise_sd = np.sqrt(signal.var() * (1 - true_r2) / true_r2) if signal.var() > 0 else 1.0
            y = signal + rng.normal(0, noise_sd, rows)
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
            "sample for the smallest effect worth finding (80% power is the usual aim).",
        ),
        {"power_20": detected[20], "power_120": detected[120]},
    )

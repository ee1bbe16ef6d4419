"""Collinearity: floor area and rack volume move together, and the area slope stops meaning anything."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import BOOTSTRAP_RESAMPLES, Demonstration, fit_line, floor_areas, generator


def _bootstrap_slopes(energy: np.ndarray, columns: list[np.ndarray], rng: np.random.Generator) -> np.ndarray:
    """The floor-area slope (first column) in each of the bootstrap resamples of the rows."""
    rows = energy.size
    draws = [rng.integers(0, rows, rows) for _ in range(BOOTSTRAP_RESAMPLES)]
    return np.array([fit_line(energy[d], *(c[d] for c in columns)).coef[1] for d in draws])


def area_and_racks() -> Demonstration:
    """The same area slope with and without the near-copy rack volume, and how often its sign flips."""
    rng = generator(1)
    area = floor_areas(rng, 40)
    racks = 7.0 * area * rng.uniform(0.95, 1.05, area.size)
    energy = 900 + 0.3 * area + rng.normal(0, 900, area.size)
    both, alone = fit_line(energy, area, racks), fit_line(energy, area)
    slopes_both, slopes_alone = _bootstrap_slopes(energy, [area, racks], rng), _bootstrap_slopes(energy, [area], rng)
    flips_both, flips_alone = float(np.mean(slopes_both < 0)), float(np.mean(slopes_alone < 0))
    spread_both, spread_alone = float(np.std(slopes_both, ddof=1)), float(np.std(slopes_alone, ddof=1))
    correlation = float(np.corrcoef(area, racks)[0, 1])
    return Demonstration(
        (
            f"40 invented sites; rack_volume_m3 = 7 x floor_area_m2 within 5% (correlation {correlation:.4f}).",
            "True effect: +0.30 kWh per m2 of floor area; rack volume adds nothing of its own.",
            "",
            "                           floor_area_m2 slope   std. error   bootstrap SD   negative in bootstrap",
            f"  with rack_volume_m3      {fmt(both.coef[1]):>19}   {fmt(both.se[1]):>10}   {fmt(spread_both):>12}   {flips_both:>21.0%}",
            f"  rack_volume_m3 dropped   {fmt(alone.coef[1]):>19}   {fmt(alone.se[1]):>10}   {fmt(spread_alone):>12}   {flips_alone:>21.0%}",
            "",
            f"With both columns the standard error is {both.se[1] / alone.se[1]:.0f} times larger and the sign of the",
            f"area effect flips in {flips_both:.0%} of {BOOTSTRAP_RESAMPLES} bootstrap resamples: the data cannot tell the two apart.",
        ),
        {
            "se_ratio": float(both.se[1] / alone.se[1]),
            "flip_share": flips_both,
            "flip_share_fixed": flips_alone,
            "bootstrap_sd": spread_both,
            "bootstrap_sd_fixed": spread_alone,
            "se": float(both.se[1]),
            "se_fixed": float(alone.se[1]),
            "correlation": correlation,
        },
    )


def parts_and_total() -> Demonstration:
    """Two coefficient vectors that fit sub-meters and their exact total equally well: the coefficients are not defined."""
    rng = generator(31)
    rows = 120
    compressor, fans = rng.uniform(2_000, 9_000, rows), rng.uniform(300, 1_200, rows)
    gross = compressor + fans
    cost = 50 + 0.21 * compressor + 0.25 * fans + rng.normal(0, 40, rows)
    X = np.column_stack([np.ones(rows), compressor, fans, gross])
    first, *_ = np.linalg.lstsq(X, cost, rcond=None)
    shifted = first + 0.15 * np.array([0.0, 1.0, 1.0, -1.0])  # moves weight from the parts to the total
    gap = float(np.max(np.abs(X @ first - X @ shifted)))
    rank = int(np.linalg.matrix_rank(X))
    return Demonstration(
        (
            f"{rows} invented site-days: compressor_kwh and fans_kwh, and gross_kwh = their exact sum, as predictors.",
            f"The design has 4 columns but rank {rank}: one column is a combination of the others.",
            "",
            "                      compressor_kwh   fans_kwh   gross_kwh",
            f"  one solution       {first[1]:>14.3f}   {first[2]:>8.3f}   {first[3]:>9.3f}",
            f"  another solution   {shifted[1]:>14.3f}   {shifted[2]:>8.3f}   {shifted[3]:>9.3f}",
            "",
            f"Both give the same fitted values (largest difference {gap:.1e}): the data cannot choose between them, so",
            "no coefficient has a meaning. Software silently drops a column of its own choosing or fails; keep either",
            "the total or the parts.",
        ),
        {"rank": float(rank), "columns": 4.0, "fitted_gap": gap, "coefficient_shift": 0.15},
    )


def lost_digits() -> Demonstration:
    """Coefficient error when the normal equations are solved for a badly conditioned design, against a QR solve."""
    rng = generator(32)
    rows = 200
    day = np.arange(rows, dtype=float)
    seconds = 1.7e9 + 86_400.0 * day  # a timestamp in seconds: huge and nearly constant relative to its size
    X = np.column_stack([np.ones(rows), seconds, rng.uniform(-5, 35, rows)])
    truth = np.array([-3.0e4, 2.0e-5, 110.0])
    y = X @ truth
    q, r = np.linalg.qr(X)
    by_qr = np.linalg.solve(r, q.T @ y)
    by_normal = np.linalg.solve(X.T @ X, X.T @ y)
    condition = float(np.linalg.cond(X))
    error_qr = float(np.max(np.abs(by_qr - truth) / np.abs(truth)))
    error_normal = float(np.max(np.abs(by_normal - truth) / np.abs(truth)))
    return Demonstration(
        (
            f"{rows} invented site-days with a raw timestamp in seconds (about 1.7e9) as a predictor, and exact energies.",
            f"The design's condition number is {condition:.1e}; double precision carries about 16 digits.",
            "",
            "                                 largest relative error of a coefficient",
            f"  QR (as careful solvers do)     {error_qr:.1e}",
            f"  normal equations (X'X)         {error_normal:.1e}",
            "",
            "Squaring the design in X'X squares its condition number: the solver loses about twice as many digits,",
            "and on real, noisy data the printed coefficients can be mostly rounding error. Centre or rescale such",
            "columns (days since the first day) before fitting.",
        ),
        {"condition": condition, "error_qr": error_qr, "error_normal": error_normal},
    )

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
        table={"floor_area_m2": area, "rack_volume_m3": racks.round(), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
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
        table={"compressor_kwh": compressor, "fans_kwh": fans, "gross_kwh": gross, "cost_eur": cost.round(2)},
        options={"target": "cost_eur"},
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
        table={"timestamp_s": seconds, "outdoor_c": X[:, 2], "energy_kwh": y},
        options={"target": "energy_kwh"},
    )


def dock_follows_outdoor() -> Demonstration:
    """The outdoor slope's standard error with and without the loading dock's air temperature, which follows the outdoor air."""
    rng = generator(120)
    rows = 120
    outdoor = rng.normal(0, 6, rows).round(1)  # a winter month
    dock = (0.8 * outdoor + rng.normal(0, 1.2, rows)).round(1)
    defrost = rng.integers(0, 9, rows)
    energy = 6_000 + 90 * outdoor + 30 * dock + 140 * defrost + rng.normal(0, 400, rows)
    both, alone = fit_line(energy, outdoor, dock, defrost), fit_line(energy, outdoor, defrost)
    auxiliary = fit_line(outdoor, dock, defrost).r_squared
    vif = 1 / (1 - auxiliary)
    return Demonstration(
        (
            f"{rows} invented winter site-days: outdoor_c around 0 C, dock_c (the loading dock's air) follows it, and",
            "defrost_cycles. True effects: +90 kWh per outdoor degree, +30 per dock degree.",
            "",
            "                           outdoor_c slope   std. error",
            f"  with dock_c              {fmt(both.coef[1]):>15}   {fmt(both.se[1]):>10}",
            f"  dock_c left out          {fmt(alone.coef[1]):>15}   {fmt(alone.se[1]):>10}",
            "",
            f"dock_c and defrost_cycles explain {auxiliary:.0%} of outdoor_c's variation: VIF {fmt(vif)}, so the outdoor slope",
            f"rests on the {1 - auxiliary:.0%} that is its own and its standard error is {both.se[1] / alone.se[1]:.1f} times as wide (about",
            f"sqrt(VIF) = {np.sqrt(vif):.1f}). Left out, dock_c's effect is carried by outdoor_c: a narrower interval for a",
            "slope that now means 'outdoor air and what follows it'.",
        ),
        {"vif": float(vif), "se_ratio": float(both.se[1] / alone.se[1]), "slope_with": float(both.coef[1]), "slope_without": float(alone.coef[1])},
        table={"outdoor_c": outdoor, "dock_c": dock, "defrost_cycles": defrost, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


SIZE_MEASURES = {"floor_area_m2": 40_000.0, "rack_volume_m3": 280_000.0, "staff": 60.0, "pallets_stored": 15_000.0, "dock_doors": 24.0}


def _negative(names: list[str]) -> str:
    if not names:
        return "no slope comes out"
    if len(names) == 1:
        return f"the slope of {names[0]} comes out"
    return f"the slopes of {', '.join(names[:-1])} and {names[-1]} come out"


def five_measures_of_size() -> Demonstration:
    """Five columns that all measure site size: the floor-area slope alone and beside the four others."""
    rng = generator(121)
    rows = 120
    size = rng.uniform(0.2, 1.0, rows)
    columns = {name: (scale * size * rng.normal(1, 0.08, rows)).round() for name, scale in SIZE_MEASURES.items()}
    energy = 900 + 0.3 * columns["floor_area_m2"] + rng.normal(0, 900, rows)
    values = list(columns.values())
    r = np.atleast_2d(np.corrcoef(np.array(values)))
    lowest = float(r[np.triu_indices(len(values), 1)].min())
    every, alone = fit_line(energy, *values), fit_line(energy, columns["floor_area_m2"])
    negative = [name for name, c in zip(columns, every.coef[1:]) if c < 0]
    return Demonstration(
        (
            f"{rows} invented sites; floor_area_m2, rack_volume_m3, staff, pallets_stored and dock_doors all measure",
            f"site size: every pair correlates {lowest:.2f} or more. Only floor area matters (+0.30 kWh per m2).",
            "",
            "                               floor_area_m2 slope   std. error",
            f"  beside the four others       {fmt(every.coef[1]):>19}   {fmt(every.se[1]):>10}",
            f"  alone                        {fmt(alone.coef[1]):>19}   {fmt(alone.se[1]):>10}",
            "",
            f"Beside the others the slope's standard error is {every.se[1] / alone.se[1]:.1f} times as wide, and {_negative(negative)}",
            "negative (a bigger site using less): the fit cannot split one effect of size between five columns that",
            "say the same thing. Keep one measure of size, or combine them into one index.",
        ),
        {"lowest_correlation": lowest, "se_ratio": float(every.se[1] / alone.se[1]), "negative_slopes": float(len(negative))},
        table={**columns, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )

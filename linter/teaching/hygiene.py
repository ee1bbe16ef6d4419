"""Hygiene: the same site-days exported several times look like more evidence than there is."""

from __future__ import annotations

import numpy as np

from ..rule import fmt
from .base import Demonstration, Line, fit_line, generator


def _width(line: Line) -> float:
    """Width of the normal-theory 95% interval of the slope."""
    return float(2 * 1.96 * line.se[1])


def duplicated_days() -> Demonstration:
    """Standard error of the outdoor-temperature slope from 40 site-days, and from the same rows exported four times."""
    rng = generator(5)
    outdoor = rng.uniform(-5, 35, 40).round(1)
    energy = 8_000 + 55 * outdoor + rng.normal(0, 600, outdoor.size)
    once, repeated = fit_line(energy, outdoor), fit_line(np.tile(energy, 4), np.tile(outdoor, 4))
    return Demonstration(
        (
            "40 invented site-days; an export glitch repeats every row four times (160 rows, no new information).",
            "",
            "                      outdoor_c slope   std. error   95% interval width   rows",
            f"  each day once      {fmt(once.coef[1]):>15}   {fmt(once.se[1]):>10}   {fmt(_width(once)):>18}   {40:>4}",
            f"  each day 4 times   {fmt(repeated.coef[1]):>15}   {fmt(repeated.se[1]):>10}   {fmt(_width(repeated)):>18}   {160:>4}",
            "",
            f"The slope is identical, but the repeated rows shrink its standard error to {repeated.se[1] / once.se[1]:.0%}:",
            "the fit claims twice the precision the 40 real days support, and p-values follow.",
        ),
        {"se_ratio": float(repeated.se[1] / once.se[1]), "slope_difference": float(repeated.coef[1] - once.coef[1])},
        table={"outdoor_c": np.tile(outdoor, 4), "energy_kwh": np.tile(energy.round(1), 4)},
        options={"target": "energy_kwh"},
    )


def leaked_target() -> Demonstration:
    """R-squared and the outdoor slope with and without a column computed from the energy itself (the gross meter reading)."""
    rng = generator(24)
    rows = 200
    outdoor = rng.uniform(-5, 35, rows).round(1)
    energy = 6_000 + 110 * outdoor + rng.normal(0, 900, rows)
    gross = 1.08 * energy + rng.normal(0, 20, rows)  # the site meter: refrigeration plus a near-constant share
    honest, leaking = fit_line(energy, outdoor), fit_line(energy, outdoor, gross)
    return Demonstration(
        (
            f"{rows} invented site-days; gross_kwh is the site meter, read after the fact, which contains the energy_kwh to be explained.",
            "",
            "                                R^2     outdoor_c slope",
            f"  energy on outdoor_c           {honest.r_squared:.2f}   {fmt(honest.coef[1]):>15}",
            f"  ... plus gross_kwh            {leaking.r_squared:.2f}   {fmt(leaking.coef[1]):>15}",
            "",
            "With the leaked column the fit looks perfect and the outdoor slope all but vanishes: gross_kwh already holds",
            "the answer, so nothing else seems to matter. Such a model cannot be used where the answer is not yet known.",
        ),
        {"r2_honest": honest.r_squared, "r2_leaking": leaking.r_squared, "slope_honest": float(honest.coef[1]), "slope_leaking": float(leaking.coef[1])},
        table={"outdoor_c": outdoor, "gross_kwh": gross.round(1), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def _dummies(labels: np.ndarray) -> tuple[list[np.ndarray], list[str]]:
    """Treatment-coded dummy columns of ``labels`` (reference: the most frequent level) and their level names."""
    levels, counts = np.unique(labels, return_counts=True)
    others = [level for level in levels if level != levels[np.argmax(counts)]]
    return [(labels == level).astype(float) for level in others], [str(level) for level in others]


def two_row_level() -> Demonstration:
    """Standard error of a compressor-type coefficient resting on 2 rows, against one resting on 60."""
    rng = generator(33)
    kinds = np.array(["screw"] * 138 + ["scroll"] * 60 + ["reciprocating"] * 2)
    effect = {"screw": 0.0, "scroll": -400.0, "reciprocating": 300.0}
    energy = 7_000 + np.array([effect[k] for k in kinds]) + rng.normal(0, 900, kinds.size)
    columns, names = _dummies(kinds)
    fit = fit_line(energy, *columns)
    se = dict(zip(names, fit.se[1:]))
    coef = dict(zip(names, fit.coef[1:]))
    return Demonstration(
        (
            "200 invented site-days: 138 screw, 60 scroll and 2 reciprocating compressor days; true effects against",
            "screw: scroll -400 kWh, reciprocating +300 kWh.",
            "",
            "                   coefficient   std. error   rows",
            f"  scroll           {fmt(coef['scroll']):>11}   {fmt(se['scroll']):>10}     60",
            f"  reciprocating    {fmt(coef['reciprocating']):>11}   {fmt(se['reciprocating']):>10}      2",
            "",
            f"The two-row level's standard error is {se['reciprocating'] / se['scroll']:.1f} times the other's: its coefficient is",
            "whatever those two days happened to be. Merge rare levels or collect more of their rows.",
        ),
        {"se_rare": float(se["reciprocating"]), "se_common": float(se["scroll"])},
        table={"compressor_type": kinds, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def levels_eat_rows() -> Demonstration:
    """The outdoor slope's standard error with a category of 10 levels, and of 90 levels, on 120 rows."""
    rng = generator(34)
    rows = 120
    outdoor = rng.uniform(-5, 35, rows)
    energy = 6_000 + 110 * outdoor + rng.normal(0, 900, rows)
    few, many = np.arange(rows) % 10, np.arange(rows) % 90
    with_few, with_many = fit_line(energy, outdoor, *_dummies(few)[0]), fit_line(energy, outdoor, *_dummies(many)[0])
    return Demonstration(
        (
            f"{rows} invented site-days; energy follows outdoor_c, and a category (a technician code) has no effect.",
            "",
            "                              outdoor_c slope   std. error   residual df",
            f"  category with 10 levels     {fmt(with_few.coef[1]):>15}   {fmt(with_few.se[1]):>10}   {rows - 11:>11}",
            f"  category with 90 levels     {fmt(with_many.coef[1]):>15}   {fmt(with_many.se[1]):>10}   {rows - 91:>11}",
            "",
            f"89 dummies spend 89 of the {rows} rows: the slope's standard error grows {with_many.se[1] / with_few.se[1]:.1f}-fold",
            "and the fit memorises the levels instead of learning the effect. Group the levels or leave the column out.",
            "(prefit leaves such a text column out by itself; the table checked below names it in --predictors.)",
        ),
        {"se_few": float(with_few.se[1]), "se_many": float(with_many.se[1])},
        table={"outdoor_c": outdoor.round(1), "technician": np.char.mod("T%02d", many), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh", "predictors": ["outdoor_c", "technician"]},
    )


def site_number_as_predictor() -> Demonstration:
    """The slope of energy on a site number, and how it changes when the sites are merely numbered differently."""
    rng = generator(35)
    sites = 40
    site_effect = rng.normal(0, 1_500, sites)
    numbering, renumbered = np.arange(1, sites + 1, dtype=float), rng.permutation(sites) + 1.0
    day_site = np.repeat(np.arange(sites), 30)
    energy = 9_000 + site_effect[day_site] + rng.normal(0, 500, day_site.size)
    first, second = fit_line(energy, numbering[day_site]), fit_line(energy, renumbered[day_site])
    return Demonstration(
        (
            f"{sites} invented sites x 30 days; each site has its own level of energy; site_number is a label, 1 to {sites}.",
            "",
            "                                  site_number slope   std. error",
            f"  sites numbered as exported       {fmt(first.coef[1]):>17}   {fmt(first.se[1]):>10}",
            f"  the same sites numbered again    {fmt(second.coef[1]):>17}   {fmt(second.se[1]):>10}",
            "",
            "The slope on an identifier depends on how the sites happen to be numbered: it measures nothing. Use the",
            "column as --id, and the sites' measured properties (area, equipment) as predictors.",
        ),
        {"slope_first": float(first.coef[1]), "slope_renumbered": float(second.coef[1]), "se_first": float(first.se[1])},
        table={"site_number": numbering[day_site].astype(np.int64), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def watt_hours_beside_degrees() -> Demonstration:
    """Predictions from coefficients printed to four decimals when one predictor is in milliwatt-hours."""
    rng = generator(36)
    rows = 300
    outdoor, lighting_mwh = rng.uniform(-5, 35, rows), rng.uniform(200, 900, rows) * 1e6  # kWh recorded as mWh
    energy = 5_000 + 110 * outdoor + 1.5e-6 * lighting_mwh + rng.normal(0, 300, rows)
    fit = fit_line(energy, outdoor, lighting_mwh)
    printed = np.round(fit.coef, 4)
    X = np.column_stack([np.ones(rows), outdoor, lighting_mwh])
    miss = float(np.sqrt(np.mean((X @ printed - X @ fit.coef) ** 2)))
    return Demonstration(
        (
            f"{rows} invented site-days: outdoor_c in degrees beside lighting energy exported in milliwatt-hours",
            "(hundreds of millions): magnitudes a million and more apart.",
            "",
            "                  outdoor_c   lighting_mwh",
            f"  coefficient    {fit.coef[1]:>9.4f}   {fit.coef[2]:>12.4e}",
            f"  printed (4 dp) {printed[1]:>9.4f}   {printed[2]:>12.4f}",
            "",
            "Printed to four decimals, the lighting coefficient reads 0, and predictions from the printed model miss by",
            f"{fmt(miss)} kWh on average (the residual SD is {fmt(fit.sigma)}). The design's condition number also grows with",
            "the disparity. Rescale the column to sensible units (kWh) before fitting.",
        ),
        {"printed_lighting": float(printed[2]), "prediction_miss": miss, "sigma": fit.sigma},
        table={"outdoor_c": outdoor.round(1), "lighting_mwh": lighting_mwh.round(), "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def kwh_as_text() -> Demonstration:
    """Parameters spent when a kWh column exported as text ("12,400") becomes a category instead of one number."""
    rng = generator(37)
    rows = 150
    pallets = rng.integers(5, 25, rows) * 1_000
    energy = 3_000 + 0.35 * pallets + rng.normal(0, 600, rows)
    as_text = np.array([f"{p:,}" for p in pallets])
    as_number, as_category = fit_line(energy, pallets.astype(float)), fit_line(energy, *_dummies(as_text)[0])
    levels = np.unique(as_text).size
    return Demonstration(
        (
            f'{rows} invented site-days; pallets_stored was exported as text with thousands separators ("12,000").',
            "",
            "                              parameters   residual SD",
            f"  read as one number          {2:>10}   {fmt(as_number.sigma):>11}",
            f"  read as text (a category)   {levels:>10}   {fmt(as_category.sigma):>11}",
            "",
            f"As text each distinct value becomes a level: {levels - 1} dummies where one slope would do, no estimate of",
            "energy per pallet, and no prediction for a count not seen before. Convert the column to numbers.",
        ),
        {"parameters_number": 2.0, "parameters_text": float(levels), "sigma_number": as_number.sigma, "sigma_text": as_category.sigma},
        table={"pallets_stored": as_text, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def one_setpoint() -> Demonstration:
    """Rank of a design whose setpoint column holds one value: it is a multiple of the intercept column."""
    rng = generator(38)
    rows = 90
    outdoor, setpoint = rng.uniform(-5, 35, rows), np.full(rows, -22.0)
    X = np.column_stack([np.ones(rows), outdoor, setpoint])
    rank = int(np.linalg.matrix_rank(X))
    energy = 7_000 + 110 * outdoor + rng.normal(0, 500, rows)
    return Demonstration(
        (
            f"{rows} invented frozen-store days; setpoint_c is -22 on every row.",
            "",
            f"The design [intercept, outdoor_c, setpoint_c] has 3 columns and rank {rank}: setpoint_c is -22 times the",
            "intercept column, so its coefficient and the intercept cannot be told apart, and the setpoint's effect",
            "cannot be estimated from a table in which it never changes. Leave it out, or add rows where it varies.",
        ),
        {"rank": float(rank), "columns": 3.0},
        table={"outdoor_c": outdoor.round(1), "setpoint_c": setpoint, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )


def one_infinite_reading() -> Demonstration:
    """What one infinite meter reading does to a least-squares fit."""
    rng = generator(39)
    rows = 100
    outdoor = rng.uniform(-5, 35, rows)
    energy = 6_000 + 110 * outdoor + rng.normal(0, 700, rows)
    doors = rng.integers(50, 800, rows).astype(float)
    doors[17] = np.inf
    with np.errstate(all="ignore"):
        X = np.column_stack([np.ones(rows), outdoor, doors])
        coef = np.linalg.lstsq(np.nan_to_num(X, posinf=1e308), energy, rcond=None)[0]
        naive = X.T @ X
    finite = np.isfinite(naive).all()
    return Demonstration(
        (
            f"{rows} invented site-days; one door-count reading is exported as inf (a division by zero upstream).",
            "",
            f"  X'X is finite: {bool(finite)}; with inf read as the largest double, the outdoor slope is {fmt(float(coef[1]))}",
            "  (true +110).",
            "",
            "A single non-finite value makes the sums of squares infinite or NaN: some software refuses to fit, other",
            "software returns NaN or nonsense coefficients without a warning. Correct or remove the value first.",
        ),
        {"gram_finite": float(finite), "slope": float(coef[1])},
        table={"outdoor_c": outdoor.round(1), "door_openings": doors, "energy_kwh": energy.round(1)},
        options={"target": "energy_kwh"},
    )

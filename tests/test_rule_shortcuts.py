"""Rules on tables larger than their spot checks: the shortcuts (evenly spaced rows, bounds, hashed rows) answer like pandas and numpy.

The tables are invented (cold-storage warehouse readings). Values that would
change a verdict are placed on rows the spot checks skip (row 1 of every 4 at
20,000 rows), so a shortcut that trusted its spot alone would fail.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest
import scipy.stats
from numpy.testing import assert_allclose

from prefit.api import context_for
from prefit.context import RunContext
from prefit.findings import Finding
from prefit.rule import RuleSettings
from prefit.rules import design as design_rules
from prefit.rules import hygiene, ranges, target
from prefit.stats.rowmatch import candidate_rows, value_bits

ROWS = 20_000
OFF_SPOT = np.arange(1, ROWS, 4)[:40]


def _run(ctx: RunContext, rule_id: str) -> list[Finding]:
    rule = next(r for module in (design_rules, hygiene, ranges, target) for r in module.RULES if r.id == rule_id)
    return list(rule.check(ctx, RuleSettings.defaults(rule)))


def _warehouse(seed: int = 7, rows: int = ROWS) -> pd.DataFrame:
    """Invented daily readings of cold-storage rooms."""
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame(
        {
            "door_openings": rng.normal(40, 8, rows),
            "outside_temp": rng.normal(8, 6, rows),
            "pallets": rng.normal(300, 50, rows),
            "zone": rng.choice(["north", "south", "east", "dock"], rows),
        }
    )
    frame["kwh"] = 200 + 2 * frame["door_openings"] + 5 * frame["outside_temp"] + rng.normal(0, 20, rows)
    return frame


# ---------------------------------------------------------------- duplicate-rows


def test_copies_and_replicates_in_a_large_table_are_counted_like_pandas() -> None:
    frame = _warehouse()
    frame.loc[frame.index[::50], "outside_temp"] = np.nan
    copies = frame.iloc[[3, 50, 50, 700, 19_999]]
    replicates = frame.iloc[[10, 11, 12]].assign(kwh=lambda f: f["kwh"] + 1.0)
    table = pd.concat([frame, copies, replicates], ignore_index=True)
    found = {f.grade.word: f for f in _run(context_for(table, "kwh"), "hygiene.duplicate-rows")}
    # reference: pandas DataFrame.duplicated (missing values compare equal there, as in prefit)
    assert found["weakens"].details["extra_copies"] == int(table.duplicated().sum()) == 5
    assert found["weakens"].details["rows_repeated"] == len(table[table.duplicated(keep=False)].drop_duplicates()) == 4
    # reference: pandas groupby over every predictor of the complete rows, groups whose target takes several values
    complete = table.dropna()
    varying = complete.groupby(["door_openings", "outside_temp", "pallets", "zone"])["kwh"].nunique()
    assert found["note"].details["groups"] == int((varying > 1).sum()) == 3


@pytest.mark.parametrize("seed", range(6))
def test_hashed_candidates_hold_every_repeated_row(seed: int) -> None:
    rng = np.random.default_rng(seed)
    rows = int(rng.integers(2, 30_000))
    levels = rng.integers(1, 6, size=int(rng.integers(1, 8)))
    frame = pd.DataFrame({f"c{j}": rng.choice(np.array([0.0, 1.5, np.nan, -np.inf, 7.0])[:k], rows) for j, k in enumerate(levels)})
    if seed % 2:
        frame["reading"] = rng.normal(size=rows)
    copies = frame.sample(n=min(rows, 50), random_state=seed)
    for column in copies.columns:
        other_zero = np.where(copies[column] == 0.0, -0.0, copies[column])
        other_nan = np.full(len(copies), np.nan).view(np.uint64) | np.uint64(1)
        copies[column] = np.where(np.isnan(copies[column]), other_nan.view(np.float64), other_zero)
    table = pd.concat([frame, copies], ignore_index=True)
    columns = [table[c].to_numpy() for c in table.columns]
    candidates = candidate_rows((lambda at, v=v: value_bits(v if at is None else v[at]) for v in columns), len(table))
    # reference: pandas DataFrame.duplicated(keep=False): rows equal to another row, NaN equal to NaN and -0.0 to 0.0
    repeated = np.flatnonzero(table.duplicated(keep=False).to_numpy())
    assert np.isin(np.arange(rows, len(table)), repeated).all()
    assert np.isin(repeated, candidates).all()
    assert np.all(np.diff(candidates) > 0)
    if seed % 2:
        assert candidates.size == repeated.size


# ---------------------------------------------------------------- near-constant, narrow


def test_a_dominant_value_hidden_from_the_spot_rows_is_found() -> None:
    frame = _warehouse()
    defrost = np.full(ROWS, 4.0)
    others = np.arange(0, ROWS, 4)[:900]
    defrost[others] = np.linspace(1.0, 9.0, others.size)
    frame["defrost_hours"] = defrost
    found = [f for f in _run(context_for(frame, "kwh"), "range.near-constant") if f.columns == ("defrost_hours",)]
    # reference: pandas value_counts (share of the most frequent value)
    share = frame["defrost_hours"].value_counts(normalize=True).iloc[0]
    assert share >= 0.95 and len(found) == 1
    assert_allclose(found[0].details["mode_share"], share, rtol=1e-12)
    assert found[0].details["distinct_values"] == frame["defrost_hours"].nunique()


@pytest.mark.parametrize(("finer", "few_steps"), [(None, True), (-19.9, False)])
def test_recording_steps_count_rows_the_spot_skips(finer: float | None, few_steps: bool) -> None:
    frame = _warehouse()
    setpoint = np.random.default_rng(3).choice([-20.0, -19.5, -19.0], ROWS)
    if finer is not None:
        setpoint[OFF_SPOT] = finer
    frame["setpoint"] = setpoint
    found = [f for f in _run(context_for(frame, "kwh"), "range.narrow") if f.columns == ("setpoint",)]
    # reference: numpy: span over the smallest gap between distinct values
    distinct = np.unique(setpoint)
    steps = (distinct[-1] - distinct[0]) / np.min(np.diff(distinct))
    assert bool(steps < 5) is few_steps
    assert len(found) == int(few_steps)
    if few_steps:
        assert_allclose(found[0].details["steps"], steps, rtol=1e-9)


def test_a_tight_spread_against_the_mean_matches_numpy() -> None:
    frame = _warehouse()
    frame["wall_u_value"] = 1000 + np.random.default_rng(4).normal(0, 1, ROWS)
    found = [f for f in _run(context_for(frame, "kwh"), "range.narrow") if f.columns == ("wall_u_value",)]
    values = frame["wall_u_value"].to_numpy()
    # reference: numpy std (n - 1) over mean
    assert_allclose(found[0].details["coefficient_of_variation"], np.std(values, ddof=1) / np.mean(values), rtol=1e-12)


# ---------------------------------------------------------------- scale-disparity, target-leak


@pytest.mark.parametrize("large_scale", [1e5, 10.0])
def test_magnitudes_of_predictors_crossing_zero_match_numpy(large_scale: float) -> None:
    rng = np.random.default_rng(5)
    frame = _warehouse()
    frame["flow_deviation"] = rng.normal(0, 1e-2, ROWS)
    frame["area_deviation"] = rng.normal(0, large_scale, ROWS)
    found = _run(context_for(frame, "kwh"), "hygiene.scale-disparity")
    # reference: numpy median of the absolute non-zero values
    magnitudes = {c: float(np.median(np.abs(frame[c][frame[c] != 0]))) for c in ("flow_deviation", "area_deviation", "pallets", "door_openings")}
    ratio = max(magnitudes.values()) / min(magnitudes.values())
    assert len(found) == int(ratio > 1e6)
    if found:
        assert_allclose(found[0].value, ratio, rtol=1e-12)
        for column, magnitude in found[0].details["magnitudes"].items():
            assert_allclose(magnitude, float(np.median(np.abs(frame[column][frame[column] != 0]))), rtol=1e-12)


def test_only_the_predictor_above_the_leak_limit_is_reported() -> None:
    rng = np.random.default_rng(6)
    frame = _warehouse()
    noise = rng.normal(0, 1, ROWS)
    spread = frame["kwh"].std()
    frame["submeter"] = frame["kwh"] + noise * spread * 0.08
    frame["shadow_meter"] = frame["kwh"] + noise[::-1] * spread * 0.15
    found = _run(context_for(frame, "kwh"), "hygiene.target-leak")
    # reference: numpy corrcoef
    r2 = {c: np.corrcoef(frame[c], frame["kwh"])[0, 1] ** 2 for c in ("submeter", "shadow_meter")}
    assert r2["submeter"] > 0.99 > r2["shadow_meter"]
    assert [f.columns[0] for f in found] == ["submeter"]
    assert_allclose(found[0].value, r2["submeter"], rtol=1e-9)


# ---------------------------------------------------------------- possible-code, identifier


@pytest.mark.parametrize("fraction", [False, True])
def test_codes_and_counters_with_a_fraction_off_the_spot_rows(fraction: bool) -> None:
    frame = _warehouse()
    frame["compressor_type"] = np.random.default_rng(8).integers(1, 4, ROWS).astype(float)
    frame["reading_number"] = np.arange(ROWS, dtype=float)
    if fraction:
        frame.loc[OFF_SPOT[0], ["compressor_type", "reading_number"]] = [2.5, OFF_SPOT[0] + 0.5]
    ctx = context_for(frame, "kwh")
    codes = [f.columns for f in _run(ctx, "design.possible-code")]
    counters = [f.columns for f in _run(ctx, "hygiene.identifier")]
    # reference: numpy: whole numbers only, and pandas nunique for the distinct codes
    whole = bool(np.all(frame["compressor_type"] == np.round(frame["compressor_type"])))
    assert whole is not fraction and (frame["compressor_type"].nunique() == 3) is not fraction
    assert codes == ([] if fraction else [("compressor_type",)])
    assert counters == ([] if fraction else [("reading_number",)])


# ---------------------------------------------------------------- target counts and moments


def test_target_counts_and_moments_without_distinct_values() -> None:
    frame = _warehouse()
    frame.loc[OFF_SPOT, "kwh"] = np.nan
    frame.loc[[5, 9], "kwh"] = np.inf
    ctx = context_for(frame, "kwh")
    tally = ctx.tally("kwh")
    finite = frame["kwh"][np.isfinite(frame["kwh"])].to_numpy()
    # reference: pandas counts of missing values and numpy counts of infinities
    assert (tally.rows, tally.missing + tally.nonfinite, tally.nonfinite) == (ROWS, int((~np.isfinite(frame["kwh"])).sum()), 2)
    # reference: scipy.stats.skew (biased moment estimator) of the finite values
    assert_allclose(tally.moments.skewness, scipy.stats.skew(finite), rtol=1e-9)
    summary = ctx.summary("kwh")
    assert (summary.rows, summary.missing, summary.nonfinite, summary.moments) == (tally.rows, tally.missing, tally.nonfinite, tally.moments)
    found: Any = _run(ctx, "target.missing-values")[0]
    assert found.row_count == int((~np.isfinite(frame["kwh"])).sum())


def test_design_columns_copy_the_design_matrix_exactly() -> None:
    frame = _warehouse(rows=5_000)
    frame.loc[frame.index[::7], "pallets"] = np.nan
    ctx = context_for(frame, "kwh")
    design = ctx.design
    # reference: the complete-case design matrix itself
    for j, name in enumerate(design.column_names):
        column = ctx.design_column(name)
        assert column.flags["C_CONTIGUOUS"]
        np.testing.assert_array_equal(column, design.X[:, j])

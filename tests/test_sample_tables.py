"""Every invented sample table reports exactly the findings its recipe lists, and the generator is reproducible."""

from __future__ import annotations

import importlib
import sys
from pathlib import Path

import pyarrow.parquet as pq
import pytest
from conftest import ROOT, SAMPLE_TABLES, run_cli

sys.path.insert(0, str(SAMPLE_TABLES))
generate = importlib.import_module("generate")
RECIPES = generate.recipes()


@pytest.mark.parametrize("recipe", RECIPES, ids=[r.NAME for r in RECIPES])
def test_sample_table_reports_exactly_its_expected_findings(recipe: object, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(ROOT)
    run = run_cli("check", f"sample_tables/{generate.file_name(recipe)}", *recipe.ARGS, "--format", "json")
    assert run.err == ""
    found = sorted((f["rule"], f["grade"], tuple(f["columns"])) for f in run.json()["findings"])
    expected = sorted((rule, grade, tuple(columns)) for rule, grade, columns in recipe.EXPECTED)
    assert found == expected
    assert run.code == recipe.EXIT_CODE
    document = run.json()
    by_key = {f["key"]: f for f in document["findings"]}
    fix_first = [
        (by_key[key]["rule"], by_key[key]["grade"], tuple(by_key[key]["columns"]), sum(key in f["explained_by"] for f in document["findings"]))
        for key in document["fix_first"]
    ]
    assert fix_first == [(rule, grade, tuple(columns), explains) for rule, grade, columns, explains in recipe.FIX_FIRST]


def test_generator_rebuilds_the_tables_and_readme(tmp_path: Path) -> None:
    generate.main(tmp_path)
    for recipe in RECIPES:
        name = generate.file_name(recipe)
        if recipe.FORMAT == "parquet":
            assert pq.read_table(tmp_path / name).equals(pq.read_table(SAMPLE_TABLES / name))
        else:
            assert (tmp_path / name).read_bytes() == (SAMPLE_TABLES / name).read_bytes(), name
    assert (tmp_path / "README.md").read_text() == (SAMPLE_TABLES / "README.md").read_text()

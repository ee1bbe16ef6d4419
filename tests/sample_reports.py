"""Reports of the invented sample tables, computed once per test session and shared by the report tests."""

from __future__ import annotations

import functools
import importlib
import os
import sys
from types import ModuleType

from conftest import ROOT, SAMPLE_TABLES

from prefit.api import Report, run_check
from prefit.cli import _build_parser, _options_from_args
from prefit.reading import ReadOptions, read_table

if str(SAMPLE_TABLES) not in sys.path:
    sys.path.insert(0, str(SAMPLE_TABLES))
generate = importlib.import_module("generate")
RECIPES: list[ModuleType] = generate.recipes()
NAMES = [r.NAME for r in RECIPES]


def recipe(name: str) -> ModuleType:
    """The recipe of the sample table called ``name``."""
    return next(r for r in RECIPES if r.NAME == name)


def command_args(name: str) -> list[str]:
    """The ``prefit check`` arguments of a sample table, with the table path relative to the project root."""
    found = recipe(name)
    return ["check", f"sample_tables/{generate.file_name(found)}", *found.ARGS]


@functools.lru_cache(maxsize=None)
def sample_report(name: str) -> Report:
    """The report of one sample table, built as the command line builds it (from the project root)."""
    here = os.getcwd()
    os.chdir(ROOT)
    try:
        args = _build_parser().parse_args(command_args(name))
        options = _options_from_args(args)
        table, info = read_table(args.tables[0], ReadOptions(sep=options.sep, encoding=options.encoding))
        return run_check(table, info, options)
    finally:
        os.chdir(here)


@functools.lru_cache(maxsize=None)
def sample_html(name: str) -> str:
    """The HTML report of one sample table (drawing the plots takes a while, so it is drawn once)."""
    return sample_report(name).to_html()

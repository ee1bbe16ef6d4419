"""A demonstration's invented table, checked: the findings its rule raises there.

Every built-in demonstration carries the table its lines describe; checking it
with the demonstration's options makes the rule fire, so that `prefit why RULE`
can print what prefit itself says about the table, and the tests can hold every
demonstration to it.
"""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from ..api import check
from ..pipeline import context_for
from ..rule import RuleLike, RuleSettings
from ..runner import run_rule
from .base import Columns, Demonstration

if TYPE_CHECKING:
    from ..context import RunContext
    from ..outcome import Report, RuleOutcome


COMPANION_FILES = {"baseline": "last_month.parquet", "score": "rows_to_score.parquet"}
"""The file name each companion table gets, as findings may quote it."""


def arrow_table(columns: Columns) -> pa.Table:
    """The invented table as a pyarrow table; NaN and None in a column are missing values, infinities stay."""
    arrays = {}
    for name, values in columns.items():
        if isinstance(values, np.ndarray) and values.dtype.kind == "f":
            arrays[name] = pa.array(values, mask=np.isnan(values))
        else:
            arrays[name] = pa.array(values, from_pandas=True)
    return pa.table(arrays)


@contextmanager
def _options_with_companions(demo: Demonstration) -> Iterator[tuple[dict[str, Any], str]]:
    """The demonstration's check options, with each companion table written to a temporary file its option names.

    Also yields the temporary folder, whose path findings may quote (a baseline's file name).
    """
    if not demo.table:
        raise ValueError("this demonstration has no table")
    options = dict(demo.options)
    with tempfile.TemporaryDirectory(prefix="prefit-demo-") as folder:
        for option, columns in demo.companions.items():
            path = Path(folder) / COMPANION_FILES.get(option, f"{option}.parquet")
            pq.write_table(arrow_table(columns), path)
            options[option] = str(path)
        yield options, folder


@contextmanager
def demonstration_context(demo: Demonstration) -> Iterator["RunContext"]:
    """The run context of the demonstration's table, checked with its options."""
    with _options_with_companions(demo) as (options, _):
        yield context_for(arrow_table(demo.table), **options)


def run_on_demonstration(rule: RuleLike, demo: Demonstration) -> "RuleOutcome":
    """What ``rule``, with its default settings, finds in the demonstration's table.

    Messages name a companion table by its file name alone (``baseline.parquet``), not by its temporary folder.
    """
    with _options_with_companions(demo) as (options, folder):
        outcome = run_rule(rule, RuleSettings.defaults(rule), context_for(arrow_table(demo.table), **options))
    prefix = folder + os.sep
    findings = tuple(replace(f, message=f.message.replace(prefix, "")) for f in outcome.findings)
    return replace(outcome, findings=findings)


def check_demonstration(demo: Demonstration, **extra: Any) -> "Report":
    """The whole check of the demonstration's table, as `prefit check` would run it (``extra`` adds options)."""
    with _options_with_companions(demo) as (options, _):
        return check(arrow_table(demo.table), **{**options, **extra})

"""``prefit init``: a commented prefit.toml proposing the settings a table gives away.

The proposal runs one ordinary check of the table and reads its roles and
findings: the id column (unique text, or row numbers), a repeating id that
names groups of rows, columns left out of the design (dates, free text, row
numbers), whole numbers that look like category codes, stand-in codes for
missing values, and a date column the rows are ordered by. Nothing is decided
silently: every line says why it is there, and guesses are left commented out.
"""

from __future__ import annotations

import json
import re
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .errors import UsageProblem
from .options import options_from
from .pipeline import CheckRequest, run
from .reading import ReadOptions, read_table
from .roles import Kind, infer_kind, target_candidates

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _text(value: str) -> str:
    """A TOML basic string (JSON's string escapes are valid TOML)."""
    return json.dumps(value, ensure_ascii=False)


def _key(name: str) -> str:
    return name if _BARE_KEY.match(name) else _text(name)


def _code(value: Any) -> str:
    return _text(value) if isinstance(value, str) else f"{value:g}"


def _id_column(table: pa.Table, kinds: dict[str, Kind], target: str) -> tuple[str | None, str]:
    """A column that labels rows: unique text first, else a repeating text code (it then names groups)."""
    rows = table.num_rows
    repeating: list[tuple[int, str]] = []
    for name in table.column_names:
        if name == target or kinds[name] not in (Kind.TEXT, Kind.CATEGORICAL):
            continue
        column = table.column(name)
        distinct = int(pc.count_distinct(column).as_py() or 0)
        if column.null_count == 0 and distinct == rows:
            return name, "unique text on every row: it names the rows in findings"
        if column.null_count == 0 and 2 <= distinct <= rows // 2 and re.search(r"(^|_)(id|code|key)$", name.lower()):
            repeating.append((distinct, name))
    if repeating:
        distinct, name = max(repeating)
        return name, f"repeats: {distinct:,} values, each naming a group of rows (e.g. the days of one unit)"
    return None, ""


def _order_column(table: pa.Table, kinds: dict[str, Kind], group: str | None) -> str | None:
    """The first date column along which the rows run in order (within each group when there is one)."""
    for name in table.column_names:
        if kinds[name] is not Kind.DATETIME or table.column(name).null_count:
            continue
        seconds = np.asarray(pc.cast(pc.cast(table.column(name), pa.timestamp("s")), pa.int64()).to_numpy(zero_copy_only=False))
        if group is None:
            ordered = bool(np.all(np.diff(seconds) >= 0))
        else:
            labels = np.asarray(table.column(group).to_pylist(), dtype=object)
            ordered = all(bool(np.all(np.diff(seconds[labels == label]) >= 0)) for label in dict.fromkeys(labels.tolist()))
        if ordered:
            return name
    return None


def propose_config(path: str, target: str | None = None, sep: str | None = None, encoding: str | None = None) -> str:
    """The text of a commented prefit.toml for the table at ``path``.

    Parameters
    ----------
    path : str
        The table to learn from (any format ``prefit check`` reads).
    target : str, optional
        The response column; proposed from the numeric columns when absent (the last one).
    sep, encoding : str, optional
        How to read a text table, as for ``prefit check``.
    """
    table, info = read_table(path, ReadOptions(sep=sep, encoding=encoding or "utf-8"))
    guessed = target is None
    if target is None:
        usable = target_candidates(table)
        if not usable:
            raise UsageProblem(path, "has no numeric column to serve as the target", "convert the response to numbers, or name it with --target")
        target = usable[-1]
    kinds = {name: infer_kind(table.column(name), False) for name in table.column_names}
    id_column, id_reason = _id_column(table, kinds, target)
    read_settings = {"sep": sep, "encoding": encoding}
    report = run(CheckRequest(options_from(target=target, id=id_column, **read_settings), table=table, info=info))
    left_out = dict(report.design.left_out)
    codes = [f for f in report.findings if f.rule == "design.possible-code"]
    stand_ins = [f for f in report.findings if f.rule == "missingness.disguised-codes"]
    grouped = id_reason.startswith("repeats")
    order = _order_column(table, kinds, id_column if grouped else None)

    lines = [
        f"# prefit settings proposed by `prefit init` from {path} ({info.rows:,} rows, {info.columns:,} columns).",
        "# Review every line: prefit proposes, you decide. `prefit check TABLE` reads this file from here or any folder below.",
        "",
        f"# The response column{' (a guess: the last numeric column; change it if wrong)' if guessed else ''}.",
        f"target = {_text(target)}",
    ]
    if id_column is not None:
        lines += ["", f"# {id_column}: {id_reason}.", f"id = {_text(id_column)}"]
    if left_out:
        lines += ["", "# Left out of the design (prefit would leave them out anyway; listing them says so on purpose):"]
        lines += [f"#   {name}: {reason}" for name, reason in sorted(left_out.items())]
        lines.append("exclude = [" + ", ".join(_text(name) for name in sorted(left_out)) + "]")
    if codes:
        lines += ["", "# Whole numbers that may be codes of categories; uncomment if they are:"]
        lines += [f"#   {f.columns[0]}: {f.message}" for f in codes]
        lines.append("# categorical = [" + ", ".join(_text(f.columns[0]) for f in codes) + "]")
    if order is not None:
        where = "within each group of " + id_column if grouped and id_column else "down the table"
        lines += ["", f"# The rows run in {order} order {where}: residual autocorrelation is checked along it.", f"order = {_text(order)}"]
    lines += ["", "# The weakest grade that fails the check: blocks, misleads (default), weakens or note.", '# fail-at = "misleads"']
    if stand_ins:  # a table of its own: it comes last, after every plain key
        lines += ["", "# Values that look like stand-ins for missing values (delete a line if a value is real):", "[missing-codes]"]
        for finding in stand_ins:
            found = [c["value"] for c in finding.details.get("codes", [])] + list(finding.details.get("tokens", {}))
            lines.append(f"{_key(finding.columns[0])} = [" + ", ".join(_code(v) for v in found) + "]")
    lines.append("")
    return "\n".join(lines)

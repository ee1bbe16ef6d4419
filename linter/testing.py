"""A conformance kit for rules: run one rule against a battery of awkward tables.

Plugin authors call :func:`check_rule` from their own test suite, exactly as the
built-in rules are checked in prefit's::

    from prefit.testing import check_rule
    from my_rules import RULES

    def test_my_rules_conform():
        for rule in RULES:
            check_rule(rule)

A rule conforms when, on every table of the battery, it yields well-formed
findings or raises :class:`prefit.rule.NotApplicable`, never another exception;
leaves the shared arrays of the run context as it found them; and yields the same
findings when run again on a fresh context of the same table.
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Iterator, Mapping

import numpy as np

from .errors import UsageProblem
from .findings import Finding, Grade
from .pipeline import context_for
from .roles import Kind
from .rule import NotApplicable, RuleLike, RuleSettings
from .runner import require_fit

if TYPE_CHECKING:
    import pandas as pd

    from .context import RunContext

__all__ = ["AwkwardTable", "awkward_tables", "check_rule"]

ROWS = 40


@dataclass(frozen=True)
class AwkwardTable:
    """One case of the battery: a name, a table builder and the check options it is read with."""

    name: str
    build: Callable[[], "pd.DataFrame"]
    options: Mapping[str, Any] = field(default_factory=dict)


def _base(rows: int = ROWS, seed: int = 7) -> dict[str, Any]:
    """An invented, well-behaved table: energy, two numeric predictors and a three-level category."""
    rng = np.random.default_rng(seed)
    outdoor = rng.uniform(-5, 30, rows)
    doors = rng.integers(50, 800, rows).astype(float)
    kinds = np.array(["screw", "scroll", "reciprocating"])[np.arange(rows) % 3]
    energy = 4000 + 120 * outdoor + 3 * doors + rng.normal(0, 300, rows)
    return {"energy_kwh": energy, "outdoor_c": outdoor, "door_openings": doors, "compressor_type": kinds}


def _frame(columns: Mapping[str, Any]) -> "pd.DataFrame":
    import pandas as pd

    return pd.DataFrame(dict(columns))


def _with(**changes: Callable[[int], Any]) -> Callable[[], "pd.DataFrame"]:
    """A builder: the base table with some columns replaced or added (each a function of the row count)."""

    def build() -> "pd.DataFrame":
        columns = _base()
        for name, make in changes.items():
            columns[name] = make(ROWS)
        return _frame(columns)

    return build


def _rows(count: int) -> Callable[[], "pd.DataFrame"]:
    def build() -> "pd.DataFrame":
        return _frame(_base(rows=count))

    return build


def _no_complete_case() -> "pd.DataFrame":
    """Every row lacks one predictor: nothing is left after deleting incomplete rows."""
    columns = _base()
    odd = np.arange(ROWS) % 2 == 1
    columns["outdoor_c"] = np.where(odd, np.nan, columns["outdoor_c"])
    columns["door_openings"] = np.where(~odd, np.nan, columns["door_openings"])
    return _frame(columns)


def _read_only() -> "pd.DataFrame":
    """The base table whose numeric columns are backed by read-only arrays."""
    import pandas as pd

    columns = _base()
    for name, values in columns.items():
        if values.dtype.kind == "f":
            values.setflags(write=False)
    return pd.DataFrame({name: pd.Series(values, copy=False) for name, values in columns.items()})


def _spiked(value: float) -> Callable[[int], np.ndarray]:
    def make(rows: int) -> np.ndarray:
        column = np.zeros(rows)
        column[rows // 2] = value
        return column

    return make


def awkward_tables() -> tuple[AwkwardTable, ...]:
    """The battery, in a fixed order (all data invented)."""
    target = {"target": "energy_kwh"}
    return (
        AwkwardTable("plain", _rows(ROWS), target),
        AwkwardTable("one row", _rows(1), target),
        AwkwardTable("two rows", _rows(2), target),
        AwkwardTable("three rows", _rows(3), target),
        AwkwardTable("empty after deleting incomplete rows", _no_complete_case, target),
        AwkwardTable("all-missing predictor", _with(humidity_pct=lambda n: np.full(n, np.nan)), target),
        AwkwardTable("all-missing target", _with(energy_kwh=lambda n: np.full(n, np.nan)), target),
        AwkwardTable("constant predictor", _with(setpoint_c=lambda n: np.full(n, -22.0)), target),
        AwkwardTable("constant target", _with(energy_kwh=lambda n: np.full(n, 5000.0)), target),
        AwkwardTable("duplicated predictor", lambda: _frame({**_base(), "outdoor_copy": _base()["outdoor_c"]}), target),
        AwkwardTable("column of 1e300", _with(pallets_stored=lambda n: np.linspace(1, 2, n) * 1e300), target),
        AwkwardTable("column of 1e-300", _with(pallets_stored=lambda n: np.linspace(1, 2, n) * 1e-300), target),
        AwkwardTable("NaN and inf values", _with(pallets_stored=lambda n: np.tile([1.0, np.nan, np.inf, -np.inf, 2.0], n // 5 + 1)[:n]), target),
        AwkwardTable("1.9e12 beside zeros", _with(pallets_stored=_spiked(1.9e12)), target),
        AwkwardTable("5e-324 beside zeros", _with(pallets_stored=_spiked(5e-324)), target),
        AwkwardTable("categorical with one level", _with(compressor_type=lambda n: np.array(["screw"] * n)), target),
        AwkwardTable("text target", _with(energy_kwh=lambda n: np.array(["high", "low"] * (n // 2))), target),
        AwkwardTable("no intercept", _rows(ROWS), {**target, "intercept": False}),
        AwkwardTable("read-only arrays", _read_only, target),
    )


def _digest(context: "RunContext") -> str:
    """A digest of the shared arrays a rule could mutate: the table's columns and the design."""
    digest = hashlib.sha256()
    for column in context.table.column_names:
        if context.roles.kinds.get(column) in (Kind.NUMERIC, Kind.BOOLEAN):
            digest.update(np.ascontiguousarray(context.values(column)).tobytes())
    design = context.design
    for array in (design.X, design.y, design.positions):
        digest.update(np.ascontiguousarray(array).tobytes())
    return digest.hexdigest()



def _run(rule: RuleLike, settings: RuleSettings, context: "RunContext", case: str) -> tuple[Finding, ...] | None:
    """The rule's findings on one context (None when not applicable); any other exception fails the case."""
    try:
        with np.errstate(all="ignore"):  # as the engine runs rules: overflow on extreme tables is reported by a rule
            require_fit(rule, context)
            produced = tuple(rule.check(context, settings))
    except NotApplicable:
        return None
    except Exception as exc:
        raise AssertionError(f"rule {rule.id} on the table {case!r}: raised {type(exc).__name__}: {exc}") from exc
    return produced


def _well_formed(rule: RuleLike, finding: object, case: str) -> None:
    """Raise AssertionError naming the case when a yielded object is not a well-formed finding of the rule."""
    where = f"rule {rule.id} on the table {case!r}"
    assert isinstance(finding, Finding), f"{where}: yielded {type(finding).__name__}, not a Finding"
    assert finding.rule == rule.id, f"{where}: yielded a finding of rule {finding.rule!r}"
    assert isinstance(finding.grade, Grade), f"{where}: grade {finding.grade!r} is not a Grade"
    assert finding.message.strip(), f"{where}: a finding without a message"
    for name in ("value", "threshold"):
        number = getattr(finding, name)
        assert number is None or math.isfinite(number) or math.isinf(number), f"{where}: {name} is NaN"
    assert all(isinstance(c, str) for c in finding.columns), f"{where}: columns must be strings"
    assert finding.row_count >= len(finding.rows), f"{where}: row_count {finding.row_count} < {len(finding.rows)} rows listed"
    try:
        json.dumps(finding.to_dict(), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise AssertionError(f"{where}: the finding does not serialise to plain JSON: {exc}") from exc


def _contexts(case: AwkwardTable) -> Iterator["RunContext"]:
    """Fresh contexts of one case, built the way the engine builds them; none when the engine rejects the table."""
    options = dict(case.options)
    target = options.pop("target")
    while True:
        try:
            yield context_for(case.build(), target, **options)
        except UsageProblem:
            return


def check_rule(rule: RuleLike, settings: RuleSettings | None = None) -> None:
    """Run ``rule`` against every awkward table; raise AssertionError naming the first failing case.

    Parameters
    ----------
    rule : RuleLike
        A built-in or plugin rule.
    settings : RuleSettings, optional
        The settings to run it with; the rule's defaults when omitted.

    Raises
    ------
    AssertionError
        When the rule raises anything but ``NotApplicable``, yields something that is not a well-formed
        finding of its own, changes the context's shared arrays, or gives different findings on a rerun.
    """
    settings = settings if settings is not None else RuleSettings.defaults(rule)
    for case in awkward_tables():
        contexts = _contexts(case)
        first = next(contexts, None)
        if first is None:
            continue
        before = _digest_or_none(first)
        findings = _run(rule, settings, first, case.name)
        if findings is None:
            continue
        for finding in findings:
            _well_formed(rule, finding, case.name)
        assert before == _digest_or_none(first), f"rule {rule.id} on the table {case.name!r}: changed the context's shared arrays"
        again = _run(rule, settings, next(contexts), case.name)
        first_dicts = [f.to_dict() for f in findings]
        again_dicts = [f.to_dict() for f in again or ()]
        assert first_dicts == again_dicts, f"rule {rule.id} on the table {case.name!r}: a rerun gave different findings"


def _digest_or_none(context: "RunContext") -> str | None:
    """The shared arrays' digest, or None when the table has no design to digest (the engine would reject it)."""
    try:
        return _digest(context)
    except (UsageProblem, NotApplicable):
        return None

"""Every built-in rule passes the public conformance kit (prefit.testing.check_rule)."""

from __future__ import annotations

import pytest

from prefit.registry import discover
from prefit.testing import awkward_tables, check_rule

RULES = list(discover())


@pytest.mark.parametrize("rule", RULES, ids=[rule.id for rule in RULES])
def test_built_in_rule_conforms(rule: object) -> None:
    check_rule(rule)  # type: ignore[arg-type]


def test_the_kit_names_the_failing_case() -> None:
    from prefit.rule import Rule

    def crashes_on_one_row(context, settings):  # type: ignore[no-untyped-def]
        if context.design.n == 1:
            raise ZeroDivisionError("one row")
        return iter(())

    rule = Rule(id="kit.crash", summary="s", why="w", remedy="r", check=crashes_on_one_row)
    with pytest.raises(AssertionError, match="'one row'.*ZeroDivisionError"):
        check_rule(rule)


def test_the_kit_catches_a_rule_that_mutates_the_design() -> None:
    from prefit.rule import Rule

    def scribbles(context, settings):  # type: ignore[no-untyped-def]
        x = context.design.X
        if x.size:
            x.setflags(write=True)
            x[0, 0] += 1.0
        return iter(())

    rule = Rule(id="kit.scribble", summary="s", why="w", remedy="r", check=scribbles)
    with pytest.raises(AssertionError, match="changed the context's shared arrays"):
        check_rule(rule)


def test_the_battery_covers_the_awkward_cases() -> None:
    names = {case.name for case in awkward_tables()}
    assert {"one row", "two rows", "read-only arrays", "1.9e12 beside zeros", "categorical with one level"} <= names


def test_the_example_plugin_passes_the_kit(monkeypatch: pytest.MonkeyPatch) -> None:
    from pathlib import Path

    monkeypatch.syspath_prepend(str(Path(__file__).resolve().parent / "plugin_example"))
    from prefit_example_rules import RULES as PLUGIN_RULES

    for rule in PLUGIN_RULES:
        check_rule(rule)

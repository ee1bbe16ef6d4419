"""A fast subset of the calibration study (benchmarks/calibration.py): clean tables pass, planted problems are caught.

The tables are simulated from a correctly specified linear model (the study's design families), so the reference
is the model itself: on a clean table a rule at ``weakens`` or above is a false alarm, and on a planted table the
intended rule must fire. The tolerances allow for the small sample: with 12 clean tables per family, a rule whose
true false-alarm rate is the 5% target fires on 2 or more of them with probability 0.12 (binomial), on 5 or more
with probability 0.0002, so the test fails only for rules clearly above the target.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path
from types import ModuleType

import pytest
import scipy.stats

STUDY = Path(__file__).resolve().parent.parent / "benchmarks" / "calibration.py"
CLEAN_TABLES = 12
ROWS, PREDICTORS = 300, 5


def _study() -> ModuleType:
    spec = importlib.util.spec_from_file_location("calibration_study", STUDY)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


study = _study()


def test_binomial_tolerance_is_honest() -> None:
    # source: scipy.stats.binom: 5 or more false alarms in 12 tables at a 5% rate is rare, 2 or more is not
    assert scipy.stats.binom.sf(4, CLEAN_TABLES, 0.05) < 0.001
    assert scipy.stats.binom.sf(1, CLEAN_TABLES, 0.05) > 0.1


@pytest.mark.parametrize("family", study.FAMILIES)
def test_clean_tables_pass_the_gate_and_no_rule_cries_wolf(family: str) -> None:
    outcomes = [study.run(*study.table(family, ROWS, PREDICTORS, None, rep)) for rep in range(CLEAN_TABLES)]
    assert not any(o.errored for o in outcomes)
    # the 2% gate target: 2 or more failures in 12 tables has probability 0.02 at a true rate of 2%
    assert sum(o.gate_failed for o in outcomes) <= 1
    loud: dict[str, int] = {}
    for outcome in outcomes:
        for rule, grade in outcome.grades.items():
            loud[rule] = loud.get(rule, 0) + study.at_least(grade, "weakens")
    assert {rule: count for rule, count in loud.items() if count >= 5} == {}


@pytest.mark.parametrize(
    "problem",
    ["exact-dependency", "near-collinear", "target-outlier", "unit-slip", "bad-leverage", "code-999", "target-leak", "duplicates"],
)
def test_planted_problem_is_caught_by_its_rule(problem: str) -> None:
    planted = {p.name: p for p in study.PROBLEMS}[problem]
    caught = [
        study.at_least(study.run(*study.table(family, ROWS, PREDICTORS, problem, rep)).grades.get(planted.rule), planted.grade)
        for family in study.FAMILIES
        for rep in (0,)
    ]
    assert all(caught)


def test_the_study_is_deterministic() -> None:
    first, _ = study.table("mixed", 100, 6, "unit-slip", 3)
    second, _ = study.table("mixed", 100, 6, "unit-slip", 3)
    assert first.equals(second)

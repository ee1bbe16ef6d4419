"""Classic regression datasets (benchmarks/classic.py) keep the default gate outcome their literature supports."""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path
from types import ModuleType

import pytest

SCRIPT = Path(__file__).resolve().parent.parent / "benchmarks" / "classic.py"


def _classic() -> ModuleType:
    spec = importlib.util.spec_from_file_location("classic_datasets", SCRIPT)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


classic = _classic()
BY_NAME = {d.name: d for d in classic.DATASETS}


@pytest.mark.parametrize(
    ("name", "fails", "rule"),
    [
        # source: Longley (1967), JASA 62, and Belsley, Kuh & Welsch (1980): the design is ill-conditioned
        ("longley", True, "collinearity.condition"),
        # source: Hawkins, Bradu & Kass (1984), Technometrics 26: rows 1-10 are bad leverage points that mask each other
        ("hbk", True, "influence.robust-distortion"),
        # source: Davis (1990); Fox (2016), Applied Regression Analysis, ch. 11: row 12's weight and height were swapped
        ("Davis", True, "outliers.studentized-residual"),
        # source: Daniel & Wood (1971), ch. 5: 21 rows and three predictors; its outliers are suggestive, not proof
        # at that size, and the small-sample planning criteria only inform under purpose explain
        ("stackloss", False, None),
        # source: Fox (2016), ch. 11: income and education fit prestige well once the unusual occupations are shown;
        # 45 rows for three parameters is enough to explain with (Austin & Steyerberg 2015)
        ("Duncan", False, None),
    ],
)
def test_classic_dataset_gate_outcome(name: str, fails: bool, rule: str | None) -> None:
    report = classic.check(BY_NAME[name])
    gating = {f.rule for f in report.findings if f.grade.word in ("blocks", "misleads")}
    assert (report.exit_code == 1) is fails
    if rule is not None:
        assert rule in gating
    # under the default purpose explain, the prediction-model planning criteria never fail the gate
    assert "sample-size.minimum" not in gating

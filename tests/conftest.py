"""Shared fixtures: run the command line in-process, reference-data paths, a fresh registry."""

from __future__ import annotations

import os

# Two cores: one BLAS thread per process keeps small linear algebra from oversubscribing them.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import io
import json
from contextlib import redirect_stderr, redirect_stdout
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, settings
from hypothesis.database import DirectoryBasedExampleDatabase

from prefit.cli import main
from prefit.registry import Registry, discover

ROOT = Path(__file__).resolve().parent.parent
SAMPLE_TABLES = ROOT / "sample_tables"
REFERENCE = Path(__file__).resolve().parent / "reference"

# Property tests: derandomised with a fixed number of examples by default (CI), so that a run cannot fail at random;
# PREFIT_EXPLORE=1 selects a randomised profile with many more examples (2,000 per test; PREFIT_EXPLORE=N sets N),
# for exploration (see DEVELOPERS.md).
_SLOW_FIXTURES = [HealthCheck.function_scoped_fixture, HealthCheck.too_slow, HealthCheck.data_too_large]
settings.register_profile("ci", derandomize=True, database=None, max_examples=60, deadline=None, suppress_health_check=_SLOW_FIXTURES)
_EXPLORE = os.environ.get("PREFIT_EXPLORE", "")
EXPLORING = _EXPLORE not in ("", "0")
settings.register_profile(
    "explore",
    derandomize=False,
    database=DirectoryBasedExampleDatabase(ROOT / ".hypothesis" / "examples"),
    max_examples=int(_EXPLORE) if _EXPLORE.isdigit() and int(_EXPLORE) > 1 else 2000,
    deadline=None,
    suppress_health_check=_SLOW_FIXTURES,
)
settings.load_profile("explore" if EXPLORING else "ci")


def examples(in_ci: int) -> int:
    """How many examples a property test draws: ``in_ci`` in CI, the exploration profile's count when exploring."""
    return settings.get_profile("explore").max_examples if EXPLORING else in_ci


@dataclass
class Run:
    """What one in-process run of the command line produced."""

    code: int
    out: str
    err: str

    def json(self) -> Any:
        return json.loads(self.out)

    def rules(self) -> list[str]:
        """Rule ids of the findings of a JSON report."""
        return [f["rule"] for f in self.json()["findings"]]


def run_cli(*args: str | os.PathLike[str]) -> Run:
    """Run ``prefit ARGS`` in this process, capturing stdout, stderr and the exit code."""
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main([str(a) for a in args])
    return Run(code, out.getvalue(), err.getvalue())


@pytest.fixture
def cli() -> Any:
    """The in-process command-line runner."""
    return run_cli


@pytest.fixture
def registry() -> Registry:
    """A fresh registry of every installed rule, per test."""
    return discover()


@pytest.fixture(autouse=True)
def _isolated_cwd(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """Run every test in an empty folder so that no stray prefit.toml is picked up; no colour."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("FORCE_COLOR", raising=False)
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "100")
    return tmp_path

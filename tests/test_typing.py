"""The engine and the built-in rules type-check under mypy's strict mode (configured in pyproject.toml)."""

from __future__ import annotations

import subprocess
import sys

from conftest import ROOT


def test_linter_and_rules_pass_strict_type_checking() -> None:
    run = subprocess.run(
        [sys.executable, "-m", "mypy", "--no-error-summary", "--cache-dir", str(ROOT / ".mypy_cache")],
        cwd=ROOT,
        capture_output=True,
        text=True,
    )
    assert run.returncode == 0, run.stdout + run.stderr

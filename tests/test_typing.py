"""The engine and the built-in rules type-check under mypy's strict mode (configured in pyproject.toml)."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

from conftest import ROOT


def test_linter_and_rules_pass_strict_type_checking(tmp_path: Path) -> None:
    # The source folders laid out as the installed package, so that every module has one name (prefit.*).
    package = tmp_path / "prefit"
    shutil.copytree(ROOT / "linter", package, ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copytree(ROOT / "rules", package / "rules", ignore=shutil.ignore_patterns("__pycache__"))
    run = subprocess.run(
        [sys.executable, "-m", "mypy", "--config-file", str(ROOT / "pyproject.toml"), "--no-error-summary", "-p", "prefit"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
    )
    assert run.returncode == 0, run.stdout + run.stderr

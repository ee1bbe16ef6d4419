"""The README's commands and examples agree with the program: flags exist, the quick start says what it prints."""

from __future__ import annotations

import re
import shlex
import subprocess
import sys

from conftest import ROOT, run_cli

import prefit

README = (ROOT / "README.md").read_text(encoding="utf-8")


def _blocks(language: str = "") -> list[str]:
    return re.findall(rf"```{language}\n(.*?)```", README, flags=re.DOTALL)


def test_every_flag_in_the_usage_synopsis_is_a_real_option() -> None:
    synopsis = next(block for block in _blocks() if block.startswith("prefit check TABLE")).split("\nprefit rules", 1)[0]
    flags = set(re.findall(r"--[a-z0-9-]+", synopsis))
    help_text = subprocess.run([sys.executable, "-m", "prefit", "check", "--help"], capture_output=True, text=True, check=True).stdout
    assert flags and {flag for flag in flags if flag not in help_text} == set()
    offered = set(re.findall(r"--[a-z0-9-]+", help_text)) - {"--help"}
    assert offered - flags == set()


def test_quick_start_check_prints_what_the_readme_says() -> None:
    command = next(block for block in _blocks() if "prefit check sample_tables/" in block)
    arguments = shlex.split(command.split("&& prefit ", 1)[1])
    run = run_cli(*arguments[:1], *(str(ROOT / a) if a.startswith("sample_tables/") else a for a in arguments[1:]))
    assert run.code == 1
    assert "NOT READY at gate misleads" in run.out
    assert " BLOCKS " in run.out and "collinearity.exact" in run.out and "collinearity.condition" in run.out


def test_python_example_runs_as_written() -> None:
    report = prefit.check(ROOT / "sample_tables" / "warehouse_submeters.csv", target="energy_kwh", id="site_id", exclude=["day"])
    assert report.worst_grade is not None and report.worst_grade.word == "blocks"
    assert report.to_sarif().lstrip().startswith("{")

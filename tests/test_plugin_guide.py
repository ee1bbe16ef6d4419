"""A plugin written from docs/plugins.md alone installs, appears in `prefit rules`, runs in `prefit check` and passes the kit.

The package is built from the guide's own code blocks (its pyproject.toml, its
rule module and its conformance test), so the guide cannot drift from what works.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
from conftest import ROOT

GUIDE = ROOT / "docs" / "plugins.md"


def _blocks(language: str) -> list[str]:
    return re.findall(rf"```{language}\n(.*?)```", GUIDE.read_text(encoding="utf-8"), flags=re.S)


def test_a_plugin_written_from_the_guide_installs_runs_and_conforms(tmp_path: Path) -> None:
    (toml,) = _blocks("toml")
    rule_code, kit_test = _blocks("python")
    package = tmp_path / "coldchain"
    (package / "coldchain_rules").mkdir(parents=True)
    (package / "pyproject.toml").write_text(toml, encoding="utf-8")
    (package / "coldchain_rules" / "__init__.py").write_text(rule_code, encoding="utf-8")
    site = tmp_path / "site"
    subprocess.run([sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--target", str(site), str(package)], check=True, capture_output=True, text=True)
    env = {**os.environ, "PYTHONPATH": str(site)}

    listing = subprocess.run([sys.executable, "-m", "prefit", "rules", "--format", "json"], capture_output=True, text=True, env=env, check=True)
    rules = {r["id"]: r for r in json.loads(listing.stdout)["rules"]}
    assert "coldchain.defrost-share" in rules and "coldchain-rules" in rules["coldchain.defrost-share"]["origin"]

    rng = np.random.default_rng(17)
    defrost = rng.uniform(30, 50, 200).round(1)
    table = tmp_path / "cold.csv"
    pd.DataFrame({"energy_kwh": (defrost + rng.uniform(40, 60, 200)).round(1), "defrost_kwh": defrost}).to_csv(table, index=False)
    checked = subprocess.run([sys.executable, "-m", "prefit", "check", str(table), "--target", "energy_kwh", "--format", "json"], capture_output=True, text=True, env=env)
    assert checked.returncode in (0, 1), checked.stderr
    findings = [f for f in json.loads(checked.stdout)["findings"] if f["rule"] == "coldchain.defrost-share"]
    assert len(findings) == 1 and findings[0]["grade"] == "weakens" and findings[0]["columns"] == ["defrost_kwh"]

    (tmp_path / "test_coldchain.py").write_text(kit_test, encoding="utf-8")
    kit = subprocess.run([sys.executable, "-c", "import test_coldchain; test_coldchain.test_rules_conform()"], capture_output=True, text=True, env={**env, "PYTHONPATH": f"{site}{os.pathsep}{tmp_path}"}, cwd=tmp_path)
    assert kit.returncode == 0, kit.stderr

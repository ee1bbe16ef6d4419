"""Every prefit module imports alone in a fresh interpreter: no import cycle hides behind the order other modules load in.

Every module counts: the core, the statistics, the rule families and their
teaching texts (a rule family imported first must not need the registry or an
engine to have been loaded before it).
"""

from __future__ import annotations

import pkgutil
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import prefit
import prefit.rules


def _modules() -> list[str]:
    names = ["prefit", "prefit.rules"]
    found_modules = [*pkgutil.walk_packages(prefit.__path__, "prefit."), *pkgutil.walk_packages(prefit.rules.__path__, "prefit.rules.")]
    for found in found_modules:
        if found.name != "prefit.__main__":
            names.append(found.name)
    return sorted(set(names))  # an installed (not editable) tree finds prefit.rules under prefit as well


def _import_alone(name: str) -> tuple[str, int, str]:
    done = subprocess.run([sys.executable, "-c", f"import {name}"], capture_output=True, text=True, timeout=300)
    return name, done.returncode, done.stderr.strip().splitlines()[-1] if done.stderr.strip() else ""


def test_the_core_modules_are_found() -> None:
    names = set(_modules())
    assert {"prefit.api", "prefit.pipeline", "prefit.outcome", "prefit.runner", "prefit.engines.memory", "prefit.engines.stream",
            "prefit.engines.dask", "prefit.engines.passes", "prefit.report.sarif", "prefit.testing", "prefit.stats.robust",
            "prefit.rules.outliers", "prefit.teaching.checking"} <= names


def test_each_module_imports_alone_in_a_fresh_interpreter() -> None:
    with ThreadPoolExecutor(max_workers=4) as pool:
        results = list(pool.map(_import_alone, _modules()))
    failed = [f"{name}: {last}" for name, code, last in results if code != 0]
    assert not failed, "\n".join(failed)


def _writer_modules() -> list[str]:
    return ["prefit.outcome", "prefit.figures", *(name for name in _modules() if name == "prefit.report" or name.startswith("prefit.report."))]


def test_the_report_model_and_its_writers_load_without_the_run_context() -> None:
    script = "import sys, importlib\nfor name in sys.argv[1:]:\n    importlib.import_module(name)\nprint('prefit.context' in sys.modules)\n"
    done = subprocess.run([sys.executable, "-c", script, *_writer_modules()], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0 and done.stdout.strip() == "False", done.stdout + done.stderr


def test_no_writer_names_the_run_context() -> None:
    # Writers draw from the report model alone (figure data included), not even for type hints.
    for path in sorted((Path(prefit.__file__).parent / "report").glob("*.py")):
        assert "RunContext" not in path.read_text(encoding="utf-8"), path.name

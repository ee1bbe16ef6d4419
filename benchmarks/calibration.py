"""Calibration study: how often each rule fires on clean tables, and whether it catches the problem it is for.

Run ``python benchmarks/calibration.py`` (3,800 s with ``--jobs 3`` on a shared two-core machine under a load of
about 10; 16 clean tables per target cell, 21 planted tables per problem at 300 and 5,000 rows), ``--quick`` for a
small subset, ``--jobs N`` for N worker processes (default 2), ``--reps N`` / ``--target-reps N`` to change the number of tables per cell, ``--sizes 300,5000`` to choose the row counts. Every table is simulated
from a correctly specified linear model (independent normal errors, R^2 about 0.5) over one of three design
families:

* ``normal``: independent normal predictors (mean 50, SD 10);
* ``mixed``: a log-normal amount, a 0/1 flag, a 4-level text category, a uniform share, a correlated pair
  (r = 0.6), then further normal predictors up to p;
* ``poisson``: Poisson counts with means between 3 and 20.

Each clean table is also checked with one planted problem (see ``PROBLEMS``: the rule and the grade each problem
is meant to draw). prefit runs in-process through the API (``prefit.check`` on a DataFrame, default settings).
Each table's random numbers come from a seed derived from its cell and replicate, so re-running gives the same
tables and the same results.

The study prints, per rule, the share of clean tables on which it fires at each grade and the share of clean
tables that fail the default gate, and per planted problem the share of tables on which the intended rule fires
at the intended grade or stronger; it writes ``benchmarks/results/calibration.json`` and
``benchmarks/results/calibration.md``. A share estimated from ``r`` tables has a Monte-Carlo standard error of
``sqrt(s (1 - s) / r)``: over the 306 clean tables of the target range, 1.2 percentage points at a true rate of 5%
and 0.8 at 2%; over one family's 102, 2.2 and 1.4. ``--render FILE`` rewrites the Markdown of an earlier result.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd

import prefit

RESULTS = Path(__file__).resolve().parent / "results"
FAMILIES = ("normal", "mixed", "poisson")
GRADES = ("blocks", "misleads", "weakens", "note")
R_SQUARED = 0.5
TARGET = "y"

#: Clean cells: (rows, predictors) per family, and the tables per cell in the default run.
CLEAN_SIZES = (30, 100, 300, 1_000, 5_000, 100_000)
CLEAN_WIDTHS = (3, 10, 30)
#: Planted cells: the row counts, and the number of predictors of every planted table.
PLANTED_SIZES = (100, 300, 5_000)
PLANTED_WIDTH = 5
DEFAULT_REPS = 8
#: Tables per clean cell in the target range (300 <= n < 100,000 and p <= 10) in the default run.
TARGET_REPS = 16
#: Tables per planted cell (family and row count) in the default run: three times this per problem and row count.
PLANTED_REPS = 4
#: Tables per planted cell at the target row counts (300 and 5,000): 21 per problem and row count, so that one
#: miss still leaves 95% (20 of 21).
PLANTED_TARGET_SIZES, PLANTED_TARGET_REPS = (300, 5_000), 7
#: Tables per cell at 100,000 rows (each takes seconds).
LARGE_ROWS, LARGE_REPS = 100_000, 3


# ---------------------------------------------------------------- clean tables


def _seed(*key: object) -> np.random.Generator:
    """A generator seeded from the cell and replicate, the same on every run and platform."""
    return np.random.default_rng(zlib.crc32(repr(key).encode()))


def predictors(family: str, n: int, p: int, rng: np.random.Generator) -> pd.DataFrame:
    """``p`` predictors of the design family (a categorical column counts as one predictor)."""
    columns: dict[str, Any] = {}
    if family == "normal":
        for j in range(p):
            columns[f"x{j + 1}"] = rng.normal(50.0, 10.0, n)
    elif family == "poisson":
        means = np.linspace(3.0, 20.0, p)
        for j in range(p):
            columns[f"count{j + 1}"] = rng.poisson(means[j], n).astype(float)
    elif family == "mixed":
        pair = rng.multivariate_normal([0.0, 0.0], [[1.0, 0.6], [0.6, 1.0]], n)
        makers: list[tuple[str, Callable[[], Any]]] = [
            ("amount", lambda: np.round(np.exp(rng.normal(3.0, 0.8, n)), 2)),
            ("flag", lambda: rng.integers(0, 2, n).astype(float)),
            ("region", lambda: rng.choice(np.array(["north", "south", "east", "west"]), n, p=[0.4, 0.3, 0.2, 0.1])),
            ("share", lambda: rng.uniform(0.0, 1.0, n)),
            ("pair_a", lambda: 20.0 + 4.0 * pair[:, 0]),
            ("pair_b", lambda: 10.0 + 2.0 * pair[:, 1]),
        ]
        for name, make in makers[:p]:
            columns[name] = make()
        for j in range(len(makers), p):
            columns[f"x{j + 1}"] = rng.normal(50.0, 10.0, n)
    else:
        raise ValueError(f"unknown design family {family!r}")
    return pd.DataFrame(columns)


def numeric_design(frame: pd.DataFrame) -> np.ndarray:
    """The predictors as numbers, each standardised, with indicator columns for text categories."""
    parts = []
    for name in frame.columns:
        column = frame[name]
        if not pd.api.types.is_numeric_dtype(column):
            parts.extend((column == level).to_numpy(dtype=float) for level in sorted(column.unique())[1:])
        else:
            parts.append(column.to_numpy(dtype=float))
    X = np.column_stack(parts)
    spread = X.std(axis=0)
    return (X - X.mean(axis=0)) / np.where(spread > 0, spread, 1.0)


def signal(frame: pd.DataFrame) -> np.ndarray:
    """The linear predictor: every standardised term weighted 1 (the response's scale is set by the noise)."""
    return numeric_design(frame).sum(axis=1)


def noise_sd(mean_part: np.ndarray) -> float:
    """The error SD that makes the population R^2 about ``R_SQUARED``."""
    return float(np.sqrt(max(mean_part.var(), 1e-12) * (1.0 - R_SQUARED) / R_SQUARED))


# ---------------------------------------------------------------- planted problems


@dataclass(frozen=True)
class Planted:
    """A problem planted in a clean table, and the rule and grade (or stronger) meant to report it."""

    name: str
    rule: str
    grade: str
    what: str


PROBLEMS = (
    Planted("near-collinear", "collinearity.condition", "misleads", "a copy of one predictor plus noise (r = 0.995): one near dependency, named with its VIFs"),
    Planted("exact-dependency", "collinearity.exact", "blocks", "a column that is the sum of two predictors"),
    Planted("target-outlier", "outliers.studentized-residual", "misleads", "one target value moved by 12 error SDs"),
    Planted("unit-slip", "outliers.univariate", "weakens", "1% of a positive predictor's values multiplied by 100"),
    Planted("bad-leverage", "influence.dfbetas", "misleads", "one row 8 SDs out in a predictor with its target 8 error SDs off the line"),
    Planted("mcar-holes", "missingness.column-rate", "weakens", "15% of one predictor missing completely at random"),
    Planted("response-holes", "missingness.informative", "misleads", "one predictor missing in half the rows with the target above its 70th percentile"),
    Planted("code-999", "missingness.disguised-codes", "misleads", "3% of one predictor replaced by -999"),
    Planted("three-close-values", "range.narrow", "weakens", "one predictor taking only the values 20.0, 20.1 and 20.2"),
    Planted("target-leak", "hygiene.target-leak", "misleads", "a predictor equal to the target plus 1% noise"),
    Planted("monotone-leak", "hygiene.target-leak", "misleads", "a predictor equal to exp of the standardised target"),
    Planted("duplicates", "hygiene.duplicate-rows", "weakens", "5% of the rows repeated exactly"),
    Planted("growing-spread", "assumptions.heteroscedasticity", "weakens", "a predictor uniform on 1-100 with error SD proportional to it"),
    Planted("omitted-curvature", "assumptions.nonlinearity", "weakens", "a squared term (SD 0.6 error SDs) left out of the model"),
    Planted("ar1-errors", "assumptions.autocorrelation", "misleads", "AR(1) errors (rho 0.6) in the order of a time column given as the order"),
    Planted("top-coded", "target.censored", "weakens", "the target capped at its 85th percentile"),
)
PROBLEM_NAMES = tuple(p.name for p in PROBLEMS)


def _numeric_names(frame: pd.DataFrame) -> list[str]:
    return [c for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c]) and frame[c].nunique() > 2]


def table(family: str, n: int, p: int, problem: str | None, rep: int) -> tuple[pd.DataFrame, dict[str, Any]]:
    """One simulated table (predictors and ``y``) and the check options for it; ``problem`` None for a clean table."""
    rng = _seed(family, n, p, problem, rep)
    frame = predictors(family, n, p, rng)
    numeric = _numeric_names(frame)
    first = numeric[0]
    options: dict[str, Any] = {}
    if problem == "three-close-values":
        frame[first] = 20.0 + 0.1 * rng.integers(0, 3, n)
    if problem == "growing-spread":
        frame[first] = rng.uniform(1.0, 100.0, n)
    mean_part = signal(frame)
    sd = noise_sd(mean_part)
    errors = rng.normal(0.0, sd, n)
    if problem == "growing-spread":
        errors *= frame[first].to_numpy() / 50.0
    if problem == "omitted-curvature":
        z = numeric_design(frame[[first]])[:, 0]
        mean_part = mean_part + 0.6 * sd * (z**2 - 1.0) / np.sqrt(2.0)
    if problem == "ar1-errors":
        rho, shocks, errors = 0.6, errors, np.empty(n)
        errors[0] = shocks[0]
        for i in range(1, n):
            errors[i] = rho * errors[i - 1] + np.sqrt(1.0 - rho**2) * shocks[i]
        frame["day"] = np.arange(n, dtype=float)
        options.update(order="day", exclude=["day"])
    y = 100.0 + 10.0 * (mean_part + errors)
    if problem == "target-outlier":
        y[rng.integers(n)] += 10.0 * 12.0 * sd
    if problem == "bad-leverage":
        row = int(rng.integers(n))
        column = frame[first].to_numpy(dtype=float)
        frame.loc[row, first] = float(np.median(column) + 8.0 * column.std())
        y[row] -= 10.0 * 8.0 * sd
    if problem == "top-coded":
        y = np.minimum(y, np.quantile(y, 0.85))
    frame[TARGET] = y
    if problem == "near-collinear":
        x = frame[first].to_numpy()
        frame["near_copy"] = x + rng.normal(0.0, x.std() * np.sqrt(1.0 / 0.995**2 - 1.0), n)
    elif problem == "exact-dependency":
        second = numeric[1] if len(numeric) > 1 else first
        frame["sum_ab"] = frame[first] + 2.0 * frame[second]
    elif problem == "unit-slip":
        positive = [c for c in numeric if (frame[c] > 0).all()] or [first]
        chosen = rng.choice(n, max(1, n // 100), replace=False)
        frame.loc[chosen, positive[0]] = frame.loc[chosen, positive[0]] * 100.0
    elif problem == "mcar-holes":
        frame.loc[rng.random(n) < 0.15, first] = np.nan
    elif problem == "response-holes":
        high = y > np.quantile(y, 0.7)
        frame.loc[high & (rng.random(n) < 0.5), first] = np.nan
    elif problem == "code-999":
        frame.loc[rng.choice(n, max(1, round(0.03 * n)), replace=False), first] = -999.0
    elif problem == "target-leak":
        frame["y_check"] = y + rng.normal(0.0, 0.01 * y.std(), n)
    elif problem == "monotone-leak":
        frame["y_index"] = np.exp((y - y.mean()) / y.std())
    elif problem == "duplicates":
        extra = frame.iloc[rng.choice(n, max(1, n // 20), replace=False)]
        frame = pd.concat([frame, extra], ignore_index=True).iloc[rng.permutation(n + len(extra))].reset_index(drop=True)
    return frame, options


# ---------------------------------------------------------------- running


@dataclass(frozen=True)
class Outcome:
    """What one check gave: the strongest grade per rule and whether the default gate failed."""

    grades: dict[str, str]
    gate_failed: bool
    errored: bool


def run(frame: pd.DataFrame, options: dict[str, Any]) -> Outcome:
    """prefit's default check of one table."""
    report = prefit.check(frame, target=TARGET, **options)
    strongest: dict[str, str] = {}
    for finding in report.findings:
        word = finding.grade.word
        if finding.rule not in strongest or GRADES.index(word) < GRADES.index(strongest[finding.rule]):
            strongest[finding.rule] = word
    return Outcome(strongest, report.exit_code == 1, report.exit_code == 3)


def at_least(grade: str | None, wanted: str) -> bool:
    """Whether ``grade`` is ``wanted`` or stronger."""
    return grade is not None and GRADES.index(grade) <= GRADES.index(wanted)


@dataclass
class CleanCell:
    family: str
    n: int
    p: int
    tables: int = 0
    gate_failed: int = 0
    errored: int = 0
    fired: dict[str, dict[str, int]] | None = None

    def add(self, outcome: Outcome) -> None:
        fired = self.fired if self.fired is not None else {}
        self.fired = fired
        self.tables += 1
        self.gate_failed += outcome.gate_failed
        self.errored += outcome.errored
        for rule, grade in outcome.grades.items():
            fired.setdefault(rule, dict.fromkeys(GRADES, 0))[grade] += 1

    def to_dict(self) -> dict[str, Any]:
        return {
            "family": self.family,
            "rows": self.n,
            "predictors": self.p,
            "tables": self.tables,
            "gate_failed": self.gate_failed,
            "errored": self.errored,
            "fired": {rule: counts for rule, counts in sorted((self.fired or {}).items())},
        }


def clean_cells(sizes: tuple[int, ...], widths: tuple[int, ...]) -> list[tuple[str, int, int]]:
    """The clean cells: every family, size and width with at least three rows per predictor."""
    return [(f, n, p) for n in sizes for p in widths for f in FAMILIES if n >= 3 * p and not (n >= LARGE_ROWS and p > 10)]


def _clean_outcome(task: tuple[str, int, int, int]) -> Outcome:
    family, n, p, rep = task
    return run(*table(family, n, p, None, rep))


def _planted_outcome(task: tuple[str, str, int, int]) -> Outcome:
    problem, family, n, rep = task
    return run(*table(family, n, PLANTED_WIDTH, problem, rep))


def _outcomes(function: Callable[[Any], Outcome], tasks: list[Any], jobs: int) -> list[Outcome]:
    """Each task's outcome, in task order; ``jobs`` worker processes (the tables are seeded per task, so the
    results do not depend on the number of workers)."""
    if jobs <= 1:
        return [function(task) for task in tasks]
    import multiprocessing

    with multiprocessing.get_context("fork").Pool(jobs, maxtasksperchild=50) as pool:
        return pool.map(function, tasks, chunksize=1)


def clean_reps(n: int, p: int, reps: int, target_reps: int) -> int:
    """Tables in one clean cell: ``target_reps`` in the target range (300 <= n < 100,000, p <= 10), else ``reps``."""
    if n >= LARGE_ROWS:
        return LARGE_REPS
    return target_reps if n >= 300 and p <= 10 else reps


def study(
    sizes: tuple[int, ...],
    widths: tuple[int, ...],
    planted_sizes: tuple[int, ...],
    reps: int,
    planted_reps: int,
    problems: tuple[str, ...] = PROBLEM_NAMES,
    log: Callable[[str], None] = print,
    target_reps: int | None = None,
    jobs: int = 1,
    planted_target_reps: int = 0,
) -> dict[str, Any]:
    """Run the clean and planted cells; return plain JSON data."""
    started = time.perf_counter()
    target_reps = reps if target_reps is None else target_reps
    cells = clean_cells(sizes, widths)
    tasks = [(f, n, p, rep) for f, n, p in cells for rep in range(clean_reps(n, p, reps, target_reps))]
    outcomes = iter(_outcomes(_clean_outcome, tasks, jobs))
    clean: list[dict[str, Any]] = []
    for family, n, p in cells:
        cell = CleanCell(family, n, p)
        for _ in range(clean_reps(n, p, reps, target_reps)):
            cell.add(next(outcomes))
        clean.append(cell.to_dict())
        log(f"clean {family:8s} n={n:>7,} p={p:>2}: gate failed {cell.gate_failed}/{cell.tables}")
    log(f"clean tables done ({time.perf_counter() - started:.0f} s)")
    chosen = [problem for problem in PROBLEMS if problem.name in problems]
    planted_cells = [(problem, n, family) for problem in chosen for n in planted_sizes for family in FAMILIES]
    def tables_in(n: int) -> int:
        if n >= LARGE_ROWS:
            return LARGE_REPS
        return max(planted_reps, planted_target_reps) if n in PLANTED_TARGET_SIZES else planted_reps

    tasks = [(problem.name, family, n, rep) for problem, n, family in planted_cells for rep in range(tables_in(n))]
    outcomes = iter(_outcomes(_planted_outcome, tasks, jobs))
    planted: list[dict[str, Any]] = []
    for problem, n, family in planted_cells:
        caught = exact = 0
        for _ in range(tables_in(n)):
            grade = next(outcomes).grades.get(problem.rule)
            caught += at_least(grade, problem.grade)
            exact += grade == problem.grade
        planted.append({"problem": problem.name, "family": family, "rows": n, "predictors": PLANTED_WIDTH, "tables": tables_in(n), "caught": caught, "exact_grade": exact})
    log(f"planted tables done ({time.perf_counter() - started:.0f} s)")
    return {
        "version": prefit.__version__,
        "r_squared": R_SQUARED,
        "seconds": round(time.perf_counter() - started),
        "jobs": jobs,
        "problems": [{"name": p.name, "rule": p.rule, "grade": p.grade, "what": p.what} for p in PROBLEMS],
        "clean": clean,
        "planted": planted,
    }


# ---------------------------------------------------------------- summaries


def clean_summary(result: dict[str, Any], min_rows: int = 300, max_predictors: int = 10) -> dict[str, Any]:
    """Over the clean cells in the target range: the gate failure share and, per rule, the share firing at each grade."""
    cells = [c for c in result["clean"] if c["rows"] >= min_rows and c["predictors"] <= max_predictors]
    tables = sum(c["tables"] for c in cells)
    rules: dict[str, dict[str, float]] = {}
    for cell in cells:
        for rule, counts in cell["fired"].items():
            row = rules.setdefault(rule, dict.fromkeys(GRADES, 0.0))
            for grade, count in counts.items():
                row[grade] += count / tables if tables else 0.0
    worst_gate = max((c["gate_failed"] / c["tables"] for c in cells), default=0.0)
    return {
        "tables": tables,
        "gate_failed": sum(c["gate_failed"] for c in cells) / tables if tables else 0.0,
        "worst_cell_gate_failed": worst_gate,
        "rules": dict(sorted(rules.items())),
    }


def weakens_or_above(counts: dict[str, int]) -> int:
    return sum(counts[g] for g in ("blocks", "misleads", "weakens"))


def planted_summary(result: dict[str, Any]) -> dict[str, dict[int, float]]:
    """Per problem and row count, the share of tables (over families) where the intended rule caught it."""
    out: dict[str, dict[int, list[int]]] = {}
    for row in result["planted"]:
        cell = out.setdefault(row["problem"], {}).setdefault(row["rows"], [0, 0])
        cell[0] += row["caught"]
        cell[1] += row["tables"]
    return {problem: {n: c / t for n, (c, t) in sorted(by_n.items())} for problem, by_n in out.items()}


def markdown(result: dict[str, Any], before: dict[str, Any] | None = None) -> str:
    """The study as Markdown tables (with a before column when ``before`` is given)."""
    lines = ["# Calibration", "", "Generated by `python benchmarks/calibration.py`; see its docstring for the simulation.", ""]
    lines += ["## Clean tables: gate failures", "", "| family | rows | predictors | tables | gate failed | rules at weakens or above (share of tables, > 5%) |", "|---|---:|---:|---:|---:|---|"]
    for cell in result["clean"]:
        loud = sorted(((rule, weakens_or_above(c) / cell["tables"]) for rule, c in cell["fired"].items()), key=lambda rc: (-rc[1], rc[0]))
        loud_text = ", ".join(f"`{rule}` {share:.0%}" for rule, share in loud if share > 0.05) or "none"
        lines.append(f"| {cell['family']} | {cell['rows']:,} | {cell['predictors']} | {cell['tables']} | {cell['gate_failed'] / cell['tables']:.1%} | {loud_text} |")
    summary = clean_summary(result)
    old = clean_summary(before) if before else None
    tables = summary["tables"]
    se = [100 * (s * (1 - s) / tables) ** 0.5 if tables else 0.0 for s in (0.02, 0.05)]
    lines += ["", f"## Clean tables, n >= 300 and p <= 10 ({tables} tables)", ""]
    lines += [f"Monte-Carlo standard error of a share over {tables} tables: {se[0]:.1f} percentage points at a true 2%, {se[1]:.1f} at 5%.", ""]
    header = "| rule | blocks | misleads | weakens | note |" + (" before: weakens or above |" if old else "")
    lines += [header, "|---|---:|---:|---:|---:|" + ("---:|" if old else "")]
    gate_before = f" (before {old['gate_failed']:.1%})" if old else ""
    lines.append(f"| **default gate failed** | | {summary['gate_failed']:.1%}{gate_before} | | |" + (" |" if old else ""))
    for rule, shares in summary["rules"].items():
        row = f"| `{rule}` | " + " | ".join(f"{shares[g]:.1%}" for g in GRADES) + " |"
        if old:
            previous = old["rules"].get(rule)
            row += f" {sum(previous[g] for g in ('blocks', 'misleads', 'weakens')):.1%} |" if previous else " - |"
        lines.append(row)
    lines += ["", "### By design family (n >= 300, p <= 10): share of clean tables at weakens or above", ""]
    by_family = {family: clean_summary({"clean": [c for c in result["clean"] if c["family"] == family]}) for family in FAMILIES}
    loud_rules = sorted({rule for f in by_family.values() for rule, shares in f["rules"].items() if sum(shares[g] for g in GRADES[:3]) > 0})
    lines += ["| family | tables | gate failed | " + " | ".join(f"`{rule}`" for rule in loud_rules) + " |", "|---|---:|---:|" + "---:|" * len(loud_rules)]
    for family, f in by_family.items():
        shares = [sum(f["rules"].get(rule, dict.fromkeys(GRADES, 0.0))[g] for g in GRADES[:3]) for rule in loud_rules]
        lines.append(f"| {family} | {f['tables']} | {f['gate_failed']:.1%} | " + " | ".join(f"{share:.1%}" for share in shares) + " |")
    caught = planted_summary(result)
    caught_before = planted_summary(before) if before else {}
    sizes = sorted({n for by_n in caught.values() for n in by_n})
    lines += ["", f"## Planted problems: share of tables where the intended rule fires at the intended grade or stronger (p = {PLANTED_WIDTH}, all families)", ""]
    lines += ["| problem | rule | grade | " + " | ".join(f"n = {n:,}" for n in sizes) + " |", "|---|---|---|" + "---:|" * len(sizes)]
    for problem in PROBLEMS:
        if problem.name not in caught:
            continue
        cells = []
        for n in sizes:
            share = caught[problem.name].get(n)
            text = "" if share is None else f"{share:.0%}"
            previous = caught_before.get(problem.name, {}).get(n)
            if previous is not None and share is not None:
                text += f" (before {previous:.0%})"
            cells.append(text)
        lines.append(f"| {problem.name} | `{problem.rule}` | {problem.grade} | " + " | ".join(cells) + " |")
    return "\n".join(lines) + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a small subset: n 300 and 1,000, p 3 and 10, 10 tables per cell")
    parser.add_argument("--reps", type=int, default=None, help=f"tables per clean cell (default {DEFAULT_REPS}; {LARGE_REPS} at {LARGE_ROWS:,} rows)")
    parser.add_argument("--target-reps", type=int, default=None, help=f"tables per clean cell in the target range, n >= 300 and p <= 10 (default {TARGET_REPS})")
    parser.add_argument("--planted-reps", type=int, default=None, help=f"tables per planted cell (default {PLANTED_REPS})")
    parser.add_argument("--jobs", type=int, default=2, help="worker processes (default 2; results do not depend on it)")
    parser.add_argument("--sizes", default=None, help="comma-separated row counts of the clean cells")
    parser.add_argument("--output", default=str(RESULTS / "calibration.json"), help="where to write the JSON (the Markdown goes beside it)")
    parser.add_argument("--before", default=str(RESULTS / "calibration_before.json"), help="an earlier result to compare with in the Markdown")
    parser.add_argument("--render", default=None, help="only write the Markdown of an earlier JSON result (no tables run)")
    args = parser.parse_args(argv)
    if args.render:
        rendered = Path(args.render)
        before_path = Path(args.before)
        before = json.loads(before_path.read_text()) if before_path.exists() and before_path.resolve() != rendered.resolve() else None
        rendered.with_suffix(".md").write_text(markdown(json.loads(rendered.read_text()), before))
        return 0
    sizes = tuple(int(s) for s in args.sizes.split(",")) if args.sizes else ((300, 1_000) if args.quick else CLEAN_SIZES)
    widths = (3, 10) if args.quick else CLEAN_WIDTHS
    planted_sizes = (300,) if args.quick else PLANTED_SIZES
    reps = args.reps if args.reps is not None else (10 if args.quick else DEFAULT_REPS)
    planted_reps = args.planted_reps if args.planted_reps is not None else (4 if args.quick else PLANTED_REPS)
    target_reps = args.target_reps if args.target_reps is not None else (reps if args.quick or args.reps is not None else TARGET_REPS)
    result = study(
        sizes, widths, planted_sizes, reps, planted_reps, log=lambda text: print(text, file=sys.stderr, flush=True), target_reps=target_reps, jobs=args.jobs,
        planted_target_reps=0 if args.quick or args.planted_reps is not None else PLANTED_TARGET_REPS,
    )
    output = Path(args.output)
    output.parent.mkdir(parents=True, exist_ok=True)
    output.write_text(json.dumps(result, indent=1, sort_keys=True) + "\n")
    before_path = Path(args.before)
    before = json.loads(before_path.read_text()) if before_path.exists() and before_path.resolve() != output.resolve() else None
    text = markdown(result, before)
    output.with_suffix(".md").write_text(text)
    print(text)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

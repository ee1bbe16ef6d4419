"""The whole collinearity family against statsmodels' per-column VIF, same process, same table.

prefit builds the design, factors it once (tall-skinny QR in row batches) and derives every VIF, GVIF,
correlation, condition index and the raw condition number from the p x p R factor; the baseline runs
statsmodels' ``variance_inflation_factor`` once per column (one auxiliary least-squares fit each) on the
numeric matrix already in memory. Prints the time ratio, the largest relative VIF disagreement and the
family's peak memory (numpy allocations seen by tracemalloc plus Arrow's pool) relative to the table's size.

Invented Gaussian data with planted correlated groups, fixed seed. At 1,000,000 x 50 the baseline is timed
on a few columns and scaled to all of them (each column costs one fit of the same size); ``--full-baseline``
times every column instead.

Run: ``python benchmarks/bench_collinearity.py`` (``--sizes 100000x20`` to choose sizes).
"""

from __future__ import annotations

import argparse
import gc
import time
import tracemalloc
import warnings

import numpy as np
import pyarrow as pa
from statsmodels.stats.outliers_influence import variance_inflation_factor
from statsmodels.tools import add_constant

from prefit.context import RunContext
from prefit.options import CheckOptions
from prefit.reading import TableInfo
from prefit.registry import discover
from prefit.roles import resolve_roles
from prefit.rule import RuleSettings

SEED = 20260601
SAMPLED_BASELINE_COLUMNS = 5
REPEATS = 7
BASELINE_REPEATS = 2


def invented_table(rows: int, predictors: int) -> pa.Table:
    """Predictors in correlated groups of four (one near-duplicate pair per group) and a linear target."""
    rng = np.random.default_rng(SEED)
    groups = -(-predictors // 4)
    latent = rng.standard_normal((rows, groups))
    columns: dict[str, np.ndarray] = {}
    for j in range(predictors):
        if j % 4 == 1:
            columns[f"x{j:02d}"] = columns[f"x{j - 1:02d}"] + 0.2 * rng.standard_normal(rows)
        else:
            columns[f"x{j:02d}"] = latent[:, j // 4] + rng.standard_normal(rows) + 10.0 * j
    X = np.column_stack(list(columns.values()))
    target = X @ rng.normal(size=predictors) + rng.standard_normal(rows)
    return pa.table({"energy_kwh": target, **columns})


def family(registry_rules: list, table: pa.Table) -> tuple[RunContext, list, tuple[float, float, float]]:
    """Run every collinearity rule on a fresh context; also return the seconds spent on design, QR and the rest."""
    start = time.perf_counter()
    options = CheckOptions(target="energy_kwh")
    info = TableInfo("<bench>", "memory", table.num_rows, table.num_columns, None)
    ctx = RunContext(table, info, resolve_roles(table, options), options)
    _ = ctx.design
    built = time.perf_counter()
    _ = ctx.factor
    factored = time.perf_counter()
    findings = [f for rule in registry_rules for f in rule.check(ctx, RuleSettings.defaults(rule))]
    return ctx, findings, (built - start, factored - built, time.perf_counter() - factored)


def baseline(exog: np.ndarray, columns: list[int]) -> np.ndarray:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return np.array([variance_inflation_factor(exog, i) for i in columns])


def run(rows: int, predictors: int, full_baseline: bool) -> None:
    table = invented_table(rows, predictors)
    rules = [rule for rule in discover() if rule.id.startswith("collinearity.")]
    table_bytes = table.nbytes

    ours, parts = float("inf"), (0.0, 0.0, 0.0)
    for _ in range(REPEATS):
        gc.collect()
        ctx, findings, split = family(rules, table)
        if sum(split) < ours:
            ours, parts = sum(split), split
        vifs = ctx.collinearity.vif.copy()
        del ctx
    gc.collect()
    arrow_before = pa.total_allocated_bytes()
    tracemalloc.start()
    options = CheckOptions(target="energy_kwh")
    ctx = RunContext(table, TableInfo("<bench>", "memory", table.num_rows, table.num_columns, None), resolve_roles(table, options), options)
    _ = ctx.design
    design_now, design_peak = tracemalloc.get_traced_memory()
    tracemalloc.reset_peak()
    for rule in rules:
        list(rule.check(ctx, RuleSettings.defaults(rule)))
    _, rules_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    arrow_extra = max(pa.total_allocated_bytes() - arrow_before, 0)
    numpy_peak = max(design_peak, rules_peak)
    del ctx
    gc.collect()

    exog = add_constant(np.column_stack([table.column(f"x{j:02d}").to_numpy() for j in range(predictors)]))
    chosen = list(range(1, predictors + 1))
    if not full_baseline and rows >= 1_000_000:
        chosen = chosen[:SAMPLED_BASELINE_COLUMNS]
    theirs = float("inf")
    for _ in range(BASELINE_REPEATS if len(chosen) == predictors else 1):
        start = time.perf_counter()
        reference = baseline(exog, chosen)
        theirs = min(theirs, (time.perf_counter() - start) * predictors / len(chosen))
    agreement = float(np.max(np.abs(vifs[[c - 1 for c in chosen]] / reference - 1)))

    scaled = "" if len(chosen) == predictors else f" (timed on {len(chosen)} columns, scaled to {predictors})"
    print(f"{rows:,} x {predictors}: table {table_bytes / 2**20:,.0f} MiB")
    print(
        f"  prefit collinearity family (design, QR, 5 rules, {len(findings)} findings; best of {REPEATS}): {ours:.3f} s "
        f"= design {parts[0]:.3f} + QR {parts[1]:.3f} + statistics and rules {parts[2]:.3f}"
    )
    print(f"  statsmodels variance_inflation_factor per column{scaled}, best of {BASELINE_REPEATS if not scaled else 1}: {theirs:.3f} s")
    print(
        f"  ratio: prefit is {theirs / ours:,.1f}x faster end to end ({theirs / parts[2]:,.0f}x once a run has built the "
        f"shared design and QR); largest relative VIF difference {agreement:.1e}"
    )
    print(
        f"  peak memory: {(numpy_peak + arrow_extra) / table_bytes:.2f}x the table ({(numpy_peak + arrow_extra) / 2**20:,.0f} MiB); "
        f"building the design (shared by every family) peaks at {design_peak / table_bytes:.2f}x and keeps "
        f"{design_now / table_bytes:.2f}x, the collinearity statistics and rules add {(rules_peak - design_now) / table_bytes:.2f}x on top"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="100000x20,1000000x50", help="comma-separated ROWSxPREDICTORS")
    parser.add_argument("--full-baseline", action="store_true", help="time statsmodels on every column at every size")
    args = parser.parse_args()
    for size in args.sizes.split(","):
        rows, predictors = (int(part) for part in size.lower().split("x"))
        run(rows, predictors, args.full_baseline)


if __name__ == "__main__":
    main()

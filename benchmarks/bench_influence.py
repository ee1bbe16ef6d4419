"""Influence and outlier measures: closed forms against one thin QR, and against statsmodels' leave-one-out route.

Run ``python benchmarks/bench_influence.py`` (``--rows`` to change the large size, ``--large-only`` to skip the
statsmodels comparison). Invented Gaussian data; every ratio is against a baseline timed in the same process. The
large table's design and fit are built before the clock starts (every family shares them); the QR baseline and
the families are each the best of five runs, the families on a fresh context each time. Both run with one BLAS
thread, as the rules do in a check (``api.report_for``), whatever the machine's thread settings.
"""

from __future__ import annotations

import argparse
import gc
import tracemalloc

import numpy as np
import pyarrow as pa
from timing import best_of

from prefit.context import RunContext
from prefit.options import CheckOptions
from prefit.reading import TableInfo
from prefit.registry import discover
from prefit.roles import resolve_roles
from prefit.rule import RuleSettings
from prefit.stats.blas import one_blas_thread

FAMILIES = ("influence", "outliers")
REPEATS = 5


def invented(rows: int, predictors: int, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = np.column_stack([np.ones(rows), rng.normal(size=(rows, predictors))])
    y = X @ rng.normal(size=predictors + 1) + rng.normal(size=rows)
    return X, y


def context(X: np.ndarray, y: np.ndarray) -> RunContext:
    columns = {f"x{j}": X[:, j] for j in range(1, X.shape[1])}
    table = pa.table({**columns, "y": y})
    options = CheckOptions(target="y")
    info = TableInfo(path="<bench>", format="memory", rows=table.num_rows, columns=table.num_columns, sha256=None)
    return RunContext(table=table, info=info, roles=resolve_roles(table, options), options=options)


def run_family(ctx: RunContext, families: tuple[str, ...]) -> None:
    for rule in discover():
        if rule.id.split(".")[0] in families:
            list(rule.check(ctx, RuleSettings.defaults(rule)))


def prepared(X: np.ndarray, y: np.ndarray) -> RunContext:
    """A fresh context whose design and fit (shared with every other family, not timed) are built."""
    ctx = context(X, y)
    _ = ctx.design.X
    _ = ctx.fit.coef
    return ctx


def family_parts(ctx: RunContext) -> dict[str, float]:
    """Seconds spent on the shared row statistics and on each family's rules, in the order a run needs them."""
    parts = {
        "shared hat values and residuals (RunContext.row_scores)": best_of(lambda: ctx.row_scores, 1),
        "shared influence measures (RunContext.influence)": best_of(lambda: ctx.influence, 1),
    }
    for family in FAMILIES:
        parts[f"{family} rules"] = best_of(lambda chosen=family: run_family(ctx, (chosen,)), 1)
    return parts


def family_peak(X: np.ndarray, y: np.ndarray) -> tuple[int, int]:
    """Bytes numpy holds once the design and fit are built, and its peak while both families run (tracemalloc)."""
    ctx = context(X, y)
    tracemalloc.start()
    _ = ctx.design.X
    _ = ctx.fit.coef
    held, _ = tracemalloc.get_traced_memory()
    tracemalloc.reset_peak()
    _ = ctx.row_scores, ctx.influence
    run_family(ctx, FAMILIES)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return held, peak


def large(rows: int, predictors: int) -> None:
    X, y = invented(rows, predictors)
    qr = best_of(lambda: np.linalg.qr(X, mode="r"), REPEATS)
    print(f"{rows:,} x {predictors} predictors: one thin QR of the design {qr:.2f} s (baseline, best of {REPEATS})")
    best: dict[str, float] | None = None
    for _ in range(REPEATS):
        gc.collect()
        parts = family_parts(prepared(X, y))
        if best is None or sum(parts.values()) < sum(best.values()):
            best = parts
    assert best is not None
    for label, spent in best.items():
        print(f"  {label:<56} {spent:.2f} s = {spent / qr:.2f} x the QR")
    total = sum(best.values())
    print(f"  {'both families with their shared statistics (best of ' + str(REPEATS) + ')':<56} {total:.2f} s = {total / qr:.2f} x the QR (target <= 3)")
    gc.collect()
    held, peak = family_peak(X, y)
    design_bytes = X.nbytes + y.nbytes
    print(
        f"  memory: the design holds {held / design_bytes:.2f}x its own size; both families peak at {peak / design_bytes:.2f}x "
        f"({peak / 2**20:,.0f} MiB; an n x n matrix would take {rows**2 * 8 / 2**40:,.1f} TiB)"
    )


def small(rows: int, predictors: int) -> None:
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import OLSInfluence

    X, y = invented(rows, predictors, seed=2)
    ctx = context(X, y)

    def by_hand() -> None:
        influence = OLSInfluence(sm.OLS(y, X).fit())
        _ = influence.resid_studentized_external, influence.dffits, influence.dfbetas, influence.cooks_distance

    def closed_form() -> None:
        fresh = context(X, y)
        _ = fresh.influence

    ours = best_of(closed_form, 3)
    theirs = best_of(by_hand, 1)
    print(f"{rows:,} x {predictors}: statsmodels OLSInfluence {theirs:.2f} s, closed forms (with the fit) {ours:.4f} s, ratio {theirs / ours:,.0f}")
    del ctx


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--predictors", type=int, default=20)
    parser.add_argument("--large-only", action="store_true", help="skip the statsmodels OLSInfluence comparison")
    args = parser.parse_args()
    with one_blas_thread():
        large(args.rows, args.predictors)
    if not args.large_only:
        for rows in (2_000, 10_000):
            small(rows, 10)


if __name__ == "__main__":
    main()

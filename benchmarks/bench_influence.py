"""Influence and outlier measures: closed forms against one thin QR, and against statsmodels' leave-one-out route.

Run ``python benchmarks/bench_influence.py`` (``--rows`` to change the large size). Invented Gaussian data;
every ratio is against a baseline timed in the same process.
"""

from __future__ import annotations

import argparse
import time
from typing import Callable

import numpy as np
import pyarrow as pa

from prefit.context import RunContext
from prefit.options import CheckOptions
from prefit.reading import TableInfo
from prefit.registry import discover
from prefit.roles import resolve_roles
from prefit.rule import RuleSettings


def timed(action: Callable[[], object], repeat: int = 1) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        action()
        best = min(best, time.perf_counter() - start)
    return best


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


def large(rows: int, predictors: int) -> None:
    X, y = invented(rows, predictors)
    qr = timed(lambda: np.linalg.qr(X, mode="r"), repeat=2)
    print(f"{rows:,} x {predictors} predictors: one thin QR of the design {qr:.2f} s (baseline)")
    ctx = context(X, y)
    _ = ctx.design.X
    _ = ctx.fit.coef
    scores = timed(lambda: ctx.row_scores)
    measures = timed(lambda: ctx.influence)
    print(f"  shared hat values and residuals (RunContext.row_scores)  {scores:.2f} s = {scores / qr:.2f} x the QR")
    print(f"  shared influence measures (RunContext.influence)          {measures:.2f} s = {measures / qr:.2f} x the QR")
    total = scores + measures
    for families in (("influence",), ("outliers",)):
        spent = timed(lambda: run_family(ctx, families))
        total += spent
        print(f"  {' + '.join(families) + ' rules':<56} {spent:.2f} s = {spent / qr:.2f} x the QR")
    print(f"  both families with their shared statistics               {total:.2f} s = {total / qr:.2f} x the QR")


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

    ours = timed(closed_form, repeat=3)
    theirs = timed(by_hand)
    print(f"{rows:,} x {predictors}: statsmodels OLSInfluence {theirs:.2f} s, closed forms (with the fit) {ours:.4f} s, ratio {theirs / ours:,.0f}")
    del ctx


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--predictors", type=int, default=20)
    args = parser.parse_args()
    large(args.rows, args.predictors)
    for rows in (2_000, 10_000):
        small(rows, 10)


if __name__ == "__main__":
    main()

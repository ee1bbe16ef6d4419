"""Time each stage and each rule of one in-memory check: where a large table's seconds go.

Run ``python benchmarks/profile_rules.py TABLE --target COL`` (e.g. a table made by ``bench_scale.py``).
Prints the shared statistics' times, the wait for the heavy imports (``prefit.preload``), then every rule slower
than ``--over`` seconds. As in a check (``api.report_for``), the imports are started after the read and the rules
run with one BLAS thread, so no rule is charged an import of scipy.stats or statsmodels.
"""

from __future__ import annotations

import argparse
import time

from prefit.api import build_context, options_from
from prefit.preload import imports_ready, warm_imports
from prefit.reading import read_table
from prefit.registry import discover
from prefit.runner import run_rule, select_rules
from prefit.stats.blas import one_blas_thread

SHARED = ("design", "factor", "fit", "row_scores", "influence", "holes")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("table")
    parser.add_argument("--target", required=True)
    parser.add_argument("--over", type=float, default=0.05, help="list rules slower than this many seconds")
    args = parser.parse_args()
    start = time.perf_counter()
    table, info = read_table(args.table)
    print(f"{'read':40s} {time.perf_counter() - start:7.3f}")
    warm_imports()
    options = options_from(target=args.target)
    context = build_context(table, info, options)
    for name in SHARED:
        start = time.perf_counter()
        getattr(context, name)
        print(f"{name:40s} {time.perf_counter() - start:7.3f}")
    start = time.perf_counter()
    imports_ready()
    print(f"{'imports (rest of the wait)':40s} {time.perf_counter() - start:7.3f}")
    total = 0.0
    with one_blas_thread():
        for rule, settings in select_rules(discover(), options):
            start = time.perf_counter()
            outcome = run_rule(rule, settings, context)
            spent = time.perf_counter() - start
            total += spent
            if spent > args.over:
                print(f"{rule.id:40s} {spent:7.3f} {outcome.error or ''}")
    print(f"{'all rules':40s} {total:7.3f}")


if __name__ == "__main__":
    main()

"""Time each stage and each rule of one in-memory check: where a large table's seconds go.

Run ``python benchmarks/profile_rules.py TABLE --target COL`` (e.g. a table made by ``bench_scale.py``).
Prints the shared statistics' times, the wait for the heavy imports (``prefit.preload``), then every rule slower
than ``--over`` seconds. As in a check (``api.report_for``), the imports are started after the read and the shared
statistics and the rules run with one BLAS thread, so no rule is charged an import of scipy.stats or statsmodels.
"""

from __future__ import annotations

import argparse
import time

from prefit.accepted import fingerprints
from prefit.api import build_context, options_from
from prefit.causes import find_causes
from prefit.findings import Finding, Grade
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
    warm_imports(table.num_columns)
    options = options_from(target=args.target)
    context = build_context(table, info, options)
    with one_blas_thread():  # as the rules see them (a many-threaded BLAS waits on a busy machine)
        for name in SHARED:
            start = time.perf_counter()
            getattr(context, name)
            print(f"{name:40s} {time.perf_counter() - start:7.3f}")
    start = time.perf_counter()
    imports_ready()
    print(f"{'imports (rest of the wait)':40s} {time.perf_counter() - start:7.3f}")
    total = 0.0
    selected = select_rules(discover(), options)
    findings = []
    with one_blas_thread():
        for rule, settings in selected:
            start = time.perf_counter()
            outcome = run_rule(rule, settings, context)
            spent = time.perf_counter() - start
            total += spent
            findings += outcome.findings
            if spent > args.over:
                print(f"{rule.id:40s} {spent:7.3f} {outcome.error or outcome.not_applicable or ''}"[:160])
    print(f"{'all rules':40s} {total:7.3f}")
    ordered = sorted(findings, key=Finding.sort_key)
    start = time.perf_counter()
    fingerprints(ordered, context)
    print(f"{'fingerprints':40s} {time.perf_counter() - start:7.3f}")
    start = time.perf_counter()
    causes = find_causes(context, selected, ordered)
    roots = sum(1 for f in ordered if f.grade >= Grade.WEAKENS)
    print(f"{'causes (' + str(roots) + ' findings at weakens or above)':40s} {time.perf_counter() - start:7.3f}")
    print(f"{len(ordered)} findings; fix first: {[ordered[i].rule for i in causes.fix_first]}")


if __name__ == "__main__":
    main()

"""What a baseline costs: writing a profile (``--save-baseline``) and checking against one (``--baseline``).

Run ``python benchmarks/bench_baseline.py`` (``--rows``, ``--columns``, ``--repeats``). The table is the invented
warehouse-like Parquet table of ``bench_scale.py`` (1,000,000 x 20 by default, cached under ``benchmarks/.tables``).
Three routes run as whole processes, alternating within each repeat: a plain check, the same check writing the
profile, and the same check against that profile (the table vetted against its own profile: the work is the same
as for a new extract). The script prints the medians of wall time and of CPU time (user + system, from ``wait4``:
less sensitive to other processes on a shared machine), their ratios to the plain check and the profile's size, and
writes them to ``benchmarks/results/baseline.json``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_scale import RESULTS, TIMED_ENVIRONMENT, generate, table_path

OUTPUT = RESULTS.parent / "baseline.json"


def run_process(command: list[str]) -> tuple[float, float]:
    """Wall time and CPU time (user + system) of one whole process, in seconds."""
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env={**os.environ, **TIMED_ENVIRONMENT})
    _, status, usage = os.wait4(child.pid, 0)
    elapsed = time.perf_counter() - start
    if os.waitstatus_to_exitcode(status) not in (0, 1):
        raise RuntimeError(f"{' '.join(command)} failed: {child.stderr.read().decode()[-500:] if child.stderr else ''}")
    return elapsed, usage.ru_utime + usage.ru_stime


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--columns", type=int, default=20)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    generate(args.rows, args.columns, ("parquet",))
    path = table_path(args.rows, args.columns, "parquet")
    with tempfile.TemporaryDirectory() as folder:
        profile = Path(folder) / "baseline.json"
        check = [sys.executable, "-m", "prefit", "check", str(path), "--target", "kwh", "--format", "json", "--no-config"]
        routes = {"plain check": check, "check + --save-baseline": [*check, "--save-baseline", str(profile)], "check + --baseline": [*check, "--baseline", str(profile)]}
        run_process(routes["check + --save-baseline"])
        wall: dict[str, list[float]] = {name: [] for name in routes}
        cpu: dict[str, list[float]] = {name: [] for name in routes}
        for _ in range(args.repeats):
            for name, command in routes.items():
                elapsed, used = run_process(command)
                wall[name].append(elapsed)
                cpu[name].append(used)
        size = profile.stat().st_size
    medians = {name: statistics.median(values) for name, values in wall.items()}
    cpu_medians = {name: statistics.median(values) for name, values in cpu.items()}
    plain, plain_cpu = medians["plain check"], cpu_medians["plain check"]
    result = {
        "table": f"{args.rows:,} x {args.columns} Parquet",
        "repeats": args.repeats,
        "median_wall_seconds": medians,
        "wall_ratio_to_plain_check": {name: value / plain for name, value in medians.items()},
        "median_cpu_seconds": cpu_medians,
        "cpu_ratio_to_plain_check": {name: value / plain_cpu for name, value in cpu_medians.items()},
        "profile_bytes": size,
    }
    for name in routes:
        print(f"{name:28s} wall {medians[name]:7.2f} s {medians[name] / plain:5.2f} x plain   cpu {cpu_medians[name]:7.2f} s {cpu_medians[name] / plain_cpu:5.2f} x plain")
    print(f"profile size: {size:,} bytes")
    OUTPUT.parent.mkdir(exist_ok=True)
    OUTPUT.write_text(json.dumps(result, indent=2) + "\n")


if __name__ == "__main__":
    main()

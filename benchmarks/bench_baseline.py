"""What a baseline costs: writing a profile (``--save-baseline``) and checking against one (``--baseline``).

Run ``python benchmarks/bench_baseline.py`` (``--rows``, ``--columns``, ``--repeats``). The table is the invented
warehouse-like Parquet table of ``bench_scale.py`` (1,000,000 x 20 by default, cached under ``benchmarks/.tables``).
Three routes run as whole processes, alternating within each repeat: a plain check, the same check writing the
profile, and the same check against that profile (the table vetted against its own profile: the work is the same
as for a new extract). The script prints the medians, the ratios to the plain check and the profile's size, and
writes them to ``benchmarks/results/baseline.json``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import tempfile
from pathlib import Path

from bench_scale import RESULTS, generate, run_process, table_path

OUTPUT = RESULTS.parent / "baseline.json"


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
        times: dict[str, list[float]] = {name: [] for name in routes}
        for _ in range(args.repeats):
            for name, command in routes.items():
                times[name].append(run_process(command)[0])
        size = profile.stat().st_size
    medians = {name: statistics.median(values) for name, values in times.items()}
    plain = medians["plain check"]
    result = {
        "table": f"{args.rows:,} x {args.columns} Parquet",
        "repeats": args.repeats,
        "median_seconds": medians,
        "ratio_to_plain_check": {name: value / plain for name, value in medians.items()},
        "profile_bytes": size,
    }
    for name, value in medians.items():
        print(f"{name:28s} {value:7.2f} s  {value / plain:5.2f} x plain")
    print(f"profile size: {size:,} bytes")
    OUTPUT.parent.mkdir(exist_ok=True)
    OUTPUT.write_text(json.dumps(result, indent=2) + "\n")


if __name__ == "__main__":
    main()

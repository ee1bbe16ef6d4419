"""Wide tables: prefit against the floor (read, one thin QR) for hundreds to thousands of predictors.

Run ``python benchmarks/bench_wide.py`` (``--only ROWSxCOLUMNS`` for one shape, ``--skip-largest`` to leave out
the 100,000 x 500 and 50 x 10,000 shapes, ``--repeats N`` to alternate floor and check N times and keep the
shortest times). Tables are invented standard normal noise (seeded, cached under
``benchmarks/.tables``): ``x0001 ... xP`` predictors, ten of them (evenly spaced) with 0.5% of their values missing at random, and a
noise target ``y``. Each route runs as a whole process (``wait4`` gives its CPU time and peak resident memory; the
one-minute load average at the start of each shape is recorded, since wall times on a shared machine grow with it, CPU
times much less); the check runs
with ``--format json`` (timed) and again as text, whose line count is recorded, and the findings at ``weakens`` or above
are counted by rule. Every rule runs, ``outliers.multivariate`` included; its robust covariance is also timed on its own
process (``robust``, given up after ``--robust-timeout`` seconds), to show what the high-dimension switch (OGK above
12 columns) costs.
Each shape records the targets it misses (``targets_missed``): time or memory over 3x the floor's, 2,000 x 1,000
over 2 GiB, 50 x 10,000 over 30 s, a text report of 150 lines or more. Results are printed and written to
``benchmarks/results/wide.json``.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections import Counter
from pathlib import Path

from bench_scale import TIMED_ENVIRONMENT

HERE = Path(__file__).resolve().parent
CACHE = HERE / ".tables"
RESULTS = HERE / "results" / "wide.json"
SHAPES = ((10_000, 200), (10_000, 1_000), (2_000, 1_000), (100_000, 500), (50, 10_000))
LARGEST = ((100_000, 500), (50, 10_000))
MISSING_SHARE = 0.005
STRONG = ("blocks", "misleads", "weakens")

FLOOR = r"""
import sys
import numpy as np
import pyarrow.csv as pacsv
table = pacsv.read_csv(sys.argv[1])
X = np.column_stack([column.to_numpy(zero_copy_only=False) for column in table.columns]).astype(np.float64)
X = X[np.isfinite(X).all(axis=1)]
r = np.linalg.qr(X, mode="r")
print(r.shape)
"""

ROBUST = r"""
import sys, time
from prefit.api import build_context, options_from
from prefit.reading import read_table
table, info = read_table(sys.argv[1])
context = build_context(table, info, options_from(target="y"))
context.design
start = time.perf_counter()
context.robust
print(time.perf_counter() - start)
"""


def table_path(rows: int, columns: int) -> Path:
    """Where the cached noise table of this shape lives."""
    return CACHE / f"noise_{rows}x{columns}.csv"


def generate(rows: int, columns: int) -> Path:
    """Write one noise table (``columns`` predictors and the target) unless it is cached."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.csv as pacsv

    path = table_path(rows, columns)
    if path.exists():
        return path
    CACHE.mkdir(exist_ok=True)
    rng = np.random.default_rng(rows * 100_000 + columns)
    X = rng.standard_normal((rows, columns))
    for j in range(0, columns, max(columns // 10, 1)):
        X[rng.random(rows) < MISSING_SHARE, j] = np.nan
    width = len(str(columns))
    data = {f"x{j + 1:0{width}d}": pa.array(X[:, j], from_pandas=True) for j in range(columns)}
    data["y"] = pa.array(rng.standard_normal(rows))
    pacsv.write_csv(pa.table(data), path)
    return path


def check_command(path: Path, fmt: str) -> list[str]:
    """The prefit command on one table in one output format."""
    return [sys.executable, "-m", "prefit", "check", str(path), "--target", "y", "--format", fmt, "--no-config"]


def timed_output(command: list[str], timeout: float | None = None) -> tuple[float, float, float, str]:
    """Wall time (s), CPU time (s, user + system), peak resident memory (MiB) and standard output of one whole process (exit 0 or 1).

    The CPU time is that of the process and its threads (``wait4``): on a machine shared with other work the wall time
    grows with the load, the CPU time much less. With a ``timeout`` the process is ended after that many seconds
    (``TimeoutError``) and its CPU time and memory are not measured.
    """
    import os
    import subprocess
    import tempfile
    import time

    with tempfile.TemporaryFile() as out:
        start = time.perf_counter()
        child = subprocess.Popen(command, stdout=out, stderr=subprocess.PIPE, env={**os.environ, **TIMED_ENVIRONMENT})
        if timeout is None:
            _, status, usage = os.wait4(child.pid, 0)
            code, cpu, peak = os.waitstatus_to_exitcode(status), usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024
        else:
            try:
                code, cpu, peak = child.wait(timeout), float("nan"), float("nan")
            except subprocess.TimeoutExpired:
                child.kill()
                child.wait()
                raise TimeoutError(command[-1]) from None
        elapsed = time.perf_counter() - start
        stderr = child.stderr.read().decode() if child.stderr else ""
        if code not in (0, 1):
            raise RuntimeError(f"{' '.join(command)} exited {code}: {stderr[-500:]}")
        out.seek(0)
        return elapsed, cpu, peak, out.read().decode()


TARGETS = {"time_over_floor": 3.0, "memory_over_floor": 3.0}
SHAPE_TARGETS = {(2_000, 1_000): ("prefit_peak_mib", 2_048.0), (50, 10_000): ("prefit_seconds", 30.0)}
TEXT_LINES_TARGET = 150


def measure(rows: int, columns: int, robust_timeout: float, repeats: int = 1) -> dict[str, object]:
    """Time and peak memory of the floor and of prefit on one shape, with the report's size and strong findings.

    With ``repeats`` above 1 the floor and the check alternate that many times and the shortest wall and CPU time
    and the largest peak memory of each are kept (on a shared machine the load moves from one run to the next).
    """
    import os
    import subprocess

    # Written by a child process: a process started from this one counts this one's resident memory in its peak
    # (the exec records the memory it replaces), so this process must stay small.
    command = f"import sys; sys.path.insert(0, {str(HERE)!r}); from bench_wide import generate; generate({rows}, {columns})"
    subprocess.run([sys.executable, "-c", command], check=True)
    path = table_path(rows, columns)
    load = os.getloadavg()[0]
    floors, checks = [], []
    for _ in range(repeats):
        floors.append(timed_output([sys.executable, "-c", FLOOR, str(path)]))
        checks.append(timed_output(check_command(path, "json")))
    floor_seconds, floor_cpu, floor_mib = min(r[0] for r in floors), min(r[1] for r in floors), max(r[2] for r in floors)
    seconds, cpu, mib, output = min(r[0] for r in checks), min(r[1] for r in checks), max(r[2] for r in checks), checks[0][3]
    report = json.loads(output)
    findings = report["findings"]
    strong = Counter(finding["rule"] for finding in findings if finding["grade"] in STRONG)
    text_lines = timed_output(check_command(path, "text"))[3].count("\n")
    try:
        robust: float | None = float(timed_output([sys.executable, "-c", ROBUST, str(path)], robust_timeout)[3].strip())
    except TimeoutError:
        robust = None
    row: dict[str, object] = {
        "rows": rows,
        "columns": columns,
        "file_mib": path.stat().st_size / 2**20,
        "load_average_at_start": load,
        "repeats": repeats,
        "floor_seconds": floor_seconds,
        "floor_cpu_seconds": floor_cpu,
        "floor_peak_mib": floor_mib,
        "prefit_seconds": seconds,
        "prefit_cpu_seconds": cpu,
        "prefit_peak_mib": mib,
        "time_over_floor": seconds / floor_seconds,
        "cpu_over_floor": cpu / floor_cpu,
        "memory_over_floor": mib / floor_mib,
        "robust_seconds": robust,
        "findings": len(findings),
        "strong_findings": dict(sorted(strong.items())),
        "text_lines": text_lines,
    }
    missed = [name for name, limit in TARGETS.items() if float(row[name]) > limit]  # type: ignore[arg-type]
    if (rows, columns) in SHAPE_TARGETS:
        name, limit = SHAPE_TARGETS[(rows, columns)]
        missed += [name] if float(row[name]) > limit else []  # type: ignore[arg-type]
    missed += ["text_lines"] if text_lines >= TEXT_LINES_TARGET else []
    row["targets_missed"] = missed
    print(
        f"{rows:>7,} x {columns:<6,} (load {load:4.1f}) floor {floor_seconds:6.2f} s ({floor_cpu:6.2f} s CPU) {floor_mib:6.0f} MiB"
        f"  prefit {seconds:6.2f} s ({cpu:6.2f} s CPU) {mib:6.0f} MiB  time {row['time_over_floor']:5.2f}x (CPU {row['cpu_over_floor']:5.2f}x)"
        f"  memory {row['memory_over_floor']:4.2f}x  (robust estimate alone: {'over the timeout' if robust is None else f'{robust:.2f} s'})"
        f"  text {text_lines} lines  findings {len(findings)}, weakens+ {dict(strong) or 'none'}  missed {missed or 'none'}",
        flush=True,
    )
    return row


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", metavar="ROWSxCOLUMNS", help="one shape, e.g. 2000x1000")
    parser.add_argument("--skip-largest", action="store_true", help="leave out 100,000 x 500 and 50 x 10,000")
    parser.add_argument("--robust-timeout", type=float, default=600.0, help="seconds to give the robust estimate alone")
    parser.add_argument("--repeats", type=int, default=1, help="alternate the floor and the check this many times; keep the shortest times")
    args = parser.parse_args()
    shapes = tuple(shape for shape in SHAPES if not (args.skip_largest and shape in LARGEST))
    if args.only:
        shapes = tuple(shape for shape in SHAPES if f"{shape[0]}x{shape[1]}" == args.only)
    results = [measure(rows, columns, args.robust_timeout, args.repeats) for rows, columns in shapes]
    RESULTS.parent.mkdir(exist_ok=True)
    previous = json.loads(RESULTS.read_text(encoding="utf-8")) if RESULTS.exists() else {"shapes": []}
    measured = {(row["rows"], row["columns"]) for row in results}
    kept = [row for row in previous["shapes"] if (row["rows"], row["columns"]) not in measured]
    ordered = sorted(kept + results, key=lambda row: SHAPES.index((row["rows"], row["columns"])))
    RESULTS.write_text(json.dumps({"environment": dict(TIMED_ENVIRONMENT), "shapes": ordered}, indent=2) + "\n", encoding="utf-8")
    print(f"written to {RESULTS.relative_to(HERE.parent)}")


if __name__ == "__main__":
    main()

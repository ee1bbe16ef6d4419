"""prefit against the floor (read, one thin QR, the Gram matrix) and against the by-hand pandas + statsmodels route.

Run ``python benchmarks/bench_scale.py`` (``--quick`` for the two smaller sizes, ``--memory`` for the
10,000,000 x 20 streaming peak-memory run, ``--repeats N``). Tables are invented warehouse-like data
(seeded, cached under ``benchmarks/.tables``): correlated predictors, 5% missing values in some columns, a few
gross errors and one 5-level category; ``kwh`` is the target. Each route runs as a whole process; routes
alternate within each repeat, and the table reports medians, the ratios, and peak resident memory (``wait4``).
Results are printed and written to ``benchmarks/results/scale.json``.

Every timed process runs with ``NUMPY_MADVISE_HUGEPAGE=0`` (``--numpy-hugepages`` keeps numpy's default). With
transparent huge pages in ``madvise`` mode, numpy asks the kernel for huge pages and the kernel compacts memory
to find them; how long that takes depends on the machine's memory state, not on the program (the floor alone
moved between 0.9 and 2.3 s from run to run on the 2-core test machine).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
CACHE = HERE / ".tables"
RESULTS = HERE / "results" / "scale.json"
SIZES = ((10_000, 10), (100_000, 20), (1_000_000, 20), (1_000_000, 50))
BY_HAND_MAX_ROWS = 10_000
ZONES = ("north", "south", "east", "west", "coast")
GENERATE_ROWS = 500_000


def table_path(rows: int, columns: int, fmt: str) -> Path:
    """Where the cached table of this size lives."""
    return CACHE / f"warehouse_{rows}x{columns}.{fmt}"


def generate(rows: int, columns: int, formats: tuple[str, ...] = ("parquet", "csv")) -> None:
    """Write the tables of one size (``columns`` counts the target and the category), in slices."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    CACHE.mkdir(exist_ok=True)
    paths = {fmt: table_path(rows, columns, fmt) for fmt in formats}
    if all(path.exists() for path in paths.values()):
        return
    rng = np.random.default_rng(rows * 1000 + columns)
    numeric = columns - 2
    mixing = rng.normal(0, 0.6, (numeric, numeric)) + np.eye(numeric)
    slope = rng.normal(0, 1, numeric)
    writer_pq = writer_csv = None
    try:
        for start in range(0, rows, GENERATE_ROWS):
            n = min(GENERATE_ROWS, rows - start)
            X = rng.normal(0, 1, (n, numeric)) @ mixing + 20
            zone = rng.choice(np.array(ZONES), n, p=[0.3, 0.25, 0.2, 0.15, 0.1])
            kwh = 500 + X @ slope + (zone == "coast") * 15 + rng.normal(0, 5, n)
            gross = rng.random(n) < 2e-5
            kwh[gross] *= 10
            for j in range(0, numeric, 3):
                X[rng.random(n) < 0.05, j] = np.nan
            data = {f"x{j + 1:02d}": pa.array(X[:, j], from_pandas=True) for j in range(numeric)}
            batch = pa.table({**data, "zone": zone, "kwh": kwh})
            if writer_pq is None:
                writer_pq = pq.ParquetWriter(paths["parquet"], batch.schema)
                writer_csv = pacsv.CSVWriter(paths["csv"], batch.schema) if "csv" in paths else None
            writer_pq.write_table(batch, row_group_size=GENERATE_ROWS)
            if writer_csv is not None:
                writer_csv.write_table(batch)
    finally:
        if writer_pq is not None:
            writer_pq.close()
        if writer_csv is not None:
            writer_csv.close()


FLOOR = r"""
import sys
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
path = sys.argv[1]
if path.endswith(".parquet"):
    import pyarrow.parquet as pq
    table = pq.read_table(path)
else:
    import pyarrow.csv as pacsv
    table = pacsv.read_csv(path)
names = [n for n, t in zip(table.column_names, table.schema.types) if pa.types.is_floating(t) or pa.types.is_integer(t)]
X = np.column_stack([table.column(n).to_numpy(zero_copy_only=False) for n in names]).astype(np.float64)
X = X[np.isfinite(X).all(axis=1)]
r = np.linalg.qr(X, mode="r")
gram = X.T @ X
print(r.shape, gram.shape)
"""

BY_HAND = r"""
import sys
import numpy as np
import pandas as pd
import statsmodels.api as sm
from statsmodels.stats.outliers_influence import OLSInfluence, variance_inflation_factor
path = sys.argv[1]
frame = pd.read_parquet(path) if path.endswith(".parquet") else pd.read_csv(path)
missing = frame.isna().sum()
complete = frame.dropna()
X = pd.get_dummies(complete.drop(columns="kwh"), drop_first=True, dtype=float)
X = sm.add_constant(X)
vif = [variance_inflation_factor(X.to_numpy(), j) for j in range(X.shape[1])]
fit = sm.OLS(complete["kwh"], X).fit()
influence = OLSInfluence(fit)
hat = influence.hat_matrix_diag
cooks = influence.cooks_distance[0]
student = influence.resid_studentized_external
dffits = influence.dffits[0]
print(len(vif), float(np.max(hat)), float(np.max(cooks)), float(np.max(np.abs(student))), float(np.max(np.abs(dffits))), int(missing.sum()))
"""


TIMED_ENVIRONMENT = {"NO_COLOR": "1", "NUMPY_MADVISE_HUGEPAGE": "0"}


def run_process(command: list[str]) -> tuple[float, float]:
    """Wall time (s) and peak resident memory (MiB) of one whole process."""
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env={**os.environ, **TIMED_ENVIRONMENT})
    _, status, usage = os.wait4(child.pid, 0)
    elapsed = time.perf_counter() - start
    stderr = child.stderr.read().decode() if child.stderr else ""
    code = os.waitstatus_to_exitcode(status)
    if code not in (0, 1):
        raise RuntimeError(f"{' '.join(command)} exited {code}: {stderr[-500:]}")
    return elapsed, usage.ru_maxrss / 1024


def routes(path: Path, rows: int) -> dict[str, list[str]]:
    """The command of each route for one table."""
    prefit = [sys.executable, "-m", "prefit", "check", str(path), "--target", "kwh", "--format", "json", "--no-config"]
    out = {"floor": [sys.executable, "-c", FLOOR, str(path)], "prefit": prefit}
    if rows <= BY_HAND_MAX_ROWS:
        out["by hand"] = [sys.executable, "-c", BY_HAND, str(path)]
    return out


def measure(sizes: tuple[tuple[int, int], ...], repeats: int) -> list[dict[str, object]]:
    """Median wall time and peak memory of every route on every table, routes alternating within each repeat."""
    results = []
    for rows, columns in sizes:
        generate(rows, columns)
        for fmt in ("parquet", "csv"):
            path = table_path(rows, columns, fmt)
            commands = routes(path, rows)
            times: dict[str, list[float]] = {name: [] for name in commands}
            memory: dict[str, float] = {name: 0.0 for name in commands}
            for _ in range(repeats):
                for name, command in commands.items():
                    elapsed, peak = run_process(command)
                    times[name].append(elapsed)
                    memory[name] = max(memory[name], peak)
            medians = {name: statistics.median(values) for name, values in times.items()}
            row: dict[str, object] = {"rows": rows, "columns": columns, "format": fmt, "seconds": medians, "peak_mib": memory}
            row["prefit_over_floor"] = medians["prefit"] / medians["floor"]
            if "by hand" in medians:
                row["by_hand_over_prefit"] = medians["by hand"] / medians["prefit"]
            results.append(row)
            print_row(row)
    return results


def print_row(row: dict[str, object]) -> None:
    seconds = row["seconds"]
    assert isinstance(seconds, dict)
    by_hand = f"{seconds['by hand']:8.2f}" if "by hand" in seconds else "       -"
    ahead = f"{row['by_hand_over_prefit']:8.1f}x" if "by_hand_over_prefit" in row else "        -"
    print(
        f"{row['rows']:>10,} x {row['columns']:<3} {row['format']:<8} floor {seconds['floor']:7.2f} s  prefit {seconds['prefit']:7.2f} s"
        f"  by hand {by_hand} s  prefit/floor {row['prefit_over_floor']:5.2f}x  by hand/prefit {ahead}",
        flush=True,
    )


def peak_memory_run(rows: int = 10_000_000, columns: int = 20) -> dict[str, object]:
    """The streaming engine on a table larger than its row budget: wall time and peak resident memory."""
    generate(rows, columns, ("parquet",))
    path = table_path(rows, columns, "parquet")
    command = [sys.executable, "-m", "prefit", "check", str(path), "--target", "kwh", "--format", "json", "--no-config", "--engine", "stream"]
    elapsed, peak = run_process(command)
    floor, floor_peak = run_process([sys.executable, "-c", FLOOR, str(path)])
    result = {"rows": rows, "columns": columns, "engine": "stream", "seconds": elapsed, "peak_mib": peak, "floor_seconds": floor, "floor_peak_mib": floor_peak, "file_mib": path.stat().st_size / 2**20}
    print(f"stream engine, {rows:,} x {columns} Parquet ({result['file_mib']:.0f} MiB): {elapsed:.1f} s, peak resident memory {peak:.0f} MiB (floor: {floor:.1f} s, {floor_peak:.0f} MiB)", flush=True)
    return result


def startup(repeats: int) -> float:
    """Median wall time of ``prefit --version``."""
    times = [run_process([sys.executable, "-m", "prefit", "--version"])[0] for _ in range(repeats)]
    value = statistics.median(times)
    print(f"prefit --version: {value * 1000:.0f} ms", flush=True)
    return value


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="only the two smaller sizes")
    parser.add_argument("--memory", action="store_true", help="also the 10,000,000 x 20 streaming peak-memory run")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--only", metavar="ROWSxCOLUMNS", help="one size, e.g. 1000000x20")
    parser.add_argument("--numpy-hugepages", action="store_true", help="keep numpy's default huge-page advice in the timed processes")
    args = parser.parse_args()
    if args.numpy_hugepages:
        del TIMED_ENVIRONMENT["NUMPY_MADVISE_HUGEPAGE"]
    sizes = SIZES[:2] if args.quick else SIZES
    if args.only:
        sizes = tuple(size for size in SIZES if f"{size[0]}x{size[1]}" == args.only)
    report: dict[str, object] = {"environment": dict(TIMED_ENVIRONMENT), "startup_seconds": startup(5), "tables": measure(sizes, args.repeats)}
    if args.memory:
        report["streaming_peak"] = peak_memory_run()
    RESULTS.parent.mkdir(exist_ok=True)
    RESULTS.write_text(json.dumps(report, indent=2) + "\n", encoding="utf-8")
    print(f"written to {RESULTS.relative_to(HERE.parent)}")


if __name__ == "__main__":
    main()

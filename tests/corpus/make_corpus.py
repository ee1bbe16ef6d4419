"""Write the fuzz corpus: small hostile or broken inputs, each with the options it is checked with.

Run ``python tests/corpus/make_corpus.py`` to (re)write ``tests/corpus/cases/``
and its ``manifest.json``; ``tests/test_corpus.py`` runs every case through
the command line. Each case is either a table prefit must report on (exit 0
or 1) or one it must refuse with exit 2 and one line naming the problem and
the fix. Large cases (a 5 MB cell, 10,000 columns, a 50,000-level category)
are not committed: :data:`LARGE_CASES` writes them at test time.

Every table here is invented, in the cold-storage warehouse scenario.
"""

from __future__ import annotations

import gzip
import json
import sys
from pathlib import Path
from typing import Callable

HERE = Path(__file__).resolve().parent
CASES = HERE / "cases"
REPORT, USAGE = "report", "usage"

GOOD = "energy_kwh,outdoor_c,door_openings\n" + "".join(f"{100 + 3 * i + (i % 4)},{i % 9 - 2},{(7 * i) % 11}\n" for i in range(24))
TARGET = ["--target", "energy_kwh"]


def _rows(header: str, make_row: Callable[[int], str], n: int = 24) -> str:
    return header + "\n" + "".join(make_row(i) + "\n" for i in range(n))


def _parquet_bytes() -> bytes:
    import io

    import pyarrow as pa
    import pyarrow.parquet as pq

    buffer = io.BytesIO()
    pq.write_table(pa.table({"energy_kwh": [1.0, 2.0, 4.0, 3.0], "outdoor_c": [1, 2, 3, 5]}), buffer)
    return buffer.getvalue()


HOSTILE_NAMES = [
    "<script>alert(1)</script>",
    "end]]>cdata",
    "\x1b[2J\x1b[H READY \x1b[8m",
    "bell\x07",
    "rlo\u202eevil",
    "pipe|`tick`",
    "line\nbreak",
    "tab\there",
    'quote"s',
    "N" * 5000,
]


def _hostile_names() -> str:
    quoted = ",".join('"' + name.replace('"', '""') + '"' for name in HOSTILE_NAMES)
    return _rows("energy_kwh," + quoted, lambda i: ",".join(str((i * (j + 3)) % 17 + j) for j in range(len(HOSTILE_NAMES) + 1)))


def table_cases() -> dict[str, tuple[str, bytes, list[str], str]]:
    """Name -> (file name, bytes, options, expected outcome)."""
    parquet = _parquet_bytes()
    return {
        # files
        "empty file": ("empty.csv", b"", TARGET, USAGE),
        "header only": ("header.csv", b"energy_kwh,outdoor_c\n", TARGET, USAGE),
        "one row": ("one_row.csv", b"energy_kwh,outdoor_c\n5,3\n", TARGET, REPORT),
        "one column": ("one_column.csv", _rows("energy_kwh", lambda i: str(i * 3 % 7)).encode(), TARGET, REPORT),
        "ragged rows": ("ragged.csv", b"energy_kwh,outdoor_c\n1,2\n3,4,5\n6,7\n", TARGET, USAGE),
        "unterminated quote": ("quote.csv", b'energy_kwh,outdoor_c\n1,2\n3,"4\n5,6\n7,8\n', TARGET, USAGE),
        "NUL bytes": ("nul.csv", GOOD.replace("\n1", "\n\x001", 3).encode(), TARGET, REPORT),
        "binary garbage named csv": ("garbage.csv", bytes(range(256)) * 8, TARGET, USAGE),
        "truncated parquet": ("truncated.parquet", parquet[: len(parquet) // 2], TARGET, USAGE),
        "wrong extension": ("parquet_named.csv", parquet, TARGET, REPORT),
        "gz that is not gzip": ("plain.csv.gz", GOOD.encode(), TARGET, USAGE),
        "truncated gz": ("cut.csv.gz", gzip.compress(GOOD.encode(), mtime=0)[:60], TARGET, USAGE),
        "latin-1 bytes in utf-8": ("latin.csv", GOOD.replace("door_openings", "t\xfcren").encode("latin-1"), TARGET, USAGE),
        "utf-16 with BOM": ("utf16.csv", GOOD.encode("utf-16"), TARGET, REPORT),
        "CR-only line ends": ("cr.csv", GOOD.replace("\n", "\r").encode(), TARGET, REPORT),
        "CRLF line ends": ("crlf.csv", GOOD.replace("\n", "\r\n").encode(), TARGET, REPORT),
        # names
        "duplicate column names": ("dup.csv", b"energy_kwh,a,a\n1,2,3\n4,5,6\n", TARGET, USAGE),
        "empty column name": ("unnamed.csv", _rows("energy_kwh,,outdoor_c", lambda i: f"{i * 2 % 9},{i % 5},{i % 7}").encode(), TARGET, REPORT),
        "hostile column names": ("hostile_names.csv", _hostile_names().encode(), TARGET, REPORT),
        "hostile id cells": (
            "hostile_ids.csv",
            _rows("site,energy_kwh,outdoor_c", lambda i: f'"{HOSTILE_NAMES[i % len(HOSTILE_NAMES)][:60]} {i}",{i * 3 % 11},{i % 7}'.replace('"quote"s', '"quote""s')).encode(),
            [*TARGET, "--id", "site"],
            REPORT,
        ),
        # values
        "all-missing target": ("target_missing.csv", _rows("energy_kwh,outdoor_c", lambda i: f",{i}").encode(), TARGET, REPORT),
        "constant target": ("target_constant.csv", _rows("energy_kwh,outdoor_c", lambda i: f"5,{i}").encode(), TARGET, REPORT),
        "text target": ("target_text.csv", _rows("energy_kwh,outdoor_c", lambda i: f"{'high' if i % 3 else 'low'},{i}").encode(), TARGET, REPORT),
        "inf and NaN strings": ("inf_nan.csv", _rows("energy_kwh,outdoor_c", lambda i: f"{i},{['inf', '-inf', 'NaN', 'nan', str(i)][i % 5]}").encode(), TARGET, REPORT),
        "1e308 and 1e-308": ("extremes.csv", _rows("energy_kwh,outdoor_c,tiny", lambda i: f"{i % 7},{'1e308' if i == 3 else i},{'1e-308' if i % 2 else '0'}").encode(), TARGET, REPORT),
        "mixed numbers and text": ("mixed.csv", _rows("energy_kwh,outdoor_c", lambda i: f"{i},{'n/a' if i % 6 == 0 else i % 5}").encode(), TARGET, REPORT),
        "dates with time zones": (
            "dates.csv",
            _rows("day,energy_kwh,outdoor_c", lambda i: f"2026-03-{i + 1:02d}T08:00:00{'+02:00' if i % 2 else 'Z'},{i * 5 % 13},{i % 6}").encode(),
            TARGET,
            REPORT,
        ),
        "decimal commas": ("decimal_comma.csv", _rows("energy_kwh;outdoor_c", lambda i: f"{i},5;{i % 4},25").encode(), TARGET, REPORT),
        "integers beyond int64": ("bigint.csv", _rows("energy_kwh,outdoor_c", lambda i: f"{i},{2**70 + i}").encode(), TARGET, REPORT),
        "identical rows": ("identical.csv", _rows("energy_kwh,outdoor_c", lambda i: "4,7").encode(), TARGET, REPORT),
        "two rows": ("two_rows.csv", b"energy_kwh,outdoor_c\n1,2\n3,5\n", TARGET, REPORT),
        "more columns than rows": ("wide_small.csv", _rows("energy_kwh," + ",".join(f"x{j}" for j in range(30)), lambda i: ",".join(str((i * j + j) % 13) for j in range(31)), n=8).encode(), TARGET, REPORT),
        # options
        "unknown target": ("good.csv", GOOD.encode(), ["--target", "energy"], USAGE),
        "target also excluded": ("good.csv", GOOD.encode(), [*TARGET, "--exclude", "energy_kwh"], USAGE),
        "id equal to target": ("good.csv", GOOD.encode(), [*TARGET, "--id", "energy_kwh"], USAGE),
        "predictor also excluded": ("good.csv", GOOD.encode(), [*TARGET, "--predictors", "outdoor_c", "--exclude", "outdoor_c"], USAGE),
        "malformed range": ("good.csv", GOOD.encode(), [*TARGET, "--range", "outdoor_c=1-5"], USAGE),
        "inverted range": ("good.csv", GOOD.encode(), [*TARGET, "--range", "outdoor_c=5:1"], USAGE),
        "malformed missing codes": ("good.csv", GOOD.encode(), [*TARGET, "--missing-codes", "outdoor_c"], USAGE),
        "malformed fail-at": ("good.csv", GOOD.encode(), [*TARGET, "--fail-at", "worst"], USAGE),
        "wrong separator": ("good.csv", GOOD.encode(), [*TARGET, "--sep", ";"], USAGE),
        "score table with other columns": ("good.csv", GOOD.encode(), [*TARGET, "--score", "{cases}/score_other.csv"], USAGE),
        "malformed TOML": ("good.csv", GOOD.encode(), [*TARGET, "--config", "{cases}/malformed.toml"], USAGE),
        "unknown config key": ("good.csv", GOOD.encode(), [*TARGET, "--config", "{cases}/unknown_key.toml"], USAGE),
        "nan threshold": ("good.csv", GOOD.encode(), [*TARGET, "--config", "{cases}/nan_threshold.toml"], USAGE),
        "binary config": ("good.csv", GOOD.encode(), [*TARGET, "--config", "{cases}/garbage.csv"], USAGE),
        "hand-edited accepted file": ("good.csv", GOOD.encode(), [*TARGET, "--accept-file", "{cases}/accepted_edited.json"], USAGE),
        "foreign accepted file": ("good.csv", GOOD.encode(), [*TARGET, "--accept-file", "{cases}/accepted_foreign.json"], USAGE),
        "accepted file of version true": ("good.csv", GOOD.encode(), [*TARGET, "--accept-file", "{cases}/accepted_true.json"], USAGE),
        "output onto the input": ("good.csv", GOOD.encode(), [*TARGET, "--output", "{cases}/good.csv"], USAGE),
    }


AUXILIARY: dict[str, bytes] = {
    "score_other.csv": b"humidity_pct,door_openings\n40,3\n55,2\n",
    "malformed.toml": b'target = "energy_kwh\n[rule\n',
    "unknown_key.toml": b'targett = "energy_kwh"\n',
    "nan_threshold.toml": b'[rule."collinearity.vif"]\nthresholds = {misleads = nan}\n',
    "accepted_edited.json": b'{"prefit_accepted": 1, "findings": [{"rule": "collinearity.vif", "grade": "severe", "columns": ["x"], "rows": null, "reason": "ok"}]}\n',
    "accepted_foreign.json": b'{"version": "2.1.0", "runs": []}\n',
    "accepted_true.json": b'{"prefit_accepted": true, "findings": []}\n',
}


def _five_megabyte_cell(folder: Path) -> Path:
    path = folder / "big_cell.csv"
    rows = [f"S{i},{100 + i % 9},{i % 7}" for i in range(24)]
    rows[0] = "S" + "x" * 5_000_000 + ",100,0"
    path.write_text("site,energy_kwh,outdoor_c\n" + "\n".join(rows) + "\n")
    return path


def _many_columns(folder: Path) -> Path:
    path = folder / "wide.csv"
    columns = 10_000
    header = "energy_kwh," + ",".join(f"sensor_{j:05d}" for j in range(columns))
    lines = [header] + [",".join(str((i * 31 + j * 17) % 97) for j in range(columns + 1)) for i in range(50)]
    path.write_text("\n".join(lines) + "\n")
    return path


def _many_levels(folder: Path) -> Path:
    path = folder / "levels.csv"
    path.write_text("energy_kwh,pallet,outdoor_c\n" + "".join(f"{i % 13},P{i:06d}x,{i % 7}\n" for i in range(50_000)))
    return path


LARGE_CASES: dict[str, tuple[Callable[[Path], Path], list[str], str]] = {
    "a 5 MB cell": (_five_megabyte_cell, [*TARGET, "--id", "site"], REPORT),
    "10,000 columns x 50 rows": (_many_columns, TARGET, REPORT),
    "a 50,000-level categorical": (_many_levels, [*TARGET, "--categorical", "pallet"], REPORT),
}


def write(folder: Path = CASES) -> dict[str, dict[str, object]]:
    """Write every small case and the manifest into ``folder``; return the manifest."""
    folder.mkdir(parents=True, exist_ok=True)
    manifest: dict[str, dict[str, object]] = {}
    for name, (file_name, content, args, expected) in sorted(table_cases().items()):
        (folder / file_name).write_bytes(content)
        manifest[name] = {"file": file_name, "args": args, "expect": expected}
    for file_name, content in AUXILIARY.items():
        (folder / file_name).write_bytes(content)
    (folder / "manifest.json").write_text(json.dumps(manifest, indent=1, ensure_ascii=False, sort_keys=True) + "\n")
    return manifest


if __name__ == "__main__":
    written = write(Path(sys.argv[1]) if len(sys.argv) > 1 else CASES)
    print(f"{len(written)} cases in {CASES}")

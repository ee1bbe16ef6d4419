"""Every supported format and encoding reads to the same typed table."""

from __future__ import annotations

import bz2
import gzip
import io
import json
import sys
from pathlib import Path

import pyarrow as pa
import pyarrow.feather as feather
import pyarrow.parquet as pq
import pytest
from conftest import run_cli

from prefit.reading import ReadOptions, read_table

ROWS = "site,energy_kwh,doors,frozen,kind\nA,10.5,3,true,screw\nB,12.0,4,false,scroll\nC,,5,true,screw\n"


def _check_types(table: pa.Table) -> None:
    assert table.column_names == ["site", "energy_kwh", "doors", "frozen", "kind"]
    assert pa.types.is_floating(table.schema.field("energy_kwh").type)
    assert pa.types.is_integer(table.schema.field("doors").type)
    assert pa.types.is_boolean(table.schema.field("frozen").type)
    assert table.column("energy_kwh").null_count == 1


@pytest.mark.parametrize(
    "name, payload",
    [
        ("t.csv", ROWS.encode()),
        ("t.tsv", ROWS.replace(",", "\t").encode()),
        ("t.txt", ROWS.replace(",", ";").encode()),
        ("t.psv", ROWS.replace(",", "|").encode()),
        ("t.csv", b"\xef\xbb\xbf" + ROWS.encode()),
        ("t.csv.gz", gzip.compress(ROWS.encode())),
        ("t.csv.bz2", bz2.compress(ROWS.encode())),
        ("t.data", gzip.compress(ROWS.encode())),
    ],
)
def test_text_formats(tmp_path: Path, name: str, payload: bytes) -> None:
    path = tmp_path / name
    path.write_bytes(payload)
    table, info = read_table(str(path))
    _check_types(table)
    assert info.format == "csv" and info.rows == 3


def test_zstd(tmp_path: Path) -> None:
    zstandard = pytest.importorskip("zstandard")
    path = tmp_path / "t.csv.zst"
    path.write_bytes(zstandard.ZstdCompressor().compress(ROWS.encode()))
    _check_types(read_table(str(path))[0])


def _arrow_table() -> pa.Table:
    from pyarrow import csv

    return csv.read_csv(io.BytesIO(ROWS.encode()))


def test_parquet_arrow_feather_jsonl(tmp_path: Path) -> None:
    table = _arrow_table()
    pq.write_table(table, tmp_path / "t.parquet")
    feather.write_feather(table, tmp_path / "t.feather")
    feather.write_feather(table, tmp_path / "t.bin")
    with open(tmp_path / "t.jsonl", "w") as handle:
        for row in table.to_pylist():
            handle.write(json.dumps(row) + "\n")
    for name, fmt in (("t.parquet", "parquet"), ("t.feather", "arrow"), ("t.bin", "arrow"), ("t.jsonl", "jsonl")):
        read, info = read_table(str(tmp_path / name))
        _check_types(read)
        assert info.format == fmt


def test_declared_encoding(tmp_path: Path) -> None:
    path = tmp_path / "latin.csv"
    path.write_bytes("site,energy_kwh\nMünchen,3\nKöln,4\n".encode("latin-1"))
    table, _ = read_table(str(path), ReadOptions(encoding="latin-1"))
    assert table.column("site").to_pylist() == ["München", "Köln"]


def test_sha256_is_of_the_file_bytes(tmp_path: Path) -> None:
    import hashlib

    path = tmp_path / "t.csv"
    path.write_text(ROWS)
    assert read_table(str(path))[1].sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_parquet_digest_read_in_blocks_is_the_sha256_of_the_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import hashlib

    import numpy as np

    import prefit.reading

    path = tmp_path / "t.parquet"
    pq.write_table(pa.table({"x": np.arange(5_000, dtype=float), "y": np.arange(5_000) % 7}), path)
    monkeypatch.setattr(prefit.reading, "DIGEST_BLOCK", 1_000)  # many blocks and a short last one
    assert path.stat().st_size % 1_000 != 0
    # reference: hashlib's SHA-256 of the whole file at once
    assert read_table(str(path))[1].sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_stdin(monkeypatch: pytest.MonkeyPatch) -> None:
    import numpy as np

    rng = np.random.default_rng(8)
    x = rng.uniform(0, 30, 400).round(2)
    y = (2.5 * x + rng.normal(0, 10, 400)).round(2)

    class FakeStdin:
        buffer = io.BytesIO(("y,x\n" + "".join(f"{a},{b}\n" for a, b in zip(y, x))).encode())

    monkeypatch.setattr(sys, "stdin", FakeStdin())
    run = run_cli("check", "-", "--target", "y", "--format", "json")
    assert run.code == 0, run.err
    report = run.json()
    assert report["table"]["path"] == "-" and report["table"]["rows"] == 400


def test_placeholders_stay_text(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_text("y,x\n1,NA\n2,3\n")
    table, _ = read_table(str(path))
    assert table.column("x").to_pylist() == ["NA", "3"]

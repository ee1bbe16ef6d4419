"""Reading a table from disk (or stdin) into a pyarrow Table, keeping exact types."""

from __future__ import annotations

import bz2
import csv
import gzip
import hashlib
import io
import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any, BinaryIO, Callable, TextIO

import pyarrow as pa

from .errors import UsageProblem

SNIFF_BYTES = 64 * 1024
CSV_BLOCK_BYTES = 1 << 24
UTF8_BOM = b"\xef\xbb\xbf"
UTF16_BOMS = (b"\xff\xfe", b"\xfe\xff")
GZIP_MAGIC = b"\x1f\x8b"
BZ2_MAGIC = b"BZh"
ZSTD_MAGIC = b"\x28\xb5\x2f\xfd"
PARQUET_MAGIC = b"PAR1"
ARROW_FILE_MAGIC = b"ARROW1"
ARROW_STREAM_MAGIC = b"\xff\xff\xff\xff"
TEXT_FORMATS = ("csv", "jsonl")


@dataclass(frozen=True)
class TableInfo:
    """Facts about the input: how it was named, what it holds, and its digest."""

    path: str
    format: str
    rows: int
    columns: int
    sha256: str | None


@dataclass(frozen=True)
class ReadOptions:
    """How to read a table: delimiter and encoding for text formats."""

    sep: str | None = None
    encoding: str = "utf-8"


def _format_from_name(name: str) -> tuple[str | None, str | None]:
    lowered = name.lower()
    compression = None
    for suffix, codec in ((".gz", "gzip"), (".bz2", "bz2"), (".zst", "zstd"), (".zstd", "zstd")):
        if lowered.endswith(suffix):
            compression = codec
            lowered = lowered[: -len(suffix)]
    for suffixes, fmt in (
        ((".parquet", ".pq"), "parquet"),
        ((".arrow", ".feather", ".ipc"), "arrow"),
        ((".jsonl", ".ndjson"), "jsonl"),
        ((".csv", ".tsv", ".txt", ".tab", ".psv"), "csv"),
    ):
        if lowered.endswith(suffixes):
            return fmt, compression
    return None, compression


def _format_from_bytes(head: bytes) -> tuple[str | None, str | None]:
    if head.startswith(PARQUET_MAGIC):
        return "parquet", None
    if head.startswith(ARROW_FILE_MAGIC) or head.startswith(ARROW_STREAM_MAGIC):
        return "arrow", None
    for magic, codec in ((GZIP_MAGIC, "gzip"), (BZ2_MAGIC, "bz2"), (ZSTD_MAGIC, "zstd")):
        if head.startswith(magic):
            return None, codec
    if head.lstrip().startswith(b"{"):
        return "jsonl", None
    return None, None


def _decompress(data: bytes, codec: str | None, where: str) -> bytes:
    if codec is None:
        return data
    try:
        if codec == "gzip":
            return gzip.decompress(data)
        if codec == "bz2":
            return bz2.decompress(data)
        stream = pa.input_stream(pa.py_buffer(data), compression="zstd")
        return bytes(stream.read())
    except (OSError, EOFError, ValueError, pa.ArrowException) as exc:
        raise codec_problem(codec, exc, where) from None


def codec_problem(codec: str, error: Exception, where: str) -> UsageProblem:
    """The one-line error for a compressed file that cannot be decompressed (truncated, or not of that format)."""
    first = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
    return UsageProblem(where, f"is not a readable {codec} file ({first})", "check that the file is complete and that its name ends with the right extension")


def _sniff_sep(text_head: str, where: str) -> str:
    sample = "\n".join(text_head.splitlines()[:50])
    try:
        return csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        return ","


def is_utf8(encoding: str) -> bool:
    """Whether ``encoding`` names UTF-8 (with or without BOM), which the readers take without transcoding."""
    return encoding.lower().replace("_", "-") in ("utf-8", "utf8", "utf-8-sig")


def resolve_sep(sep: str | None, text_head: str, where: str) -> tuple[str, list[str]]:
    """The delimiter (``sep``, or sniffed from ``text_head``) and the header row it splits, checked.

    Shared by the in-memory and streaming readers so that both accept and reject the same files.
    """
    if sep is None:
        sep = _sniff_sep(text_head, where)
    if sep == "\\t":
        sep = "\t"
    if len(sep) != 1:
        raise UsageProblem("--sep", f"must be one character, got {sep!r}", "use e.g. --sep ';' or --sep '\\t'")
    header = _header(text_head, sep)
    if len(header) == 1:
        other = _sniff_sep(text_head, where)
        if other != sep and len(_header(text_head, other)) > 1:
            raise UsageProblem(
                where, f"has one column when split at {sep!r} but {len(_header(text_head, other))} when split at {other!r}", f"give --sep {other!r} (or leave --sep out)"
            )
    _check_header(header, where)
    return sep, header


def _header(text_head: str, sep: str) -> list[str]:
    """The first record of ``text_head`` split at ``sep``; any line end (LF, CRLF, or CR alone) ends it."""
    try:
        return next(csv.reader(io.StringIO(text_head, newline=""), delimiter=sep), [])
    except csv.Error:
        return text_head.splitlines()[0].split(sep) if text_head.strip() else []


def csv_options(sep: str) -> dict[str, Any]:
    """pyarrow's read, parse and convert options (as keyword arguments) for delimited text.

    One definition, so that the in-memory and streaming readers infer the same types and missing values.
    """
    import pyarrow.csv as pacsv

    return {
        "read_options": pacsv.ReadOptions(block_size=CSV_BLOCK_BYTES),
        "parse_options": pacsv.ParseOptions(delimiter=sep),
        "convert_options": pacsv.ConvertOptions(null_values=[""], strings_can_be_null=True, quoted_strings_can_be_null=True),
    }


def is_arrow_file(source: pa.NativeFile) -> bool:
    """Whether ``source`` starts with the Arrow IPC file magic (else it is an IPC stream); leaves it at the start."""
    head = source.read(len(ARROW_FILE_MAGIC))
    source.seek(0)
    return bool(head == ARROW_FILE_MAGIC)


def open_arrow(source: pa.NativeFile) -> Any:
    """An IPC file or stream reader for ``source``, chosen by its magic bytes (Feather v2 is the IPC file format)."""
    import pyarrow.ipc as ipc

    return ipc.open_file(source) if is_arrow_file(source) else ipc.open_stream(source)


def utf16_bom(head: bytes) -> bool:
    """Whether ``head`` starts with a UTF-16 byte-order mark (either byte order)."""
    return head.startswith(UTF16_BOMS)


def _utf8_problem(data: bytes, error: UnicodeDecodeError, where: str) -> UsageProblem:
    line = data.count(b"\n", 0, error.start) + data.count(b"\r", 0, error.start) - data.count(b"\r\n", 0, error.start) + 1
    return UsageProblem(
        where,
        f"is not valid UTF-8 (byte {data[error.start]:#04x} on line {line})",
        "name the file's encoding with --encoding, e.g. --encoding latin-1",
    )


def check_utf8_head(head: bytes, where: str) -> None:
    """Raise the in-memory reader's error when the first bytes of a file are not UTF-8 (a character cut at the end is allowed)."""
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 3:
            raise _utf8_problem(head, exc, where) from None


def _check_encoding(data: bytes, encoding: str, where: str) -> bytes:
    """Return UTF-8 bytes (without BOM); any other encoding is transcoded when declared.

    A file that starts with a UTF-16 byte-order mark is read as UTF-16 even
    when no encoding is named: the mark says what it is.
    """
    if is_utf8(encoding) and utf16_bom(data):
        encoding = "utf-16"
    if is_utf8(encoding):
        if data.startswith(UTF8_BOM):
            data = data[3:]
        try:
            data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise _utf8_problem(data, exc, where) from None
        return data
    try:
        return data.decode(encoding).encode("utf-8")
    except LookupError:
        raise UsageProblem("--encoding", f"{encoding!r} is not a known encoding", "use e.g. utf-8, latin-1, cp1252") from None
    except UnicodeDecodeError as exc:
        raise UsageProblem(where, f"cannot be decoded as {encoding} ({exc.reason})", "name the right --encoding") from None


def _read_csv(data: bytes, options: ReadOptions, where: str) -> pa.Table:
    import pyarrow.csv as pacsv

    if not data.strip():
        raise UsageProblem(where, "is empty", "give a table with a header row and data rows")
    text_head = data[:SNIFF_BYTES].decode("utf-8", errors="ignore")
    sep, header = resolve_sep(options.sep, text_head, where)
    try:
        table = pacsv.read_csv(io.BytesIO(data), **csv_options(sep))
    except pa.ArrowInvalid as exc:
        raise csv_problem(exc, lambda: _text(data), sep, len(header), where) from None
    if data.count(b'"') % 2:
        check_quotes(_text(data), sep, where)
    return table


def _text(data: bytes) -> io.StringIO:
    return io.StringIO(data.decode("utf-8", errors="replace"), newline="")


def csv_problem(error: pa.ArrowInvalid, text: Callable[[], TextIO], sep: str, width: int, where: str) -> UsageProblem:
    """The one-line error for delimited text pyarrow could not parse; ``text`` opens the file as text to find the line.

    Shared by the in-memory and streaming readers so that both name the same line.
    """
    message = str(error)
    if "Expected" in message and "columns" in message:
        line, found = _first_ragged_line(text(), sep, width)
        return UsageProblem(
            where,
            f"line {line} has {found} fields where the header has {width}",
            "fix that line (a stray delimiter or an unquoted value) or give the right --sep",
        )
    if "Empty CSV file" in message:
        return UsageProblem(where, "is empty", "give a table with a header row and data rows")
    return UsageProblem(where, f"cannot be read as delimited text ({message.splitlines()[0]})", "check the file and --sep")


def check_quotes(text: TextIO, sep: str, where: str) -> None:
    """Raise when a quoted value opens and never closes, which would swallow the rest of the file into one value.

    Called only when the file holds an odd number of quote characters (a
    closed quote and a doubled quote inside one come in pairs; a quote
    inside an unquoted value, such as an inch mark, is legal and passes).
    """
    reader = csv.reader(text, delimiter=sep, strict=True)
    start = 1
    try:
        for _ in reader:
            start = reader.line_num + 1
    except csv.Error as exc:
        if "end of data" in str(exc) or "unexpected end" in str(exc):
            raise UsageProblem(
                where, f"line {start} opens a quoted value that never closes (the rest of the file would become one value)", "close the quote on that line or remove it"
            ) from None


def _first_ragged_line(text: TextIO, sep: str, width: int) -> tuple[int, int]:
    reader = csv.reader(text, delimiter=sep)
    for row in reader:
        if row and len(row) != width:
            return reader.line_num, len(row)
    return 0, width


def _check_header(header: list[str], where: str) -> None:
    seen: set[str] = set()
    for name in header:
        if name in seen:
            raise UsageProblem(where, f"has two columns named {name!r}", "rename one of them so every column name is unique")
        seen.add(name)


def _read_jsonl(data: bytes, where: str) -> pa.Table:
    import pyarrow.json as pajson

    if not data.strip():
        raise UsageProblem(where, "is empty", "give one JSON object per line")
    try:
        return pajson.read_json(io.BytesIO(data))
    except pa.ArrowInvalid as exc:
        raise UsageProblem(where, f"is not valid JSON Lines ({str(exc).splitlines()[0]})", "write one JSON object per line") from None


def _read_parquet(source: BinaryIO | str, where: str) -> pa.Table:
    import pyarrow.parquet as pq

    try:
        return pq.read_table(source)
    except (pa.ArrowInvalid, OSError) as exc:
        raise UsageProblem(where, f"is not a readable Parquet file ({str(exc).splitlines()[0]})", "re-export it or check that the copy is complete") from None


def _read_arrow(data: bytes, where: str) -> pa.Table:
    try:
        return open_arrow(pa.BufferReader(data)).read_all()
    except (pa.ArrowInvalid, OSError) as exc:
        raise UsageProblem(where, f"is not a readable Arrow IPC/Feather file ({str(exc).splitlines()[0]})", "re-export it") from None


def _read_arrow_file(path: str) -> pa.Table:
    try:
        # The table's buffers point into the read-only map, which stays open while they live.
        return open_arrow(pa.memory_map(path, "r")).read_all()
    except (pa.ArrowInvalid, OSError) as exc:
        raise UsageProblem(path, f"is not a readable Arrow IPC/Feather file ({str(exc).splitlines()[0]})", "re-export it") from None


def _load_bytes(path: str) -> bytes:
    if path == "-":
        return sys.stdin.buffer.read()
    file = Path(path)
    if not file.exists():
        raise UsageProblem(path, "does not exist", "check the path (relative paths start from the current directory)")
    if file.is_dir():
        raise UsageProblem(path, "is a folder, not a table file", "name one file (CSV, Parquet, Arrow, JSON Lines)")
    try:
        with open(file, "rb") as handle:
            return handle.read()
    except OSError as exc:
        raise UsageProblem(path, f"cannot be opened ({exc.strerror})", "check the file's permissions") from None


def _binary_format(path: str) -> str | None:
    """``parquet`` or ``arrow`` when ``path`` is a regular file starting with that format's magic bytes."""
    if path == "-" or not os.path.isfile(path):
        return None
    try:
        with open(path, "rb") as handle:
            head = handle.read(16)
    except OSError:
        return None
    fmt, _ = _format_from_bytes(head)
    return fmt if fmt in ("parquet", "arrow") else None


DIGEST_BLOCK = 16 * 2**20


def file_digest(path: str) -> str:
    """SHA-256 of the file's bytes, read in blocks of :data:`DIGEST_BLOCK` bytes.

    Hashing releases the interpreter lock for each block and must take it
    back after; with few, large blocks the digest does not queue behind the
    other threads of the run (a default 256 KiB block made it six times
    slower while another thread was busy).
    """
    digest = hashlib.sha256()
    block = bytearray(DIGEST_BLOCK)
    view = memoryview(block)
    with open(path, "rb", buffering=0) as handle:
        while size := handle.readinto(block):
            digest.update(view[:size])
    return digest.hexdigest()


def read_table(path: str, options: ReadOptions = ReadOptions()) -> tuple[pa.Table, TableInfo]:
    """Read ``path`` (``-`` for CSV on stdin) read-only and return the table with its facts.

    Parquet and Arrow files are read from the file itself (no copy of its bytes in memory); their digest is
    computed by streaming the file.
    """
    binary = _binary_format(path)
    if binary is not None:
        digest = file_digest(path)
        table = _read_parquet(path, path) if binary == "parquet" else _read_arrow_file(path)
        return _checked(table, path, binary, digest)
    raw = _load_bytes(path)
    if not raw:
        raise UsageProblem(path, "is empty", "give a table with a header row and data rows")
    digest = hashlib.sha256(raw).hexdigest()
    fmt, codec = _format_from_name(path) if path != "-" else (None, None)
    sniffed_fmt, sniffed_codec = _format_from_bytes(raw[:16])
    codec = sniffed_codec or (codec if sniffed_fmt is None else None)
    data = _decompress(raw, codec, path)
    if fmt is None or codec:
        content_fmt, _ = _format_from_bytes(data[:16])
        fmt = fmt or content_fmt
    if sniffed_fmt in ("parquet", "arrow"):
        fmt = sniffed_fmt
    fmt = fmt or "csv"
    if fmt == "parquet":
        table = _read_parquet(pa.BufferReader(data), path)
    elif fmt == "arrow":
        table = _read_arrow(data, path)
    else:
        data = _check_encoding(data, options.encoding, path)
        table = _read_jsonl(data, path) if fmt == "jsonl" else _read_csv(data, options, path)
    return _checked(table, path, fmt, digest)


def _checked(table: pa.Table, path: str, fmt: str, digest: str) -> tuple[pa.Table, TableInfo]:
    table = visible_names(table)
    _check_header(list(table.column_names), path)
    check_column_types(table.schema, path)
    table = decode_dictionaries(table)
    if table.num_columns == 0:
        raise UsageProblem(path, "has no columns", "give a table with a header row")
    if table.num_rows == 0:
        raise UsageProblem(path, "has a header but no data rows", "give a table with at least one data row")
    for name, column in zip(table.column_names, table.columns):
        if pa.types.is_binary(column.type) or pa.types.is_large_binary(column.type):
            raise UsageProblem(path, f"column {name!r} holds bytes that are not text", "name the file's encoding with --encoding")
    info = TableInfo(path=path, format=fmt, rows=table.num_rows, columns=table.num_columns, sha256=digest)
    return table, info


def unnamed(position: int) -> str:
    """The name shown for a column whose header is empty: its 1-based position."""
    return f"(unnamed column {position})"


def visible_names(table: pa.Table) -> pa.Table:
    """The table with every empty column name replaced by :func:`unnamed`, so that reports show it and options can name it."""
    names = list(table.column_names)
    if all(names):
        return table
    return table.rename_columns([name or unnamed(i + 1) for i, name in enumerate(names)])


def check_column_types(schema: pa.Schema, where: str) -> None:
    """Raise for a column of lists, records or maps (nested JSON Lines, Parquet or Arrow), which no design can use."""
    for field in schema:
        kind = field.type
        if pa.types.is_dictionary(kind):
            kind = kind.value_type
        if pa.types.is_nested(kind):
            raise UsageProblem(
                where, f"column {field.name!r} holds nested values ({kind}), which a linear model cannot use", "flatten it into plain columns, or drop it from the file"
            )


def decode_dictionaries(table: pa.Table) -> pa.Table:
    """The table with dictionary-encoded columns (pandas categoricals in Parquet, Arrow) decoded to their values."""
    for index, field in enumerate(table.schema):
        if pa.types.is_dictionary(field.type):
            table = table.set_column(index, field.name, table.column(index).cast(field.type.value_type))
    return table


def is_readable_file(path: str) -> bool:
    """Whether ``path`` names an existing regular file (or stdin)."""
    return path == "-" or os.path.isfile(path)

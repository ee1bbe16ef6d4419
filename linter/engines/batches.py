"""Reading a table file as a sequence of row batches, so that no more than one batch need be in memory.

Parquet is read row group by row group, Arrow IPC batch by batch (memory
mapped), delimited text with pyarrow's streaming reader (the same parser,
types and missing-value settings as :func:`prefit.reading.read_table`,
compressed or not). JSON Lines and stdin have no streaming reader here: they
are read whole and then cut into batches.
"""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from typing import Generator, Iterator, TextIO

import pyarrow as pa

from ..errors import UsageProblem
from ..reading import (
    SNIFF_BYTES,
    UTF8_BOM,
    ReadOptions,
    TableInfo,
    _check_header,
    _format_from_bytes,
    _format_from_name,
    check_column_types,
    check_quotes,
    check_utf8_head,
    codec_problem,
    csv_options,
    csv_problem,
    decode_dictionaries,
    file_digest,
    is_arrow_file,
    is_readable_file,
    is_utf8,
    open_arrow,
    read_table,
    resolve_sep,
    utf16_bom,
    visible_names,
)

ENGINES = ("memory", "stream", "dask")
AUTO_STREAM_BYTES = 1 << 30
BATCH_ROWS = 65_536
PARQUET_BUFFER = 1 << 20


@dataclass(frozen=True)
class BatchSource:
    """A table file read in row batches; :meth:`batches` may be called once per pass."""

    path: str
    format: str
    compression: str | None
    options: ReadOptions
    rows: int | None
    sep: str | None = None
    streamed: bool = True
    width: int = 0

    def batches(self, batch_rows: int = BATCH_ROWS) -> Generator[pa.Table, None, None]:
        """The table's rows in order, at most ``batch_rows`` at a time, as one-chunk tables (empty names made visible)."""
        for batch in self._read_batches(batch_rows):
            yield visible_names(batch)

    def _read_batches(self, batch_rows: int) -> Iterator[pa.Table]:
        if self.format == "parquet":
            import pyarrow.parquet as pq

            # Without pre-buffering and with a bounded read buffer, memory holds one row group's pages, not the file.
            with pq.ParquetFile(self.path, pre_buffer=False, buffer_size=PARQUET_BUFFER) as handle:
                for batch in handle.iter_batches(batch_size=batch_rows, use_threads=False):
                    yield decode_dictionaries(pa.Table.from_batches([batch]))
        elif self.format == "arrow":
            yield from self._arrow_batches(batch_rows)
        elif self.streamed:
            yield from self._csv_batches(batch_rows)
        else:
            table, _ = read_table(self.path, self.options)
            for batch in table.to_batches(max_chunksize=batch_rows):
                yield pa.Table.from_batches([batch], schema=table.schema)

    def _arrow_batches(self, batch_rows: int) -> Iterator[pa.Table]:
        import pyarrow.ipc as ipc

        with pa.memory_map(self.path, "r") as source:
            reader = open_arrow(source)
            is_file = isinstance(reader, ipc.RecordBatchFileReader)
            batches = (reader.get_batch(i) for i in range(reader.num_record_batches)) if is_file else iter(reader)
            for batch in batches:
                for start in range(0, batch.num_rows, batch_rows):
                    yield decode_dictionaries(pa.Table.from_batches([batch.slice(start, batch_rows)]))

    def _csv_batches(self, batch_rows: int) -> Iterator[pa.Table]:
        import pyarrow.csv as pacsv

        sep = self.sep or ","
        stream = pa.input_stream(self.path, compression=self.compression)
        last: pa.RecordBatch | None = None
        try:
            reader = pacsv.open_csv(stream, **csv_options(sep))
            for batch in reader:
                last = batch if batch.num_rows else last
                for start in range(0, batch.num_rows, batch_rows):
                    yield pa.Table.from_batches([batch.slice(start, batch_rows)])
        except pa.ArrowInvalid as exc:
            raise csv_problem(exc, self._text, sep, self.width, self.path) from None
        except OSError as exc:
            raise codec_problem(self.compression or "text", exc, self.path) from None
        finally:
            stream.close()
        if last is not None and _ends_inside_quotes(last):
            with self._text() as text:
                check_quotes(text, sep, self.path)

    def _text(self) -> TextIO:
        """The file (decompressed) as text with line ends kept, for finding the line of a parse error."""
        return io.TextIOWrapper(pa.input_stream(self.path, compression=self.compression), encoding="utf-8", errors="replace", newline="")

    def schema(self) -> pa.Schema:
        """The column names and types of the first batch."""
        batches = self.batches()
        try:
            first = next(batches, None)
        finally:
            batches.close()
        if first is None:
            raise UsageProblem(self.path, "has a header but no data rows", "give a table with at least one data row")
        return first.schema

    def info(self, rows: int, columns: int) -> TableInfo:
        """The table facts, with the file's digest computed by streaming its bytes."""
        return TableInfo(path=self.path, format=self.format, rows=rows, columns=columns, sha256=file_digest(self.path))


def _ends_inside_quotes(batch: pa.RecordBatch) -> bool:
    """Whether a text value of the last row holds a line end, as one does when a quote opens and never closes."""
    for column in batch.columns:
        if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
            value = column[batch.num_rows - 1].as_py()
            if value is not None and ("\n" in value or "\r" in value):
                return True
    return False


def open_batches(path: str, options: ReadOptions = ReadOptions()) -> BatchSource:
    """Open ``path`` for reading in batches: its format, compression, delimiter and column count, read-only."""
    if path == "-" or not is_readable_file(path):
        raise UsageProblem(path, "cannot be streamed (stdin or not a file)", "give a file path, or use --engine memory")
    with open(path, "rb") as handle:
        head = handle.read(SNIFF_BYTES)
    if not head:
        raise UsageProblem(path, "is empty", "give a table with a header row and data rows")
    fmt, codec = _format_from_name(path)
    sniffed_fmt, sniffed_codec = _format_from_bytes(head[:16])
    if sniffed_fmt in ("parquet", "arrow"):
        fmt, codec = sniffed_fmt, None
    codec = sniffed_codec or codec
    if fmt == "parquet":
        return _parquet_source(path, options)
    if fmt == "arrow":
        return _arrow_source(path, options)
    if fmt in (None, "csv") and is_utf8(options.encoding) and codec in (None, "gzip", "bz2", "zstd"):
        text = _head_text(path, codec) if codec else head
        content_fmt, _ = _format_from_bytes(text[:16])
        if text.startswith(UTF8_BOM) or utf16_bom(text) or content_fmt is not None:
            return BatchSource(path, content_fmt or "csv", None, options, None, streamed=False)
        check_utf8_head(text, path)
        sep, header = resolve_sep(options.sep, text.decode("utf-8", errors="ignore"), path)
        return BatchSource(path, "csv", codec, options, None, sep, width=len(header))
    return BatchSource(path, fmt or "csv", None, options, None, streamed=False)


def _head_text(path: str, codec: str) -> bytes:
    """The first :data:`SNIFF_BYTES` bytes of a compressed file, decompressed."""
    try:
        with pa.input_stream(path, compression=codec) as stream:
            return bytes(stream.read(SNIFF_BYTES))
    except (OSError, pa.ArrowInvalid) as exc:
        raise codec_problem(codec, exc, path) from None


def _parquet_source(path: str, options: ReadOptions) -> BatchSource:
    import pyarrow.parquet as pq

    try:
        with pq.ParquetFile(path) as handle:
            meta = handle.metadata
            _check_header(list(handle.schema_arrow.names), path)
            check_column_types(handle.schema_arrow, path)
            return BatchSource(path, "parquet", None, options, meta.num_rows)
    except (pa.ArrowInvalid, OSError) as exc:
        raise UsageProblem(path, f"is not a readable Parquet file ({str(exc).splitlines()[0]})", "re-export it or check that the copy is complete") from None


def _arrow_source(path: str, options: ReadOptions) -> BatchSource:
    import pyarrow.ipc as ipc

    try:
        with pa.memory_map(path, "r") as source:
            if not is_arrow_file(source):
                # An IPC stream has no footer: its row count is known only once it is read.
                return BatchSource(path, "arrow", None, options, None)
            reader = ipc.open_file(source)
            check_column_types(reader.schema, path)
            rows = sum(reader.get_batch(i).num_rows for i in range(reader.num_record_batches))
            return BatchSource(path, "arrow", None, options, rows)
    except (pa.ArrowInvalid, OSError) as exc:
        raise UsageProblem(path, f"is not a readable Arrow IPC/Feather file ({str(exc).splitlines()[0]})", "re-export it") from None


def file_bytes(path: str) -> int:
    """The size of a file on disk (0 for stdin)."""
    return os.path.getsize(path) if path != "-" and os.path.isfile(path) else 0


def choose_engine(requested: str, path: str) -> str:
    """The engine to use: as requested, or for ``auto`` streaming when the file is larger than ``AUTO_STREAM_BYTES``."""
    if requested not in ("auto", *ENGINES):
        raise UsageProblem(f"--engine {requested}", "is not an engine", f"use one of auto, {', '.join(ENGINES)}")
    if requested != "auto":
        return requested
    return "stream" if file_bytes(path) > AUTO_STREAM_BYTES else "memory"

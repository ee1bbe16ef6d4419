"""The Dask engine: the pass functions run per partition with ``map_partitions`` and merge as a tree on the cluster.

On a terminal each pass shows a bar of rows done as partitions finish.

Needs the ``prefit[dask]`` extra. Without ``--scheduler`` a local cluster of
two single-threaded worker processes on the loopback interface is started
for the run and closed after it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import TracebackType
from typing import Any, Callable, Sequence

import numpy as np
import pyarrow as pa

from ..errors import UsageProblem
from ..reading import ReadOptions, TableInfo
from .batches import BatchSource, open_batches

SPLIT_EVERY = 2
CSV_BLOCK = "64MB"
LOCAL_WORKERS = 2
CONNECT_TIMEOUT = "5s"
# The scheduler's HTTP server always starts (``None`` falls back to port 8787, shared by every cluster on the
# machine); port 0 on the loopback interface lets the system pick a free port, so no run waits on another's.
LOCAL_HTTP_ADDRESS = "127.0.0.1:0"


def _import_dask() -> Any:
    try:
        import dask.dataframe as dd
        import distributed
    except ImportError:
        raise UsageProblem("--engine dask", "needs Dask, which is not installed", "pip install 'prefit[dask]'") from None
    return dd, distributed


def _as_arrow(frame: Any, schema: pa.Schema) -> pa.Table:
    """A partition as an Arrow table with the file's column types."""
    table = pa.Table.from_pandas(frame, preserve_index=False).replace_schema_metadata(None)
    try:
        return table.cast(schema, safe=False)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError) as exc:
        raise UsageProblem("table", f"has a partition whose column types differ from the first rows ({str(exc).splitlines()[0]})", "give every column one type, or use --engine stream") from None


def _run_partition(frame: Any, task: Callable[[pa.Table, int], Any], offset: int, schema: pa.Schema) -> Any:
    return task(_as_arrow(frame, schema), offset)


def _merge_two(merge: Callable[[Sequence[Any]], Any], left: Any, right: Any) -> Any:
    return merge([left, right])


@dataclass
class DaskRunner:
    """Partitions of a Parquet or delimited-text file as a Dask dataframe; each pass is ``map_partitions`` and a tree of merges."""

    path: str
    options: ReadOptions
    scheduler: str | None = None
    progress: Callable[[str, int | None], Any] | None = None
    name: str = "dask"
    reads_in_process: bool = False
    _client: Any = field(default=None, init=False, repr=False)
    _cluster: Any = field(default=None, init=False, repr=False)
    _frame: Any = field(default=None, init=False, repr=False)
    _offsets: list[int] = field(default_factory=list, init=False, repr=False)
    _source: BatchSource | None = field(default=None, init=False, repr=False)
    _schema: pa.Schema | None = field(default=None, init=False, repr=False)

    def __enter__(self) -> "DaskRunner":
        dd, distributed = _import_dask()
        source = open_batches(self.path, self.options)
        if source.format not in ("parquet", "csv") or not source.streamed:
            raise UsageProblem(self.path, "cannot be split into Dask partitions", "give an uncompressed Parquet or delimited-text file, or use --engine stream")
        self._source, self._schema = source, source.schema()
        if self.scheduler is not None:
            try:
                self._client = distributed.Client(self.scheduler, timeout=CONNECT_TIMEOUT)
            except (OSError, TimeoutError) as exc:
                raise UsageProblem(f"--scheduler {self.scheduler}", f"cannot be reached ({exc})", "check the address, e.g. tcp://10.0.0.5:8786") from None
            except (ValueError, TypeError) as exc:
                raise UsageProblem(f"--scheduler {self.scheduler!r}", f"is not a scheduler address ({exc})", "write it as tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786") from None
        else:
            self._cluster = distributed.LocalCluster(n_workers=LOCAL_WORKERS, threads_per_worker=1, host="127.0.0.1", dashboard_address=LOCAL_HTTP_ADDRESS, processes=True)
            self._client = distributed.Client(self._cluster)
        if source.format == "parquet":
            self._frame = dd.read_parquet(self.path, dtype_backend="pyarrow")
        else:
            self._frame = dd.read_csv(
                self.path, sep=source.sep or ",", blocksize=CSV_BLOCK, engine="pyarrow", dtype_backend="pyarrow",
                keep_default_na=False, na_values=[""], compression=source.compression,
            )
        lengths = self._frame.map_partitions(len).compute()
        self._offsets = [0, *np.cumsum(np.asarray(lengths, dtype=np.int64)).tolist()]
        return self

    def __exit__(self, kind: type[BaseException] | None, value: BaseException | None, trace: TracebackType | None) -> None:
        if self._client is not None:
            self._client.close()
        if self._cluster is not None:
            self._cluster.close()

    def map_merge(self, task: Callable[[pa.Table, int], Any], merge: Callable[[Sequence[Any]], Any], label: str) -> Any:
        """``task`` on every partition (with its first table position), merged pairwise up a tree on the cluster.

        ``task`` and the schema are scattered to the cluster once; each partition's task refers to them.
        """
        from dask.delayed import delayed
        from distributed import as_completed

        # Sent to the cluster once and passed to every partition by reference, so the graph stays small
        # whatever the task closes over.
        shared_task, shared_schema = self._client.scatter([task, self._schema], hash=False)
        parts = self._frame.to_delayed()
        level = self._client.compute([delayed(_run_partition)(part, shared_task, offset, shared_schema) for part, offset in zip(parts, self._offsets)])
        if self.progress is not None:
            bar = self.progress(label, self._offsets[-1])
            rows = {future.key: self._offsets[i + 1] - self._offsets[i] for i, future in enumerate(level)}
            try:
                for done in as_completed(level):  # type: ignore[no-untyped-call]
                    bar.advance(rows[done.key])
            finally:
                bar.finish()
        while len(level) > 1:
            level = [
                self._client.submit(_merge_two, merge, level[i], level[i + 1], pure=False) if i + 1 < len(level) else level[i]
                for i in range(0, len(level), SPLIT_EVERY)
            ]
        return level[0].result()

    def info(self, rows: int, columns: int) -> TableInfo:
        assert self._source is not None
        return self._source.info(rows, columns)

    def columns(self) -> int:
        assert self._schema is not None
        return len(self._schema)

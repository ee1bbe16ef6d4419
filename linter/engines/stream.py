"""The stream engine's runner: the table file read one row batch at a time, in order, for each pass."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Sequence

import pyarrow as pa

from ..errors import UsageProblem
from ..reading import TableInfo
from .batches import BatchSource


@dataclass
class StreamRunner:
    """Batches read one at a time from the file, in order, with a progress bar per pass on a terminal."""

    source: BatchSource
    progress: Callable[[str, int | None], Any] | None = None
    name: str = "stream"
    reads_in_process: bool = True

    def map_merge(self, task: Callable[[pa.Table, int], Any], merge: Callable[[Sequence[Any]], Any], label: str) -> Any:
        results: list[Any] = []
        offset = 0
        bar = self.progress(label, self.source.rows) if self.progress is not None else None
        try:
            for batch in self.source.batches():
                results.append(task(batch, offset))
                offset += batch.num_rows
                if bar is not None:
                    bar.advance(batch.num_rows)
                # Merge as we go so that memory holds two results, not one per batch.
                if len(results) == 2:
                    results = [merge(results)]
        finally:
            if bar is not None:
                bar.finish()
        if not results:
            raise UsageProblem(self.source.path, "has a header but no data rows", "give a table with at least one data row")
        return merge(results)

    def info(self, rows: int, columns: int) -> TableInfo:
        return self.source.info(rows, columns)

    def columns(self) -> int:
        return len(self.source.schema())

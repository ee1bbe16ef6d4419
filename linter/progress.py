"""A progress bar on stderr while the rules run, drawn only when stderr is a terminal."""

from __future__ import annotations

import sys
from typing import IO, Callable, Protocol


class RunProgress(Protocol):
    """What a check reports while it runs: the start, each rule before it runs, the end."""

    def start(self, label: str, total: int) -> None: ...

    def advance(self, rule_id: str) -> None: ...

    def finish(self) -> None: ...


class TerminalProgress:
    """A transient rich progress bar: rules done of all, and the rule running now."""

    def __init__(self, stream: IO[str]) -> None:
        self.stream = stream
        self._bar: object | None = None

    def start(self, label: str, total: int) -> None:
        """Show the bar for one table."""
        from rich.console import Console
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeElapsedColumn,
        )

        bar = Progress(
            TextColumn("{task.description}"),
            BarColumn(),
            MofNCompleteColumn(),
            TimeElapsedColumn(),
            TextColumn("{task.fields[rule]}"),
            console=Console(file=self.stream, stderr=self.stream is sys.stderr),
            transient=True,
        )
        bar.start()
        self._task = bar.add_task(label, total=total, rule="")
        self._bar = bar
        self._done = -1

    def advance(self, rule_id: str) -> None:
        """Mark the previous rule done and name the one about to run."""
        from rich.progress import Progress

        if isinstance(self._bar, Progress):
            self._done += 1
            self._bar.update(self._task, completed=self._done, rule=rule_id)

    def finish(self) -> None:
        """Remove the bar."""
        from rich.progress import Progress

        if isinstance(self._bar, Progress):
            self._bar.stop()
        self._bar = None


def progress_for(stream: IO[str] | None = None) -> TerminalProgress | None:
    """A progress bar on ``stream`` (stderr by default) when it is a terminal, else None: silent."""
    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    return TerminalProgress(stream) if callable(isatty) and isatty() else None


class PassBar:
    """A transient rich progress bar for one pass over the rows: rows done of all (when known) and the rate."""

    def __init__(self, stream: IO[str], label: str, total: int | None) -> None:
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

        self._bar = Progress(
            TextColumn("{task.description}"),
            BarColumn(),
            MofNCompleteColumn(),
            TextColumn("{task.fields[rate]}"),
            TimeElapsedColumn(),
            console=Console(file=stream, stderr=stream is sys.stderr),
            transient=True,
        )
        self._bar.start()
        self._task = self._bar.add_task(label, total=total, rate="")

    def advance(self, rows: int) -> None:
        """Count ``rows`` more rows done."""
        self._bar.advance(self._task, rows)
        speed = self._bar.tasks[0].speed
        if speed:
            self._bar.update(self._task, rate=f"{speed:,.0f} rows/s")

    def finish(self) -> None:
        """Remove the bar."""
        self._bar.stop()


def pass_bars(stream: IO[str] | None = None) -> Callable[[str, int | None], PassBar] | None:
    """A maker of per-pass bars on ``stream`` (stderr by default) when it is a terminal, else None."""
    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    if not (callable(isatty) and isatty()):
        return None
    return lambda label, total: PassBar(stream, label, total)

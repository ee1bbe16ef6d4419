"""Report writers: each turns a run (one or more table reports, each a stream of findings) into one format.

Every writer follows the lifecycle of :class:`~prefit.report.base.ReportWriter`;
``FORMATS`` maps a format name to a factory, and ``register_format`` adds one.
Writers are imported only when their format is asked for.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Callable, Sequence

from ..errors import UsageProblem
from .base import ReportWriter, RunFacts, WriterSettings, drive

if TYPE_CHECKING:
    from ..api import Report

WriterFactory = Callable[[WriterSettings], ReportWriter]

__all__ = ["FORMATS", "ReportWriter", "RunFacts", "WriterSettings", "register_format", "render"]


def _lazy(module: str, name: str) -> WriterFactory:
    def factory(settings: WriterSettings) -> ReportWriter:
        writer_class = getattr(importlib.import_module(f"{__name__}.{module}"), name)
        return writer_class(settings)

    return factory


FORMATS: dict[str, WriterFactory] = {
    "text": _lazy("terminal", "TerminalWriter"),
    "json": _lazy("jsonreport", "JsonWriter"),
    "sarif": _lazy("sarif", "SarifWriter"),
    "junit": _lazy("junit", "JunitWriter"),
    "markdown": _lazy("markdown", "MarkdownWriter"),
    "html": _lazy("html", "HtmlWriter"),
}


def register_format(name: str, factory: WriterFactory) -> None:
    """Make ``--format NAME`` write with the writer ``factory`` builds."""
    if name in FORMATS:
        raise ValueError(f"report format {name!r} is already registered")
    FORMATS[name] = factory


def render(format: str, reports: "Sequence[Report]", settings: WriterSettings = WriterSettings()) -> str:
    """The document of ``reports`` in ``format``."""
    factory = FORMATS.get(format)
    if factory is None:
        raise UsageProblem(f"--format {format}", "is not a report format", f"use one of {', '.join(FORMATS)}")
    return drive(factory(settings), reports)

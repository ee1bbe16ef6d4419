"""Report writers: each turns a run (one or more table reports, each a stream of findings) into one format.

Every writer follows the lifecycle of :class:`~prefit.report.base.ReportWriter`.
Formats come through the ``prefit.formats`` entry-point group, built-ins and plugins
alike (an entry point names a ``ReportWriter`` subclass, built with the run's
``WriterSettings``); ``register_format`` adds one at run time. Writers are imported
only when their format is asked for.
"""

from __future__ import annotations

import importlib.metadata as metadata
from typing import TYPE_CHECKING, Callable, Sequence

from ..errors import PluginProblem, UsageProblem
from .base import ReportWriter, RunFacts, WriterSettings, drive

if TYPE_CHECKING:
    from ..outcome import Report

WriterFactory = Callable[[WriterSettings], ReportWriter]

__all__ = ["FORMATS", "ReportWriter", "RunFacts", "WriterSettings", "format_for", "formats", "register_format", "render"]


FORMAT_ENTRY_POINT_GROUP = "prefit.formats"

FORMATS: dict[str, WriterFactory] = {}
"""Formats by name: filled from the ``prefit.formats`` entry points on first use, and by :func:`register_format`."""

_discovered = False


def _loading(point: "metadata.EntryPoint") -> WriterFactory:
    """A factory that imports the entry point's writer class only when its format is asked for."""

    def factory(settings: WriterSettings) -> ReportWriter:
        dist = point.dist.name if point.dist is not None else "unknown distribution"
        try:
            writer_class = point.load()
        except Exception as exc:  # a format plugin that fails to load is reported, never skipped
            raise PluginProblem(
                f"plugin {dist} (report format {point.name} = {point.value})",
                f"failed to load ({type(exc).__name__}: {exc})",
                "fix or uninstall that package",
            ) from None
        writer = writer_class(settings)
        if not isinstance(writer, ReportWriter):
            raise PluginProblem(f"plugin {dist} (report format {point.name})", "does not build a ReportWriter", "subclass prefit.report.ReportWriter")
        return writer

    return factory


def formats() -> dict[str, WriterFactory]:
    """Every report format: the ``prefit.formats`` entry points (built-ins come through the same door), by name."""
    global _discovered
    if not _discovered:
        points = sorted(metadata.entry_points(group=FORMAT_ENTRY_POINT_GROUP), key=lambda ep: (ep.name, ep.value))
        for point in points:
            FORMATS.setdefault(point.name, _loading(point))
        _discovered = True
    return FORMATS


def register_format(name: str, factory: WriterFactory) -> None:
    """Make ``--format NAME`` write with the writer ``factory`` builds (for formats defined at run time)."""
    if name in formats():
        raise ValueError(f"report format {name!r} is already registered")
    FORMATS[name] = factory


def format_for(name: str, option: str = "--format") -> WriterFactory:
    """The factory of the format called ``name``; a usage problem naming the known formats otherwise."""
    known = formats()
    if name not in known:
        raise UsageProblem(f"{option} {name}", "is not a report format", f"use one of {', '.join(known)}")
    return known[name]


def render(format: str, reports: "Sequence[Report]", settings: WriterSettings = WriterSettings()) -> str:
    """The document of ``reports`` in ``format``."""
    return drive(format_for(format)(settings), reports)

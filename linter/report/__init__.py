"""Reporters: each turns one report (table facts and a stream of findings) into one output format."""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable

if TYPE_CHECKING:
    from ..api import Report

Writer = Callable[["Report"], str]


def _terminal(report: "Report") -> str:
    from .terminal import render_terminal

    return render_terminal(report, colour=False)


def _json(report: "Report") -> str:
    return report.to_json()


FORMATS: dict[str, Writer] = {"text": _terminal, "json": _json}

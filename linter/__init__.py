"""prefit: vet a table before anyone fits a linear regression to it."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"
__all__ = ["__version__", "check", "require_ready", "Report", "NotReady", "Grade", "Finding"]

from .findings import Finding, Grade

if TYPE_CHECKING:
    from .api import NotReady, Report, check, require_ready

_FROM_API = ("check", "require_ready", "Report", "NotReady")


def __getattr__(name: str) -> Any:
    if name in _FROM_API:
        from . import api

        return getattr(api, name)
    raise AttributeError(f"module 'prefit' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)

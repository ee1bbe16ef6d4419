"""prefit: vet a table before anyone fits a linear regression to it."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"
__all__ = ["__version__", "check", "require_ready", "Report", "NotReady"]

if TYPE_CHECKING:
    from .api import NotReady, Report, check, require_ready


def __getattr__(name: str) -> Any:
    if name in ("check", "require_ready", "Report", "NotReady"):
        from . import api

        return getattr(api, name)
    raise AttributeError(f"module 'prefit' has no attribute {name!r}")

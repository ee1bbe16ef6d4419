"""Finding and reading the configuration: ``prefit.toml`` or ``[tool.prefit]`` in ``pyproject.toml``."""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from .errors import UsageProblem
from .options import parse_settings


def find_config(start: Path) -> tuple[Path, dict[str, Any]] | None:
    """The nearest configuration from ``start`` upward, with its raw prefit table.

    In each folder ``prefit.toml`` wins over a ``pyproject.toml`` that has a
    ``[tool.prefit]`` table; a ``pyproject.toml`` without one is passed over.
    """
    for folder in (start, *start.parents):
        own = folder / "prefit.toml"
        if own.is_file():
            return own, _load(own)
        project = folder / "pyproject.toml"
        if project.is_file():
            table = _load(project).get("tool", {}).get("prefit")
            if table is not None:
                if not isinstance(table, dict):
                    raise UsageProblem(str(project), "[tool.prefit] must be a table", "write it as a TOML table")
                return project, table
    return None


def _load(path: Path) -> dict[str, Any]:
    try:
        with open(path, "rb") as handle:
            return tomllib.load(handle)
    except tomllib.TOMLDecodeError as exc:
        raise UsageProblem(str(path), f"is not valid TOML ({exc})", "fix the syntax at that line") from None
    except UnicodeDecodeError as exc:
        raise UsageProblem(str(path), f"is not UTF-8 text (byte {exc.object[exc.start]:#04x} at offset {exc.start})", "give the path of a prefit.toml or pyproject.toml") from None
    except OSError as exc:
        raise UsageProblem(str(path), f"cannot be read ({exc.strerror})", "check its permissions") from None


def load_config(explicit: str | None, start: Path) -> tuple[str | None, dict[str, Any]]:
    """Settings from ``explicit`` (a path given with ``--config``) or the nearest config file."""
    if explicit is not None:
        path = Path(explicit)
        if not path.is_file():
            raise UsageProblem(f"--config {explicit}", "does not exist", "give the path of a prefit.toml or pyproject.toml")
        raw = _load(path)
        if path.name == "pyproject.toml":
            raw = raw.get("tool", {}).get("prefit", {})
        return str(path), parse_settings(raw, str(path))
    found = find_config(start)
    if found is None:
        return None, {}
    path, raw = found
    return str(path), parse_settings(raw, str(path))

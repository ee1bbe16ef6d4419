"""Errors that end a run with exit code 2 and one line naming the problem and the fix."""

from __future__ import annotations


class UsageProblem(Exception):
    """Bad input, option or configuration.

    The message follows one grammar: which input, what it must be, what was
    found, and how to fix it, on one line.
    """

    def __init__(self, where: str, problem: str, fix: str) -> None:
        self.where = where
        self.problem = problem
        self.fix = fix
        super().__init__(f"{where}: {problem}; {fix}")


class PluginProblem(UsageProblem):
    """A rule plugin that cannot be loaded or does not honour the rule contract."""


def closest_names(wanted: str, names: list[str], limit: int = 3, kind: str = "columns") -> str:
    """A hint such as ``closest: 'energy_kwh', 'energy'`` for an unknown name, else the known ``kind`` (a plural noun)."""
    import difflib

    close = difflib.get_close_matches(wanted, names, n=limit, cutoff=0.6)
    if not close:
        lowered = {n.lower(): n for n in names}
        close = [lowered[wanted.lower()]] if wanted.lower() in lowered else []
    if close:
        return "closest: " + ", ".join(repr(c) for c in close)
    shown = ", ".join(repr(n) for n in names[:8])
    return f"{kind} are {shown}" + (" ..." if len(names) > 8 else "")

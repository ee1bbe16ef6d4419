"""The Python API: ``check`` a table and get a :class:`Report`. The command line is built on it."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any, Sequence

from .accepted import AcceptedSet, load_accepted, save_accepted
from .baseline import BaselineProfile, profile_of, save_profile
from .errors import UsageProblem
from .findings import GRADES_STRONGEST_FIRST
from .options import options_from
from .outcome import Report
from .pipeline import _as_table, build_context, check_file, context_for, heavy_first, report_for, run_check
from .reading import ReadOptions

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

__all__ = [
    "NotReady", "Report", "apply_accepted", "build_context", "check", "check_file", "context_for", "heavy_first",
    "options_from", "report_for", "require_ready", "run_check", "write_baseline",
]


def write_baseline(report: Report, path: str | Path) -> BaselineProfile:
    """Write the baseline profile of a checked table (``--save-baseline``) and return it."""
    if report.context is None:
        raise UsageProblem("--save-baseline", "needs the statistics of a check run in this process", "run the check and save in one call")
    profile = profile_of(report.context)
    save_profile(profile, path)
    return profile


def apply_accepted(reports: Sequence[Report], accept_file: str | Path | None, accept_current: bool = False) -> list[Report]:
    """Move accepted findings out of the gate.

    With ``accept_current`` every current finding of ``reports`` is written to
    ``accept_file`` first (keeping the reasons of entries already there), so
    that this run and later ones gate only on new findings.
    """
    if accept_file is None:
        if accept_current:
            raise UsageProblem("--accept-current", "needs a file to write", "add --accept-file FILE")
        return list(reports)
    if accept_current:
        previous = load_accepted(accept_file) if Path(accept_file).is_file() else None
        findings = [f for r in reports for f in r.findings]
        keys = [k for r in reports for k in r.fingerprints]
        accepted = AcceptedSet.from_findings(findings, keys, previous)
        save_accepted(accepted, accept_file)
    else:
        accepted = load_accepted(accept_file)
    return [r.accepting(accepted) for r in reports]


def check(
    table: "pa.Table | pd.DataFrame | str | Path",
    target: str | None = None,
    *,
    accept_file: str | Path | None = None,
    accept_current: bool = False,
    save_baseline: str | Path | None = None,
    **options: Any,
) -> Report:
    """Vet ``table`` (a DataFrame, a pyarrow Table or a path) before fitting ``target`` on it.

    Keyword options are the configuration keys (``id``, ``exclude``,
    ``predictors``, ``categorical``, ``intercept``, ``fail_at``,
    ``skip_rules``, ``rule``, ``missing_codes``, ``sep``, ``encoding``,
    ``ranges``, ``anticipated_r2``, ``score``, ``order``, ``purpose``, ``baseline``: a
    profile written by ``save_baseline`` or the accepted table itself, to vet this table against).


    ``ranges``, ``anticipated_r2``, ``score``, ``order``, ``purpose``, ``group``).
    ``accept_file`` names an accepted-findings file: findings it lists are
    counted, not gated; with ``accept_current`` today's findings are written to it.
    ``save_baseline`` writes this table's baseline profile to that path.
    """
    opts = options_from(target=target, **options)
    if accept_file is not None and not accept_current:
        load_accepted(accept_file)
    data, info = _as_table(table, ReadOptions(sep=opts.sep, encoding=opts.encoding))
    report = run_check(data, info, opts)
    if save_baseline is not None:
        write_baseline(report, save_baseline)
    return apply_accepted([report], accept_file, accept_current)[0]


class NotReady(AssertionError):
    """Raised by :func:`require_ready` when a table has findings at or above the gate."""

    def __init__(self, report: Report) -> None:
        self.report = report
        lines = [f"{f.grade.word}: {f.rule}: {f.message}" for f in report.gated]
        if report.failed_rules:
            lines.append(f"check incomplete: rules failed: {', '.join(report.failed_rules)}")
        super().__init__("table is not ready for a linear fit:\n" + "\n".join(lines))


def require_ready(table: "pa.Table | pd.DataFrame | str | Path", target: str | None = None, fail_at: str = "misleads", **options: Any) -> Report:
    """Check ``table`` and raise :class:`NotReady` listing the findings at or above ``fail_at``."""
    report = check(table, target=target, fail_at=fail_at, **options)
    if report.exit_code != 0:
        raise NotReady(report)
    return report


GRADE_WORDS = tuple(g.word for g in GRADES_STRONGEST_FIRST)

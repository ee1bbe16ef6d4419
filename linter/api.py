"""The Python API: ``check`` a table and get a :class:`Report`; a thin facade over :mod:`prefit.pipeline`.

The command line is built on it. The report model lives in :mod:`prefit.outcome`,
the orchestration in :mod:`prefit.pipeline` (one :class:`~prefit.pipeline.CheckRequest`
per check), option coercion in :mod:`prefit.options`, the accept workflow in
:mod:`prefit.accepted` and baseline profiles in :mod:`prefit.baseline`.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from .accepted import apply_accepted, load_accepted
from .baseline import write_baseline
from .engines.memory import build_context
from .findings import GRADES_STRONGEST_FIRST
from .options import CheckOptions, options_from
from .outcome import Report
from .pipeline import CheckRequest, as_table, checked_context, context_for, heavy_first, report_for, run
from .progress import RunProgress
from .reading import ReadOptions, TableInfo
from .registry import Registry

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

__all__ = [
    "CheckRequest", "NotReady", "Report", "apply_accepted", "build_context", "check", "check_file", "checked_context", "context_for",
    "heavy_first", "options_from", "report_for", "require_ready", "run", "run_check", "write_baseline",
]

def check(
    table: "pa.Table | pd.DataFrame | str | Path",
    target: str | None = None,
    *,
    accept_file: str | Path | None = None,
    accept_current: bool = False,
    save_baseline: str | Path | None = None,
    **options: Any,
) -> Report:
    """Vet a table before fitting a linear regression of ``target`` on it.

    Parameters
    ----------
    table : pandas.DataFrame, pyarrow.Table, str or pathlib.Path
        The table, in memory or as a file path (any format ``prefit check`` reads).
    target : str, optional
        The response column (may also come from a ``target`` option or a configuration).
    accept_file : str or pathlib.Path, optional
        An accepted-findings file: findings it lists are counted, not gated.
    accept_current : bool, default False
        Write today's findings to ``accept_file`` first (keeping the reasons already there).
    save_baseline : str or pathlib.Path, optional
        Write this table's baseline profile to that path, to vet a later extract against.
    **options
        Configuration keys with ``_`` for ``-``: ``id``, ``exclude``, ``predictors``,
        ``categorical``, ``intercept``, ``fail_at`` (the gate), ``skip_rules``, ``rule``,
        ``missing_codes``, ``sep``, ``encoding``, ``ranges``, ``anticipated_r2``, ``score``,
        ``order``, ``purpose``, ``group`` and ``baseline`` (a profile written by
        ``save_baseline``, or the accepted table itself).

    Returns
    -------
    Report
        The findings in report order with the table facts and the design; ``exit_code``
        says whether the table is ready at the gate.

    Raises
    ------
    UsageProblem
        When the table or an option cannot be used as given (the message says what to change).
    """
    opts = options_from(target=target, **options)
    if accept_file is not None and not accept_current:
        load_accepted(accept_file)
    data, info = as_table(table, ReadOptions(sep=opts.sep, encoding=opts.encoding))
    report = run(CheckRequest(opts, table=data, info=info))
    if save_baseline is not None:
        write_baseline(report, save_baseline)
    return apply_accepted([report], accept_file, accept_current)[0]


def run_check(
    table: "pa.Table",
    info: TableInfo,
    options: CheckOptions,
    registry: Registry | None = None,
    debug: bool = False,
    progress: RunProgress | None = None,
) -> Report:
    """Check a table already in memory with the memory engine: ``run(CheckRequest(options, table=table, info=info, ...))``."""
    return run(CheckRequest(options, table=table, info=info, registry=registry, debug=debug, progress=progress))


def check_file(
    path: str,
    options: CheckOptions,
    engine: str = "auto",
    scheduler: str | None = None,
    debug: bool = False,
    progress: RunProgress | None = None,
    row_budget: int | None = None,
    profile: bool = False,
) -> Report:
    """Check a table file with the chosen engine: ``run(CheckRequest(options, path=path, ...))`` (see :class:`CheckRequest`)."""
    request = CheckRequest(options, path=path, engine=engine, scheduler=scheduler, debug=debug, progress=progress, row_budget=row_budget, profile=profile)
    return run(request)


class NotReady(AssertionError):
    """Raised by :func:`require_ready` when a table has findings at or above the gate.

    Parameters
    ----------
    report : Report
        The report of the table; kept as ``report``, and its gated findings make the message.
    """

    def __init__(self, report: Report) -> None:
        self.report = report
        lines = [f"{f.grade.word}: {f.rule}: {f.message}" for f in report.gated]
        if report.failed_rules:
            lines.append(f"check incomplete: rules failed: {', '.join(report.failed_rules)}")
        super().__init__("table is not ready for a linear fit:\n" + "\n".join(lines))


def require_ready(table: "pa.Table | pd.DataFrame | str | Path", target: str | None = None, fail_at: str = "misleads", **options: Any) -> Report:
    """Check a table and raise :class:`NotReady` when it is not ready for a linear fit.

    Parameters
    ----------
    table : pandas.DataFrame, pyarrow.Table, str or pathlib.Path
        The table, as for :func:`check`.
    target : str, optional
        The response column.
    fail_at : str, default "misleads"
        The gate: ``note``, ``weakens``, ``misleads`` or ``blocks``.
    **options
        Further options, as for :func:`check`.

    Returns
    -------
    Report
        The report, when no finding reaches the gate and no rule failed.

    Raises
    ------
    NotReady
        Listing the findings at or above ``fail_at`` (and any rule that failed).
    """
    report = check(table, target=target, fail_at=fail_at, **options)
    if report.exit_code != 0:
        raise NotReady(report)
    return report


GRADE_WORDS = tuple(g.word for g in GRADES_STRONGEST_FIRST)

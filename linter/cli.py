"""The command line: ``prefit check``, ``prefit rules``, ``prefit why``; built on the Python API."""

from __future__ import annotations

import argparse
import os
import sys
from dataclasses import replace
from pathlib import Path
from typing import Any, NoReturn, Sequence

from . import __version__
from .errors import UsageProblem

EXIT_OK, EXIT_GATE, EXIT_USAGE, EXIT_INCOMPLETE = 0, 1, 2, 3


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors and exit code 2."""

    def error(self, message: str) -> NoReturn:
        raise UsageProblem(self.prog, message, f"see `{self.prog} --help`")


def _names(text: str) -> list[str]:
    return [part.strip() for part in text.split(",") if part.strip()]


def _build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="prefit", description="Vet a table before anyone fits a linear regression to it.")
    parser.add_argument("--version", action="version", version=f"prefit {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks of errors")
    commands = parser.add_subparsers(dest="command", parser_class=_Parser, metavar="COMMAND")

    check = commands.add_parser("check", help="vet a table and report graded findings")
    check.add_argument("tables", nargs="+", metavar="TABLE", help="CSV/TSV (optionally .gz/.bz2/.zst), Parquet, Arrow/Feather, JSON Lines; - for CSV on stdin; several tables share the options")
    check.add_argument("--target", help="the response column")
    check.add_argument("--id", help="a column of row labels (never a predictor)")
    check.add_argument("--exclude", type=_names, help="columns to leave out, comma-separated")
    check.add_argument("--predictors", type=_names, help="exactly these predictors, comma-separated")
    check.add_argument("--categorical", type=_names, help="numeric columns that are codes of categories")
    check.add_argument("--no-intercept", action="store_true", help="fit without an intercept")
    check.add_argument("--fail-at", metavar="GRADE", help="weakest grade that fails the check: blocks, misleads (default), weakens, note")
    check.add_argument("--skip", type=_names, metavar="RULES", help="rule ids or families not to run, comma-separated")
    check.add_argument("--missing-codes", action="append", metavar="COL=CODE[,CODE]", help="values of COL that mean missing (COL * for every column); repeatable")
    check.add_argument("--range", action="append", dest="ranges", metavar="COL=LOW:HIGH", help="the range of COL the model is meant to cover; repeatable")
    check.add_argument("--anticipated-r2", metavar="R2", help="the R-squared expected of the model, for sample-size planning (default: the preliminary fit's adjusted R-squared)")
    check.add_argument("--score", metavar="NEWTABLE", help="a table of new rows the model will be asked to predict, checked for extrapolation")
    check.add_argument("--sep", help="delimiter of a text table (sniffed when absent)")
    check.add_argument("--encoding", help="encoding of a text table (default utf-8)")
    check.add_argument("--order", metavar="COL", help="the column giving the rows' time order, for the autocorrelation preview (default: the first date column)")
    check.add_argument("--format", default="text", help="text (default), json, sarif, junit, markdown or html")
    check.add_argument("--output", metavar="FILE", help="write the report to FILE instead of stdout")
    check.add_argument("--accept-file", metavar="FILE", help="findings listed in FILE are counted, not gated; only new findings fail")
    check.add_argument("--accept-current", action="store_true", help="write today's findings to the --accept-file, keeping reasons already given")
    check.add_argument("--config", metavar="FILE", help="a prefit.toml or pyproject.toml (default: searched upward from here)")
    check.add_argument("--no-config", action="store_true", help="ignore configuration files")
    check.add_argument("--explain", action="store_true", help="print each finding's why under it")
    check.add_argument("--engine", default="auto", choices=("auto", "memory", "stream", "dask"), help="read the table whole (memory), in row batches (stream; automatic above 1 GiB) or on Dask (dask; needs prefit[dask])")
    check.add_argument("--scheduler", metavar="ADDRESS", help="with --engine dask: an existing Dask scheduler (default: a local cluster)")
    check.add_argument("--row-budget", type=int, metavar="ROWS", help="with --engine stream or dask: rows kept in memory for the rules (default: 6 million cells' worth); beyond it the rules run on a sample")
    check.add_argument("--colour", choices=("auto", "always", "never"), default="auto", help="colour in the text report")

    rules = commands.add_parser("rules", help="list the rule catalogue")
    rules.add_argument("--format", default="text", choices=("text", "json"))

    why = commands.add_parser("why", help="explain a rule: what it does to a fit, thresholds, sources, remedy")
    why.add_argument("rule", nargs="?", metavar="RULE", help="a rule id, or a family to list its rules; without it, every rule by family")
    return parser


def _missing_codes(specs: list[str] | None) -> dict[str, list[str]]:
    codes: dict[str, list[str]] = {}
    for spec in specs or []:
        column, sep, values = spec.partition("=")
        if not sep or not column or not values:
            raise UsageProblem(f"--missing-codes {spec!r}", "must be COL=CODE[,CODE]", "write e.g. --missing-codes humidity_pct=-999")
        codes.setdefault(column, []).extend(v.strip() for v in values.split(","))
    return codes


def _ranges(specs: list[str] | None) -> dict[str, str]:
    ranges: dict[str, str] = {}
    for spec in specs or []:
        column, sep, bounds = spec.rpartition("=")
        if not sep or not column or bounds.count(":") != 1:
            raise UsageProblem(f"--range {spec!r}", "must be COL=LOW:HIGH", "write e.g. --range outdoor_c=-10:38")
        ranges[column] = bounds
    return ranges


def _options_from_args(args: argparse.Namespace) -> Any:
    from .config import load_config
    from .options import CheckOptions, parse_settings

    values: dict[str, Any] = {}
    if not args.no_config:
        _, values = load_config(args.config, Path.cwd())
    flags: dict[str, Any] = {}
    for key, value in (
        ("target", args.target),
        ("id", args.id),
        ("exclude", args.exclude),
        ("predictors", args.predictors),
        ("categorical", args.categorical),
        ("gate", args.fail_at),
        ("skip-rules", args.skip),
        ("sep", args.sep),
        ("encoding", args.encoding),
        ("order", args.order),
        ("anticipated-r2", args.anticipated_r2),
        ("score", args.score),
    ):
        if value is not None:
            flags[key] = value
    if args.no_intercept:
        flags["intercept"] = False
    if args.missing_codes:
        flags["missing-codes"] = _missing_codes(args.missing_codes)
    if args.ranges:
        flags["ranges"] = _ranges(args.ranges)
    parsed = parse_settings(flags, "command line")
    if "missing_codes" in parsed and "missing_codes" in values:
        parsed["missing_codes"] = {**values["missing_codes"], **parsed["missing_codes"]}
    if "ranges" in parsed and "ranges" in values:
        parsed["ranges"] = {**values["ranges"], **parsed["ranges"]}
    return replace(CheckOptions(), **{**values, **parsed})


def _write(text: str, output: str | None) -> None:
    if output is None:
        sys.stdout.write(text)
        sys.stdout.flush()
        return
    try:
        Path(output).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise UsageProblem(f"--output {output}", f"cannot be written ({exc.strerror})", "choose a writable path") from None


def _colour(choice: str, output: str | None) -> bool:
    if choice != "auto":
        return choice == "always"
    return output is None and sys.stdout.isatty() and "NO_COLOR" not in os.environ


def _command_check(args: argparse.Namespace) -> int:
    from .accepted import load_accepted
    from .api import apply_accepted, check_file
    from .progress import progress_for
    from .report import WriterSettings, format_for, render

    format_for(args.format)
    options = _options_from_args(args)
    if args.accept_current and args.accept_file is None:
        raise UsageProblem("--accept-current", "needs a file to write", "add --accept-file FILE")
    if args.accept_file is not None and not args.accept_current:
        load_accepted(args.accept_file)
    reports = []
    if args.scheduler is not None and args.engine != "dask":
        raise UsageProblem("--scheduler", "only applies to the Dask engine", "add --engine dask")
    if args.row_budget is not None and args.row_budget < 1:
        raise UsageProblem("--row-budget", "must be a positive number of rows", "e.g. --row-budget 500000")
    for path in args.tables:
        reports.append(check_file(path, options, args.engine, args.scheduler, args.debug, progress_for(), args.row_budget))
    reports = apply_accepted(reports, args.accept_file, args.accept_current)
    settings = WriterSettings(colour=_colour(args.colour, args.output), explain=args.explain)
    _write(render(args.format, reports, settings), args.output)
    return max(report.exit_code for report in reports)


def _command_rules(args: argparse.Namespace) -> int:
    from .catalogue import catalogue_json, catalogue_text

    _write(catalogue_json() if args.format == "json" else catalogue_text(), None)
    return EXIT_OK


def _command_why(args: argparse.Namespace) -> int:
    from .catalogue import explain_rule, list_by_family

    _write(explain_rule(args.rule) if args.rule else list_by_family(), None)
    return EXIT_OK


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    parser = _build_parser()
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    try:
        args = parser.parse_args(argv)
        if args.command is None:
            parser.print_help()
            return EXIT_USAGE
        handler = {"check": _command_check, "rules": _command_rules, "why": _command_why}[args.command]
        return handler(args)
    except UsageProblem as problem:
        if debug:
            raise
        print(f"prefit: {problem}", file=sys.stderr)
        return EXIT_USAGE
    except MemoryError:
        print("prefit: the table does not fit in memory; run on a machine with more memory", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("prefit: interrupted", file=sys.stderr)
        return 130


def run() -> NoReturn:
    """The ``prefit`` command: run, flush the report, and leave without tearing down the interpreter.

    A check of a large table leaves hundreds of megabytes of arrays behind;
    freeing them one by one at interpreter exit takes up to half a second and
    changes nothing, so once the output is flushed the process ends at once.
    """
    code = main()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (BrokenPipeError, ValueError):  # the reader closed the pipe early (e.g. `| head`)
            pass
    os._exit(code)


if __name__ == "__main__":
    run()

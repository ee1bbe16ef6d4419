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
from .text import NAME_CHARACTERS, inert

EXIT_OK, EXIT_GATE, EXIT_USAGE, EXIT_INCOMPLETE = 0, 1, 2, 3


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors and exit code 2."""

    def error(self, message: str) -> NoReturn:
        command = self.prog.partition(" ")[2] or "arguments"
        raise UsageProblem(command, message, f"see `{self.prog} --help`")


def _names(text: str) -> list[str]:
    return [part.strip() for part in text.split(",") if part.strip()]


def _build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="prefit", description="Vet a table before anyone fits a linear regression to it.")
    parser.add_argument("--version", action="version", version=f"prefit {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks of errors")
    commands = parser.add_subparsers(dest="command", parser_class=_Parser, metavar="COMMAND")

    check = commands.add_parser("check", help="vet a table and report graded findings")
    check.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help="show tracebacks of errors")
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
    check.add_argument("--purpose", choices=("explain", "predict"), help="what the model is for: explain (default; read its coefficients) or predict (score new rows; the prediction-model sample-size criteria gate)")
    check.add_argument("--score", metavar="NEWTABLE", help="a table of new rows the model will be asked to predict, checked for extrapolation")
    check.add_argument("--baseline", metavar="BASELINE", help="vet the table against the last accepted extract: a profile written by --save-baseline, or that table itself")
    check.add_argument("--save-baseline", metavar="FILE", help="write this table's baseline profile (summaries and fit, no rows) to FILE as JSON")
    check.add_argument("--sep", help="delimiter of a text table (sniffed when absent)")
    check.add_argument("--encoding", help="encoding of a text table (default utf-8)")
    check.add_argument("--order", metavar="COL", help="the column giving the rows' time order, for the autocorrelation preview (default: the first date column)")
    check.add_argument("--group", metavar="COL", help="rows with equal COL values form a group (site, customer, machine); default: a repeating --id column; none turns grouping off")
    check.add_argument("--format", action="append", help="text (default), json, sarif, junit, markdown or html: the report on stdout, or in a single --output whose extension names no format")
    check.add_argument("--output", action="append", metavar="FILE", help="write the report to FILE instead of stdout; repeatable, each in the format its extension names (.txt .json .sarif .xml .md .html)")
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
    rules.add_argument("--format", default="text", choices=("text", "json", "html"), help="html: one page with an entry per rule")

    why = commands.add_parser("why", help="explain a rule: what it does to a fit, thresholds, sources, remedy")
    why.add_argument("rule", nargs="?", metavar="RULE", help="a rule id, or a family to list its rules; without it, every rule by family")

    commands.add_parser("schema", help="print the JSON schema of the JSON report")

    init = commands.add_parser("init", help="write a commented prefit.toml proposing the settings prefit infers from a table")
    init.add_argument("table", metavar="TABLE", help="the table to learn from")
    init.add_argument("--target", help="the response column (proposed from the table when absent)")
    init.add_argument("--sep", help="delimiter of a text table (sniffed when absent)")
    init.add_argument("--encoding", help="encoding of a text table (default utf-8)")
    init.add_argument("--output", default="prefit.toml", metavar="FILE", help="where to write (default prefit.toml)")
    init.add_argument("--force", action="store_true", help="overwrite an existing file")
    return parser


EXTENSION_FORMATS = {".txt": "text", ".json": "json", ".sarif": "sarif", ".xml": "junit", ".md": "markdown", ".html": "html", ".htm": "html"}


def _destinations(formats: list[str] | None, outputs: list[str] | None) -> list[tuple[str, str | None]]:
    """(format, path or None for stdout) for each report to write: one run, several outputs."""
    if formats is not None and len(formats) > 1:
        raise UsageProblem("--format", f"is given {len(formats)} times", "give it once; for several reports repeat --output FILE with extensions naming the formats")
    chosen = formats[0] if formats else None
    if not outputs:
        return [(chosen or "text", None)]
    if len(set(outputs)) < len(outputs):
        raise UsageProblem("--output", "names the same file twice", "give each report its own file")
    if len(outputs) == 1:
        named = EXTENSION_FORMATS.get(Path(outputs[0]).suffix.lower())
        return [(chosen or named or "text", outputs[0])]
    if chosen is not None:
        raise UsageProblem("--format", "cannot choose one format for several --output files", "drop --format: each file's extension names its format")
    destinations: list[tuple[str, str | None]] = []
    for output in outputs:
        named = EXTENSION_FORMATS.get(Path(output).suffix.lower())
        if named is None:
            known = ", ".join(EXTENSION_FORMATS)
            raise UsageProblem(f"--output {output}", "has an extension that names no report format", f"end it in one of {known}")
        destinations.append((named, output))
    return destinations


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
        ("group", args.group),
        ("anticipated-r2", args.anticipated_r2),
        ("score", args.score),
        ("baseline", args.baseline),
        ("purpose", args.purpose),
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
    """Write the report to ``output`` or stdout; a reader that closed the pipe early (``| head -1``) ends it quietly."""
    if output is None:
        if sys.stdout is None:
            raise UsageProblem("stdout", "is closed", "leave standard output open or write the report with --output FILE")
        try:
            sys.stdout.write(text)
            sys.stdout.flush()
        except BrokenPipeError:
            _silence_stdout()
        except OSError as exc:
            raise UsageProblem("stdout", f"cannot be written ({exc.strerror})", "free space there or write the report with --output FILE") from None
        return
    try:
        Path(output).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise UsageProblem(f"--output {output}", f"cannot be written ({exc.strerror})", "choose a writable path") from None


def _silence_stdout() -> None:
    """Point stdout at the null device, so that nothing more is written to a closed pipe (nor at exit)."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass
    finally:
        os.close(devnull)


def _colour(choice: str, output: str | None) -> bool:
    if choice != "auto":
        return choice == "always"
    return output is None and sys.stdout is not None and sys.stdout.isatty() and "NO_COLOR" not in os.environ


def _command_check(args: argparse.Namespace) -> int:
    from .accepted import load_accepted
    from .api import apply_accepted, check_file, write_baseline
    from .progress import progress_for
    from .report import WriterSettings, format_for, render

    destinations = _destinations(args.format, args.output)
    for format, _ in destinations:
        format_for(format)
    options = _options_from_args(args)
    if args.accept_current and args.accept_file is None:
        raise UsageProblem("--accept-current", "needs a file to write", "add --accept-file FILE")
    if args.accept_file is not None and not args.accept_current:
        load_accepted(args.accept_file)
    _refuse_overwriting_inputs(args, options)
    reports = []
    if args.scheduler is not None and args.engine != "dask":
        raise UsageProblem("--scheduler", "only applies to the Dask engine", "add --engine dask")
    if args.row_budget is not None and args.row_budget < 1:
        raise UsageProblem("--row-budget", "must be a positive number of rows", "e.g. --row-budget 500000")
    if args.save_baseline is not None and len(args.tables) > 1:
        raise UsageProblem("--save-baseline", f"writes the profile of one table, got {len(args.tables)} tables", "check the accepted table alone")
    for path in args.tables:
        reports.append(check_file(path, options, args.engine, args.scheduler, args.debug, progress_for(), args.row_budget, args.save_baseline is not None))
    if args.save_baseline is not None:
        write_baseline(reports[0], args.save_baseline)
    reports = apply_accepted(reports, args.accept_file, args.accept_current)
    for format, output in destinations:
        settings = WriterSettings(colour=_colour(args.colour, output), explain=args.explain)
        _write(render(format, reports, settings), output)
    return max(report.exit_code for report in reports)


def _same_file(first: str, second: str) -> bool:
    """Whether two paths name one file (an existing one, through links too, or the same path)."""
    if first == "-" or second == "-":
        return False
    try:
        return os.path.samefile(first, second)
    except OSError:
        return os.path.abspath(first) == os.path.abspath(second)


def _refuse_overwriting_inputs(args: argparse.Namespace, options: Any) -> None:
    """Raise when ``--output`` or a written ``--accept-file`` names a table this run reads."""
    inputs = [*args.tables, *([options.score] if options.score else [])]
    written = [("--output", output) for output in args.output or []] + ([("--accept-file", args.accept_file)] if args.accept_current else [])
    for flag, target in written:
        if target is None:
            continue
        for table in inputs:
            if _same_file(target, table):
                raise UsageProblem(f"{flag} {target}", "is a table this run reads, and would be overwritten", f"give {flag} another path")


def _command_schema(args: argparse.Namespace) -> int:
    from importlib import resources

    _write(resources.files("prefit").joinpath("report/report.schema.json").read_text(encoding="utf-8"), None)
    return EXIT_OK


def _command_init(args: argparse.Namespace) -> int:
    from .proposal import propose_config

    destination = Path(args.output)
    if destination.exists() and not args.force:
        raise UsageProblem(f"{destination}", "already exists", "add --force to overwrite it, or --output another path")
    text = propose_config(args.table, target=args.target, sep=args.sep, encoding=args.encoding)
    _write(text, str(destination))
    print(f"prefit: wrote {destination}; review it, then run `prefit check {args.table}`", file=sys.stderr)
    return EXIT_OK


def _command_rules(args: argparse.Namespace) -> int:
    from .catalogue import catalogue_html, catalogue_json, catalogue_text

    _write({"json": catalogue_json, "html": catalogue_html}.get(args.format, catalogue_text)(), None)
    return EXIT_OK


def _command_why(args: argparse.Namespace) -> int:
    from .catalogue import explain_rule, list_by_family

    _write(explain_rule(args.rule) if args.rule else list_by_family(), None)
    return EXIT_OK


MEMORY_FIX = "rerun with --engine stream, which reads the table in row batches"


def _is_out_of_memory(error: BaseException) -> bool:
    """Whether ``error`` says the process ran out of memory or threads (as under ``ulimit -v``)."""
    return isinstance(error, MemoryError) or (isinstance(error, RuntimeError) and "can't start new thread" in str(error))


def _say(line: str) -> None:
    if sys.stderr is not None:
        print(line, file=sys.stderr)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code.

    Usage and input problems end with exit 2 and one line naming the problem
    and the fix; any other failure outside a rule with exit 3 and one line.
    ``--debug`` adds the traceback before that line, never changes the code.
    """
    parser = _build_parser()
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    try:
        args = parser.parse_args(argv)
        if args.command is None:
            raise UsageProblem("command", "is missing", "run `prefit check TABLE --target COLUMN`, `prefit rules` or `prefit why`")
        handler = {"check": _command_check, "rules": _command_rules, "why": _command_why, "schema": _command_schema, "init": _command_init}[args.command]
        return handler(args)
    except KeyboardInterrupt:
        _say("prefit: interrupted")
        return 130
    except UsageProblem as problem:
        _report_failure(debug, f"prefit: {inert(str(problem), NAME_CHARACTERS * 4)}")
        return EXIT_USAGE
    except Exception as error:  # noqa: BLE001  (the last line of defence: one line, never a bare traceback)
        if _is_out_of_memory(error):
            _report_failure(debug, f"prefit: the table does not fit in this process's memory; {MEMORY_FIX}")
            return EXIT_USAGE
        first = str(error).strip().splitlines()[0] if str(error).strip() else ""
        detail = inert(f"{type(error).__name__}: {first}" if first else type(error).__name__, NAME_CHARACTERS)
        _report_failure(debug, f"prefit: internal error ({detail}); rerun with --debug to see where, and report it")
        return EXIT_INCOMPLETE


def _report_failure(debug: bool, line: str) -> None:
    """Print the one-line reason of a failed run, after its traceback when ``debug`` asks for it."""
    if debug and sys.stderr is not None:
        import traceback

        traceback.print_exc(file=sys.stderr)
    _say(line)


M_ARENA_MAX = -8  # glibc mallopt parameter number (malloc.h)


def fit_address_space_limit() -> None:
    """Under an address-space limit (``ulimit -v``), keep glibc to one malloc arena.

    Each thread otherwise reserves an arena of up to 128 MB of address space
    (reserved, not used), so that a few worker threads exhaust a limit the
    data alone would fit; OpenBLAS, which retries a failed allocation without
    end, then hangs instead of failing. With one arena the run either fits or
    ends with a MemoryError, which :func:`main` turns into one line.
    """
    import resource

    soft, _ = resource.getrlimit(resource.RLIMIT_AS)
    if soft == resource.RLIM_INFINITY:
        return
    import ctypes

    try:
        ctypes.CDLL(None).mallopt(M_ARENA_MAX, 1)
    except (OSError, AttributeError):  # not glibc: nothing to tune
        pass


def run() -> NoReturn:
    """The ``prefit`` command: run, flush the report, and leave without tearing down the interpreter.

    A check of a large table leaves hundreds of megabytes of arrays behind;
    freeing them one by one at interpreter exit takes up to half a second and
    changes nothing, so once the output is flushed the process ends at once.
    """
    fit_address_space_limit()
    code = main()
    for stream in (sys.stdout, sys.stderr):
        try:
            if stream is not None:
                stream.flush()
        except (OSError, ValueError):  # the reader closed the pipe early (e.g. `| head`), or the stream was closed
            pass
    os._exit(code)


if __name__ == "__main__":
    run()

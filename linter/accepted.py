"""Accepted findings: fingerprints of known findings, kept in a file, so that a gate fails only on new ones.

A fingerprint is the rule, the grade, the columns (sorted) and a digest of
the values of the rows the finding lists. The row digest hashes each listed
row's values (target, predictors and the finding's columns, keyed by column
name) and then hashes the sorted row hashes, so it survives any reordering of
rows and columns, while a changed value in a listed row, a listed row more or
less, or a stronger grade make the finding new again. A finding that names more
rows than it lists digests only the listed rows any row order would list
(see :func:`stable_rows`); the unlisted, least extreme rows do not count, since
their number drifts whenever an edit elsewhere moves an estimate.
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Mapping, Sequence

from .errors import UsageProblem
from .findings import Finding, Grade, RowLabel

if TYPE_CHECKING:
    from .context import RunContext
    from .outcome import Report

FILE_VERSION = 1
DEFAULT_REASON = "present when prefit was adopted; review and replace this reason"
FILE_NOTE = (
    "Findings accepted as known. prefit reports them as a count and gates only on the rest. "
    "An entry matches a finding of the same rule, grade and columns whose flagged rows hold the same values. "
    "Write why each one is acceptable in its reason."
)


@dataclass(frozen=True, order=True)
class Fingerprint:
    """What identifies a finding across runs: rule, grade, sorted columns, digest of the flagged rows."""

    rule: str
    grade: str
    columns: tuple[str, ...]
    rows: str | None

    @property
    def digest(self) -> str:
        """One hexadecimal sha256 of the whole fingerprint."""
        text = json.dumps([self.rule, self.grade, list(self.columns), self.rows], ensure_ascii=False)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _canonical(value: Any) -> Any:
    if value is None or isinstance(value, (bool, int, str)):
        return value
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _encoded(values: list[Any]) -> list[str]:
    """Each value of one column as ``json.dumps(_canonical(value), ensure_ascii=False)`` writes it.

    A column of floats (with or without missing values) takes the short road: a float's repr holds no
    character JSON escapes, so it is quoted as it is. Anything else goes through the JSON encoder.
    """
    if all(type(v) is float or v is None for v in values):
        return ["null" if v is None else '"' + repr(v) + '"' for v in values]
    return [json.dumps(_canonical(v), ensure_ascii=False) for v in values]


def row_texts(picked: Mapping[str, list[Any]], columns: Sequence[str], rows: int) -> list[str]:
    """The JSON text of each picked row, ``json.dumps({c: _canonical(value)}, sort_keys=True, ensure_ascii=False)``.

    Built column by column and filled into one template per table (one encoder pass per column, one format per
    row) rather than cell by cell: a finding that lists 600 rows of a 1,000-column table digests 600,000 values.
    A column of floats without missing values enters as its values' reprs, the template holding the quotes.
    """
    ordered = sorted(columns)
    if not ordered:
        return ["{}"] * rows
    fields, encoded = [], []
    for column in ordered:
        values = picked[column]
        key = json.dumps(column, ensure_ascii=False).replace("{", "{{").replace("}", "}}") + ": "
        if all(type(v) is float for v in values):
            fields.append(key + '"{}"')
            encoded.append(list(map(float.__repr__, values)))
        else:
            fields.append(key + "{}")
            encoded.append(_encoded(values))
    template = "{{" + ", ".join(fields) + "}}"
    return [template.format(*row) for row in zip(*encoded)]


class RowDigester:
    """Digests of a table's rows, read through one run's context (labels mapped back to rows once)."""

    def __init__(self, context: "RunContext") -> None:
        self.context = context

    @cached_property
    def _positions_by_label(self) -> dict[RowLabel, list[int]] | None:
        if self.context.roles.id is None:
            return None
        found: dict[RowLabel, list[int]] = {}
        for position in range(self.context.table.num_rows):
            found.setdefault(self.context.row_label(position), []).append(position)
        return found

    def positions(self, labels: Iterable[RowLabel]) -> list[int]:
        """0-based table rows named by ``labels`` (an id value names every row that carries it), sorted."""
        rows = self.context.table.num_rows
        by_label = self._positions_by_label
        chosen: set[int] = set()
        for label in labels:
            if by_label is None:
                if isinstance(label, int) and 1 <= label <= rows:
                    chosen.add(label - 1)
            else:
                chosen.update(by_label.get(label, ()))
        return sorted(chosen)

    def _columns(self, finding: Finding) -> list[str]:
        names = set(self.context.table.column_names)
        return sorted((set(finding.columns) | set(self.context.model_columns)) & names)

    def digest(self, finding: Finding) -> str | None:
        """The order-free digest of the values of the rows ``finding`` names, or None when it names none."""
        if not finding.rows:
            return None
        labels, rest = stable_rows(finding)
        positions = self.positions(labels)
        columns = self._columns(finding)
        picked = self.context.table.select(columns).take(positions).to_pydict() if positions else {c: [] for c in columns}
        row_hashes = [hashlib.sha256(text.encode("utf-8")).hexdigest() for text in row_texts(picked, columns, len(positions))]
        unmatched = sorted(str(label) for label in labels) if labels and not positions else []
        body = "\n".join(sorted(row_hashes) + unmatched + [rest])
        return "sha256:" + hashlib.sha256(body.encode("utf-8")).hexdigest()


def stable_rows(finding: Finding) -> tuple[list[RowLabel], str]:
    """The listed rows that every order of the table's rows would list, and a text standing for the others.

    A finding lists at most ``MAX_LISTED_ROWS`` rows, the most extreme first
    with ties broken by position; when it names more rows than it lists, the
    rows tied at the cut-off depend on the row order, so they enter the
    digest only as their count. Measured values never enter it: they move
    when any other row changes (a robust centre, a fit), and an edit to a row
    the finding does not name must leave it accepted.
    Without measured values the listed subset is order-dependent as a whole.
    """
    listed = list(finding.rows)
    if finding.row_count <= len(listed):
        return listed, ""
    if len(finding.row_values) != len(listed):
        return [], f"{len(listed)} listed of {finding.row_count}"
    magnitudes = [abs(v) if v is not None and math.isfinite(v) else -math.inf for v in finding.row_values]
    cutoff = min(magnitudes)
    kept = [label for label, size in zip(listed, magnitudes) if size > cutoff]
    return kept, f"{len(listed) - len(kept)} listed at the cut-off"


def fingerprint(finding: Finding, digester: RowDigester | None) -> Fingerprint:
    """The fingerprint of one finding; without a context the row labels themselves are digested."""
    if digester is not None:
        rows = digester.digest(finding)
    elif finding.rows:
        body = "\n".join(sorted(str(label) for label in finding.rows))
        rows = "labels:" + hashlib.sha256(body.encode("utf-8")).hexdigest()
    else:
        rows = None
    return Fingerprint(finding.rule, finding.grade.word, tuple(sorted(finding.columns)), rows)


def fingerprints(findings: Sequence[Finding], context: "RunContext | None") -> tuple[Fingerprint, ...]:
    """Fingerprints of ``findings``, in their order, read through one run's context."""
    digester = RowDigester(context) if context is not None else None
    return tuple(fingerprint(f, digester) for f in findings)


@dataclass(frozen=True)
class AcceptedEntry:
    """One accepted finding: its fingerprint, an example message for people, and why it is acceptable."""

    key: Fingerprint
    reason: str
    example: str = ""

    def to_dict(self) -> dict[str, Any]:
        """The entry as written in the file."""
        return {
            "rule": self.key.rule,
            "grade": self.key.grade,
            "columns": list(self.key.columns),
            "rows": self.key.rows,
            "example": self.example,
            "reason": self.reason,
        }


ENTRY_KEYS = frozenset({"rule", "grade", "columns", "rows", "example", "reason"})


def _identity(key: Fingerprint) -> tuple[str, tuple[str, ...], str | None]:
    """A fingerprint without its grade: what stays the same when a finding weakens or strengthens."""
    return key.rule, key.columns, key.rows


@dataclass(frozen=True)
class AcceptedSet:
    """The entries of an accepted-findings file, looked up by fingerprint.

    An entry covers a finding of the same rule, columns and rows at its own
    grade or a weaker one: only a stronger grade makes the finding new.
    """

    entries: tuple[AcceptedEntry, ...] = ()

    @cached_property
    def _by_identity(self) -> Mapping[tuple[str, tuple[str, ...], str | None], AcceptedEntry]:
        strongest: dict[tuple[str, tuple[str, ...], str | None], AcceptedEntry] = {}
        for entry in self.entries:
            known = strongest.get(_identity(entry.key))
            if known is None or Grade.parse(entry.key.grade) > Grade.parse(known.key.grade):
                strongest[_identity(entry.key)] = entry
        return strongest

    def _entry_for(self, key: Fingerprint) -> AcceptedEntry | None:
        entry = self._by_identity.get(_identity(key))
        if entry is None or Grade.parse(key.grade) > Grade.parse(entry.key.grade):
            return None
        return entry

    def __contains__(self, key: object) -> bool:
        return isinstance(key, Fingerprint) and self._entry_for(key) is not None

    def __len__(self) -> int:
        return len(self.entries)

    def reason(self, key: Fingerprint) -> str | None:
        """The reason given for ``key`` (or for the same finding at a stronger grade), or None when it is not accepted."""
        entry = self._entry_for(key)
        return entry.reason if entry is not None else None

    def to_json(self) -> str:
        """The file's text: sorted entries, stable bytes."""
        ordered = sorted(self.entries, key=lambda e: (e.key.rule, e.key.columns, e.key.grade, e.key.rows or ""))
        document = {"prefit_accepted": FILE_VERSION, "note": FILE_NOTE, "findings": [e.to_dict() for e in ordered]}
        return json.dumps(document, indent=2, ensure_ascii=False) + "\n"

    @classmethod
    def from_findings(
        cls, findings: Sequence[Finding], keys: Sequence[Fingerprint], previous: "AcceptedSet | None" = None
    ) -> "AcceptedSet":
        """Accept ``findings`` (with their ``keys``), keeping the reasons ``previous`` gave for the same keys."""
        chosen: dict[Fingerprint, AcceptedEntry] = {}
        for finding, key in zip(findings, keys):
            if key in chosen or finding.rule == "engine.rule-error":
                continue
            reason = (previous.reason(key) if previous is not None else None) or DEFAULT_REASON
            chosen[key] = AcceptedEntry(key, reason, finding.message)
        return cls(tuple(chosen.values()))


def _entry(raw: Any, where: str) -> AcceptedEntry:
    if not isinstance(raw, Mapping):
        raise UsageProblem(where, "must be an object", "write {\"rule\": ..., \"grade\": ..., \"columns\": [...], \"rows\": ..., \"reason\": ...}")
    unknown = sorted(set(raw) - ENTRY_KEYS)
    if unknown:
        raise UsageProblem(where, f"has unknown key {unknown[0]!r}", f"use only {', '.join(sorted(ENTRY_KEYS))}")
    for key in ("rule", "grade", "reason"):
        if not isinstance(raw.get(key), str) or not raw[key].strip():
            raise UsageProblem(where, f"needs a non-empty text {key!r}", "rewrite the file with --accept-current, or fix the entry")
    try:
        Grade.parse(raw["grade"])
    except ValueError as exc:
        raise UsageProblem(f"{where}.grade", str(exc).split(";")[0], "use blocks, misleads, weakens or note") from None
    columns = raw.get("columns", [])
    if not isinstance(columns, list) or not all(isinstance(c, str) for c in columns):
        raise UsageProblem(f"{where}.columns", "must be a list of column names", "write e.g. [\"outdoor_c\"]")
    rows = raw.get("rows")
    if rows is not None and not isinstance(rows, str):
        raise UsageProblem(f"{where}.rows", "must be a digest text or null", "copy it from a file written by --accept-current")
    fingerprint = Fingerprint(raw["rule"], raw["grade"].strip().lower(), tuple(sorted(columns)), rows)
    return AcceptedEntry(fingerprint, raw["reason"], str(raw.get("example", "")))


def load_accepted(path: str | Path) -> AcceptedSet:
    """Read an accepted-findings file; every problem is a one-line usage error naming the entry."""
    where = f"--accept-file {path}"
    try:
        text = Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise UsageProblem(where, "does not exist", "create it with --accept-current, which accepts today's findings") from None
    except UnicodeDecodeError as exc:
        raise UsageProblem(where, f"is not UTF-8 text (byte {exc.object[exc.start]:#04x} at offset {exc.start})", "save it as UTF-8 or rewrite it with --accept-current") from None
    except OSError as exc:
        raise UsageProblem(where, f"cannot be read ({exc.strerror})", "check its permissions") from None
    try:
        document = json.loads(text)
    except json.JSONDecodeError as exc:
        raise UsageProblem(where, f"is not valid JSON (line {exc.lineno}: {exc.msg})", "fix the syntax or rewrite it with --accept-current") from None
    except (RecursionError, ValueError) as exc:
        # Nesting deeper than the parser's stack, or an integer beyond Python's digit limit for text conversion.
        problem = "nests too deeply" if isinstance(exc, RecursionError) else "holds a number too long to read"
        raise UsageProblem(where, f"is not an accepted-findings file ({problem})", "rewrite it with --accept-current") from None
    version = document.get("prefit_accepted") if isinstance(document, Mapping) else None
    if type(version) is not int or version != FILE_VERSION:
        raise UsageProblem(where, f"is not a prefit accepted-findings file of version {FILE_VERSION}", "rewrite it with --accept-current")
    entries = document.get("findings", [])
    if not isinstance(entries, list):
        raise UsageProblem(f"{where}: findings", "must be a list", "rewrite it with --accept-current")
    return AcceptedSet(tuple(_entry(raw, f"{where}: findings[{i}]") for i, raw in enumerate(entries)))


def save_accepted(accepted: AcceptedSet, path: str | Path) -> None:
    """Write an accepted-findings file."""
    try:
        Path(path).write_text(accepted.to_json(), encoding="utf-8")
    except OSError as exc:
        raise UsageProblem(f"--accept-file {path}", f"cannot be written ({exc.strerror})", "choose a writable path") from None


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

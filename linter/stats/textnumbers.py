"""Numbers hiding in text columns: formatted numbers (separators, units, currency) and stand-in tokens.

A :class:`TextNumbers` profile is built from the distinct values of a text
column and their counts, so it costs one pass of Arrow's ``value_counts``
and merges across row batches by adding counts.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

PLAIN = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_THOUSANDS_COMMA = re.compile(r"^[+-]?\d{1,3}(,\d{3})+(\.\d+)?$")
_THOUSANDS_DOT = re.compile(r"^[+-]?\d{1,3}(\.\d{3})+(,\d+)?$")
_THOUSANDS_SPACE = re.compile(r"^[+-]?\d{1,3}([ \u00a0\u202f']\d{3})+([.,]\d+)?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+$")
_CURRENCY = "$€£¥₹"
_UNIT = re.compile(r"^(?P<number>[^A-Za-z%°]*?)\s*(?P<unit>(%|°[CF]?|[A-Za-z][A-Za-z0-9/²³·.]*))$")

_NUMBER_LIKE = (
    r"^\s*[+-]?\s*[$€£¥₹]?\s*[+-]?[\d.,' \x{a0}\x{202f}]*\d[\d.,' \x{a0}\x{202f}]*\s*"
    r"(%|°[CF]?|[A-Za-z][A-Za-z0-9/²³·.]*)?\s*[$€£¥₹]?\s*$"
)
EXAMPLES = 3
TOKENS_KEPT = 50
NUMERIC_SHARE = 0.5
MIN_DISTINCT_NUMBERS = 3
MAX_TOKENS = 10
NUMERIC_NOT_CATEGORY = 10
MISSING_WORDS = frozenset(
    {"na", "nan", "null", "none", "nil", "missing", "unknown", "unk", "nd", "blank", "empty", "void", "undefined", "notavailable", "novalue", "value", "div0", "ref"}
)

FORMAT_WORDS = {
    "thousands": "thousands separators",
    "decimal-comma": "decimal commas",
    "unit": "units",
    "currency": "currency marks",
    "spaces": "stray spaces",
}


def _mask(matches: pa.Array) -> np.ndarray:
    return np.asarray(matches.fill_null(False).to_numpy(zero_copy_only=False), dtype=bool)


def _token_counts(values: pa.Array, tallies: np.ndarray, is_token: np.ndarray) -> tuple[list[tuple[str, int]], int]:
    """The most frequent non-numeric values (stripped of surrounding spaces; ties by text) and how many there are."""
    if not is_token.any():
        return [], 0
    chosen = pa.array(is_token)
    raw = values.filter(chosen)
    stripped = pc.utf8_trim_whitespace(raw)
    grouped = pa.table({"token": stripped, "count_sum": pa.array(tallies[is_token])})
    if not pc.all(pc.equal(stripped, raw)).as_py():
        grouped = grouped.group_by("token").aggregate([("count_sum", "sum")]).rename_columns(["token", "count_sum"])
    keys = [("count_sum", "descending"), ("token", "ascending")]
    top = pc.select_k_unstable(grouped, min(TOKENS_KEPT, grouped.num_rows), sort_keys=keys)
    top = grouped.take(top)
    top = top.take(pc.sort_indices(top, sort_keys=keys))
    pairs = list(zip(top.column("token").to_pylist(), (int(c) for c in top.column("count_sum").to_pylist())))
    return pairs, grouped.num_rows


def placeholder_levels(column: pa.ChunkedArray) -> dict[str, int]:
    """The levels of a text category that read as "no value" (``NA``, ``n/a``, ``-``), with their counts."""
    counts = pc.value_counts(pc.utf8_trim_whitespace(column.combine_chunks()))
    levels = counts.field("values").to_pylist()
    tallies = counts.field("counts").to_pylist()
    found = {level: int(n) for level, n in zip(levels, tallies) if level is not None and missing_like(level)}
    return dict(sorted(found.items()))


def missing_like(token: str) -> bool:
    """Whether a non-numeric entry reads as "no value": blank, punctuation only, or a word for missing.

    Letters are compared without case, spaces or punctuation, so "N/A",
    "n.a.", "#N/A" and "NULL" all match (common practice).
    """
    letters = re.sub(r"[^0-9a-z]", "", token.lower())
    return not letters or letters in MISSING_WORDS


def parse_number(text: str) -> tuple[float, frozenset[str]] | None:
    """The number a text stands for and the formatting it carries, or None when it is not a number.

    ``frozenset()`` means a plain number; otherwise the set names the
    formatting found (``thousands``, ``decimal-comma``, ``unit``,
    ``currency``, ``spaces``).
    """
    formats: set[str] = set()
    body = text.strip()
    if body != text:
        formats.add("spaces")
    if not body:
        return None
    if body[0] in _CURRENCY or body[-1] in _CURRENCY:
        formats.add("currency")
        body = body.strip(_CURRENCY).strip()
    elif body[:1] in "+-" and body[1:2] in _CURRENCY:
        formats.add("currency")
        body = body[0] + body[2:].strip()
    unit = _UNIT.match(body)
    if unit and unit.group("number") and not PLAIN.match(body):
        formats.add("unit")
        body = unit.group("number").strip()
    number = _number_body(body, formats)
    if number is None:
        return None
    return number, frozenset(formats)


def _number_body(body: str, formats: set[str]) -> float | None:
    if PLAIN.match(body):
        return float(body)
    for pattern, thousands, decimal in (
        (_THOUSANDS_COMMA, ",", "."),
        (_THOUSANDS_DOT, ".", ","),
        (_THOUSANDS_SPACE, None, None),
    ):
        if pattern.match(body):
            formats.add("thousands")
            if thousands is None:
                cleaned = re.sub(r"[ \u00a0\u202f']", "", body).replace(",", ".")
            else:
                cleaned = body.replace(thousands, "").replace(decimal or ".", ".")
            if decimal == "," and "," in body:
                formats.add("decimal-comma")
            return float(cleaned)
    if _DECIMAL_COMMA.match(body):
        formats.add("decimal-comma")
        return float(body.replace(",", "."))
    return None


@dataclass(frozen=True)
class TextNumbers:
    """What the values of a text column are: plain numbers, formatted numbers, or other tokens.

    Counts are over present (non-null) values. ``tokens`` maps the most
    frequent values that are not numbers (stripped of surrounding spaces, at
    most ``TOKENS_KEPT``) to their counts, ``distinct_tokens`` counts them
    all, and ``examples`` holds the first few formatted values of each kind
    of formatting, in the order they appear.
    """

    present: int = 0
    plain: int = 0
    formatted: int = 0
    distinct_numbers: int = 0
    tokens: Mapping[str, int] = field(default_factory=dict)
    distinct_tokens: int = 0
    format_counts: Mapping[str, int] = field(default_factory=dict)
    examples: Mapping[str, tuple[str, ...]] = field(default_factory=dict)

    @classmethod
    def of(cls, column: pa.ChunkedArray | pa.Array) -> "TextNumbers":
        """Profile the distinct values of one text column.

        Plain numbers and comma-grouped thousands are recognised with Arrow
        kernels; only the rarer formats go through :func:`parse_number`, so an
        identifier column of a million distinct values costs a few regular
        expression passes, not a million Python calls.
        """
        if pa.types.is_dictionary(column.type):
            column = column.cast(column.type.value_type)
        counts = pc.value_counts(column.drop_null())
        values = counts.field("values")
        tallies = counts.field("counts").to_numpy(zero_copy_only=False).astype(np.int64)
        numbers = np.full(len(values), np.nan)
        plain = _mask(pc.match_substring_regex(values, PLAIN.pattern))
        grouped = _mask(pc.match_substring_regex(values, _THOUSANDS_COMMA.pattern))
        if plain.any():
            numbers[plain] = pc.cast(values.filter(pa.array(plain)), pa.float64()).to_numpy(zero_copy_only=False)
        if grouped.any():
            ungrouped = pc.replace_substring(values.filter(pa.array(grouped)), ",", "")
            numbers[grouped] = pc.cast(ungrouped, pa.float64()).to_numpy(zero_copy_only=False)
        format_counts: dict[str, int] = {"thousands": int(tallies[grouped].sum())} if grouped.any() else {}
        examples: dict[str, list[str]] = {"thousands": values.filter(pa.array(grouped)).slice(0, EXAMPLES).to_pylist()} if grouped.any() else {}
        other = _mask(pc.match_substring_regex(values, _NUMBER_LIKE)) & ~plain & ~grouped
        for index in np.flatnonzero(other):
            parsed = parse_number(values[int(index)].as_py())
            if parsed is None:
                continue
            numbers[index], formats = parsed
            for name in formats:
                format_counts[name] = format_counts.get(name, 0) + int(tallies[index])
                kept = examples.setdefault(name, [])
                if len(kept) < EXAMPLES:
                    kept.append(values[int(index)].as_py())
        is_number = ~np.isnan(numbers)
        token_counts, distinct_tokens = _token_counts(values, tallies, ~is_number)
        return cls(
            present=int(tallies.sum()),
            plain=int(tallies[plain].sum()),
            formatted=int(tallies[is_number & ~plain].sum()),
            distinct_numbers=int(np.unique(numbers[is_number]).size),
            tokens=dict(token_counts),
            distinct_tokens=distinct_tokens,
            format_counts=format_counts,
            examples={k: tuple(v) for k, v in examples.items()},
        )

    @property
    def numbers(self) -> int:
        """Values that parse as numbers, plain or formatted."""
        return self.plain + self.formatted

    @property
    def numeric_share(self) -> float:
        """Share of present values that are numbers."""
        return self.numbers / self.present if self.present else 0.0

    @property
    def is_numeric(self) -> bool:
        """Whether the column holds numbers stored as text: mostly numbers, several of them, few other tokens.

        At least half the present values parse as numbers, with at least
        three distinct numbers, and at most ten distinct other tokens (more
        would make it a mixed column, not a numeric one) (common practice).
        """
        return (
            self.present > 0
            and self.numeric_share >= NUMERIC_SHARE
            and self.distinct_numbers >= MIN_DISTINCT_NUMBERS
            and self.distinct_tokens <= MAX_TOKENS
        )

    @property
    def missing_tokens(self) -> dict[str, int]:
        """The non-numeric entries that read as "no value" (:func:`missing_like`), with their counts."""
        return {t: c for t, c in self.tokens.items() if missing_like(t)}

    @property
    def other_tokens(self) -> dict[str, int]:
        """The non-numeric entries that are words with a meaning of their own (e.g. "rotary")."""
        return {t: c for t, c in self.tokens.items() if not missing_like(t)}

    @property
    def is_quantity(self) -> bool:
        """Numbers stored as text with too many distinct values to be category codes (at least ten)."""
        return self.is_numeric and self.distinct_numbers >= NUMERIC_NOT_CATEGORY

    def format_words(self) -> list[str]:
        """The kinds of formatting found, most frequent first."""
        ordered = sorted(self.format_counts, key=lambda k: (-self.format_counts[k], k))
        return [FORMAT_WORDS[k] for k in ordered]


def parsed_values(column: pa.ChunkedArray | pa.Array) -> np.ndarray:
    """A text column as float64: each value's number (formatted or plain), NaN for nulls and tokens."""
    if pa.types.is_dictionary(column.type):
        column = column.cast(column.type.value_type)
    encoded = pc.dictionary_encode(column)
    if isinstance(encoded, pa.ChunkedArray):
        encoded = encoded.combine_chunks()
    lookup = np.array(
        [np.nan if (parsed := parse_number(v)) is None else parsed[0] for v in encoded.dictionary.to_pylist()] + [np.nan],
        dtype=np.float64,
    )
    codes = encoded.indices.fill_null(len(lookup) - 1).to_numpy(zero_copy_only=False).astype(np.int64)
    return lookup[codes]


def is_text_type(t: pa.DataType) -> bool:
    """Whether an Arrow type holds text (plain or dictionary-encoded)."""
    if pa.types.is_dictionary(t):
        t = t.value_type
    return bool(pa.types.is_string(t) or pa.types.is_large_string(t) or pa.types.is_string_view(t))


def mostly_number_like(column: pa.ChunkedArray) -> bool:
    """A quick test before profiling: do at least half the present values look like numbers?"""
    if pa.types.is_dictionary(column.type):
        column = column.cast(column.type.value_type)
    present = len(column) - column.null_count
    if present == 0:
        return False
    like = pc.sum(pc.cast(pc.match_substring_regex(column, _NUMBER_LIKE), pa.int64())).as_py() or 0
    return like >= NUMERIC_SHARE * present


def numbers_as_text_reason(column: pa.ChunkedArray) -> str | None:
    """Why roles leave a text column of numbers out of the design, or None when it is not one."""
    if not is_text_type(column.type) or not mostly_number_like(column):
        return None
    profile = TextNumbers.of(column)
    if not profile.is_quantity:
        return None
    parts = []
    remedies = []
    if profile.tokens:
        shown = ", ".join(repr(t) for t in sorted(profile.tokens, key=lambda t: (-profile.tokens[t], t))[:5])
        parts.append(f"non-numeric entries {shown}")
        remedies.append("declare the non-numeric entries with missing-codes")
    if profile.formatted:
        parts.append(", ".join(profile.format_words()))
        remedies.append("re-export the numbers without formatting")
    return (
        f"numbers stored as text ({profile.numeric_share:.0%} of values are numbers; {' and '.join(parts) or 'text storage'}); "
        f"as a category it would cost one parameter per distinct number: {' and '.join(remedies) or 're-export it as numbers'}"
    )

"""Rows that may repeat another row: narrowed column by column with 64-bit hashes, never a sort of whole rows.

Equal values always hash alike, so every row that equals another row in
every column is among the candidates; a candidate may still be a hash
collision, so callers group the (few) candidates exactly.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable

import numpy as np

from .spot import evenly_spaced

ColumnBits = Callable[[np.ndarray | None], np.ndarray]
"""A column's bits (uint64, a fresh array the caller may overwrite) at the given row positions, or at every row for None."""

GOLDEN = 0x9E3779B97F4A7C15
FEW_VALUES = 8
LOOKUP_SHARE = 64
KEEP_SHARE = 0.75


def value_bits(values: np.ndarray) -> np.ndarray:
    """Bit patterns of float64 values under which equal values agree: -0.0 reads as 0.0 and every NaN as -inf.

    Values that differ may share a pattern (NaN and -inf); equal ones never differ.
    Returns a fresh array.
    """
    canonical = np.fmax(values, -np.inf)
    canonical += 0.0
    return canonical.view(np.uint64)


def scramble(bits: np.ndarray, salt: int, scratch: np.ndarray) -> np.ndarray:
    """Scramble 64-bit words in place, one to one (xorshift, odd multiply, xorshift), differently for every ``salt``.

    ``scratch`` is a work array of the same size.
    """
    np.right_shift(bits, np.uint64(29), out=scratch)
    bits ^= scratch
    bits *= np.uint64((salt * GOLDEN) % 2**64 | 1)
    np.right_shift(bits, np.uint64(32), out=scratch)
    bits ^= scratch
    return bits


def repeated_entries(hashes: np.ndarray, most: float = 1.0) -> np.ndarray | None:
    """Positions, ascending, of the entries whose value occurs more than once; None if they exceed a ``most`` share."""
    ordered = np.sort(hashes)
    same = ordered[1:] == ordered[:-1]
    if not same.any():
        return np.empty(0, dtype=np.int64)
    repeating = np.zeros(hashes.size, dtype=bool)
    repeating[1:] = same
    repeating[:-1] |= same
    if np.count_nonzero(repeating) > most * hashes.size:
        return None
    doubled = ordered[1:][same]
    shared = doubled[np.concatenate(([True], doubled[1:] != doubled[:-1]))]
    if shared.size <= FEW_VALUES:
        return np.flatnonzero(np.isin(hashes, shared))
    if shared.size * LOOKUP_SHARE <= hashes.size:
        slot = np.minimum(np.searchsorted(shared, hashes), shared.size - 1)
        return np.flatnonzero(shared[slot] == hashes)
    order = np.argsort(hashes)
    return np.sort(order[repeating])


def _mostly_repeats(hashes: np.ndarray) -> bool:
    """Whether evenly spaced entries show so few distinct values that hardly any entry can be unique."""
    spot = evenly_spaced(hashes)
    return np.unique(spot).size < (1.0 - KEEP_SHARE) * spot.size


def candidate_rows(columns: Iterable[ColumnBits], rows: int) -> np.ndarray:
    """Positions, ascending, of the rows that may equal another row in every column.

    Each column's scrambled bits are folded into a running hash per row; rows
    whose hash no other row shares cannot repeat any row and are dropped
    before the next column is read, so on measured data the first column or
    two leave only the true repeats and later columns cost next to nothing.
    While evenly spaced rows show few distinct hashes (columns of a few
    levels) the rows are not sorted at all.
    """
    chosen: np.ndarray | None = None
    hashes = np.zeros(rows, dtype=np.uint64)
    scratch = np.empty_like(hashes)
    unsorted = False
    for salt, bits_of in enumerate(columns, start=1):
        if hashes.size < 2:
            return np.empty(0, dtype=np.int64)
        hashes ^= scramble(bits_of(chosen), salt, scratch)
        unsorted = _mostly_repeats(hashes)
        if unsorted:
            continue
        kept = repeated_entries(hashes, KEEP_SHARE)
        if kept is not None:
            hashes = hashes[kept]
            scratch = scratch[: kept.size]
            chosen = kept if chosen is None else chosen[kept]
    if unsorted:
        kept = repeated_entries(hashes)
        assert kept is not None
        chosen = kept if chosen is None else chosen[kept]
    elif chosen is None:
        chosen = np.arange(rows, dtype=np.int64)
    return chosen if chosen.size >= 2 else np.empty(0, dtype=np.int64)

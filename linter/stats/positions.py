"""Seeded hashes of table positions: samples of rows that depend on each row's position alone.

A row's hash depends only on its 0-based position in the table and a seed,
never on its values, the batching or the order in which batches arrive, so
every engine picks the same rows.

References
----------
Steele, G. L., Lea, D., Flood, C. H. (2014). Fast splittable pseudorandom
number generators. OOPSLA 2014 (the SplitMix64 finaliser).
"""

from __future__ import annotations

import numpy as np

GOLDEN = 0x9E3779B97F4A7C15


def position_hashes(positions: np.ndarray, seed: int) -> np.ndarray:
    """The SplitMix64 finaliser of ``position + seed * golden`` for each position (uint64)."""
    with np.errstate(over="ignore"):
        z = np.asarray(positions).astype(np.uint64) + np.uint64(seed * GOLDEN % 2**64)
        z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
        z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
        return z ^ (z >> np.uint64(31))


def hashed_share(positions: np.ndarray, share: float, seed: int) -> np.ndarray:
    """Indices of the positions whose hash falls below ``share`` of the hash range: about that share of them."""
    return np.flatnonzero(position_hashes(positions, seed) < np.uint64(min(share, 1.0) * float(2**64 - 2**11)))

"""What a demonstration returns, and the small least-squares helper every demonstration uses."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np
import scipy.linalg

MAX_LINES = 20
SEED = 20260601
BOOTSTRAP_RESAMPLES = 200


Columns = Mapping[str, "Sequence[Any] | np.ndarray"]
"""An invented table as columns by name: numbers, texts, None or NaN for a missing value."""


@dataclass(frozen=True)
class Demonstration:
    """Lines of plain text and the numbers they show, keyed by name; the invented table they describe and how to check it.

    ``table`` is the table the lines are about, with the problem in it: checked with ``options`` (``target``, ``id``,
    ``group``, ...) it makes its rule fire. ``companions`` holds the tables that options name by path (``baseline``:
    the accepted extract a new one is vetted against; ``score``: new rows to predict), keyed by the option.
    """

    lines: tuple[str, ...]
    numbers: Mapping[str, float] = field(default_factory=dict)
    table: Columns = field(default_factory=dict)
    options: Mapping[str, Any] = field(default_factory=dict)
    companions: Mapping[str, Columns] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if len(self.lines) > MAX_LINES:
            raise ValueError(f"a demonstration prints at most {MAX_LINES} lines, got {len(self.lines)}")

    def __str__(self) -> str:
        return "\n".join(self.lines)


@dataclass(frozen=True)
class Line:
    """A least-squares fit with an intercept: coefficients (intercept first), standard errors, residuals, leverage."""

    coef: np.ndarray
    se: np.ndarray
    residual: np.ndarray
    hat: np.ndarray
    r_squared: float

    @property
    def sigma(self) -> float:
        """Residual standard deviation."""
        return float(np.sqrt(self.residual @ self.residual / (self.residual.size - self.coef.size)))


def fit_line(y: np.ndarray, *columns: np.ndarray) -> Line:
    """Least squares of ``y`` on an intercept and ``columns``, by QR."""
    X = np.column_stack([np.ones(y.size), *columns])
    q, r = scipy.linalg.qr(X, mode="economic")
    coef = scipy.linalg.solve_triangular(r, q.T @ y)
    residual = y - X @ coef
    r_inverse = scipy.linalg.solve_triangular(r, np.eye(r.shape[0]))
    sigma2 = residual @ residual / (y.size - X.shape[1])
    centred = y - y.mean()
    return Line(
        coef,
        np.sqrt(sigma2 * np.sum(r_inverse**2, axis=1)),
        residual,
        np.sum(q**2, axis=1),
        float(1.0 - residual @ residual / (centred @ centred)),
    )


def generator(offset: int = 0) -> np.random.Generator:
    """The fixed-seed random generator of a demonstration."""
    return np.random.default_rng(SEED + offset)


def floor_areas(rng: np.random.Generator, count: int) -> np.ndarray:
    """Invented cold floor areas of ``count`` sites, m^2."""
    return rng.uniform(2_000, 40_000, count).round(-1)

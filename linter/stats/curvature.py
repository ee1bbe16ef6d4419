"""Curvature per numeric predictor: does its square, added to the design, explain the preliminary fit's residuals?"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..design import Design
from .auxiliary import AddedColumns, column_picker, each_added_alone
from .factor import DesignFactor


@dataclass(frozen=True)
class CurvatureCheck:
    """The added square of one predictor: its t statistic (sign = direction of the bend), p-values and effect.

    ``p_holm`` is adjusted over all predictors checked; ``f_squared`` is
    Cohen's f^2 of the square; ``largest_shift`` is the largest change the
    square makes to a fitted value, in the target's units.
    """

    predictor: str
    t: float
    p_value: float
    p_holm: float
    f_squared: float
    largest_shift: float


def square_columns(design: Design, predictors: Sequence[str]) -> AddedColumns:
    """Squares of the named numeric predictors, centred when the design has an intercept (same span, better conditioned)."""
    index = np.asarray([design.column_index[name] for name in predictors], dtype=int)
    centre = design.X.mean(axis=0)[index] if design.intercept and design.n else np.zeros(index.size)

    columns = column_picker(index)

    def fill(start: int, stop: int, out: np.ndarray) -> None:
        np.subtract(design.X[start:stop, columns], centre, out=out)
        np.square(out, out=out)

    return AddedColumns(int(index.size), fill)


def holm(p_values: Sequence[float]) -> list[float]:
    """Holm's step-down adjustment of several p-values.

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure.
    Scand. J. Statist. 6(2).
    """
    order = sorted(range(len(p_values)), key=lambda i: p_values[i])
    adjusted, running = [1.0] * len(p_values), 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (len(p_values) - rank) * p_values[i]))
        adjusted[i] = running
    return adjusted


def curvature_checks(design: Design, factor: DesignFactor, residual: np.ndarray, predictors: Sequence[str]) -> tuple[CurvatureCheck, ...]:
    """One added-square test per predictor (each on its own), sharing one projection of all squares off the design.

    Predictors whose square the design already spans (two distinct values)
    are left out.
    """
    from scipy import stats

    fits = each_added_alone(factor, design.X, residual, square_columns(design, predictors))
    tested = [(name, fit) for name, fit in zip(predictors, fits) if fit.added_rank and fit.df_resid > 0 and np.isfinite(fit.f_statistic)]
    p_values = [float(stats.f.sf(fit.f_statistic, 1, fit.df_resid)) for _, fit in tested]
    return tuple(
        CurvatureCheck(
            predictor=name,
            t=float(np.sign(fit.coef[0]) * np.sqrt(fit.f_statistic)),
            p_value=p_value,
            p_holm=adjusted,
            f_squared=fit.cohen_f_squared,
            largest_shift=fit.largest_shift,
        )
        for (name, fit), p_value, adjusted in zip(tested, p_values, holm(p_values))
    )

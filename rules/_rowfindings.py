"""Shared by the influence and outlier rules: chance-aware screening and what deleting rows does to the fit."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from prefit.context import RunContext
from prefit.design import INTERCEPT
from prefit.findings import counted
from prefit.rule import RuleSettings, Threshold, fmt
from prefit.stats.chance import ChanceCheck
from prefit.stats.influence import GroupDeletion, deleted_variance, deletion_shift

CHANCE = Threshold(
    "chance",
    0.05,
    "rows beyond a size-scaled cutoff are reported when a clean table of this size would show as many (Poisson "
    "count) or one as extreme (Bonferroni bound) with probability below half this level each, so that a clean "
    "table is reported with probability at most this level, under normal errors (Beckman & Cook 1983, "
    "Technometrics 25); set it to 2 to report every crossing",
)
IMPACT_ROWS = 20
GROUP_UNIT = "SE (of the fit without them)"


def rows_text(count: int) -> str:
    """``1 row`` or ``12 rows``."""
    return counted(count, "row")


def beyond_chance(settings: RuleSettings, check: ChanceCheck) -> bool:
    """Whether the rule's screening crossings are more, or more extreme, than chance gives."""
    return check.beyond_chance(settings.limit("chance"))


def chance_details(check: ChanceCheck) -> dict[str, Any]:
    """The numbers behind the chance comparison, for a finding's details."""
    return {
        "rows_beyond_cutoff": check.crossed,
        "expected_by_chance": check.expected,
        "count_probability": check.count_p,
        "single_row_probability": check.single_p,
    }


def coefficient_phrase(name: str, source: str) -> str:
    """``the door_openings slope``, ``the intercept`` or ``the compressor_type=scroll coefficient``."""
    if name == INTERCEPT:
        return "the intercept"
    return f"the {name} slope" if name == source else f"the {name} coefficient"


@dataclass(frozen=True)
class Movement:
    """How the coefficients move when some rows are deleted, in units of their standard errors."""

    moves_se: dict[str, float]
    flips: tuple[str, ...]

    def largest(self) -> tuple[str, float] | None:
        """The coefficient that moves most (slopes before the intercept on ties)."""
        if not self.moves_se:
            return None
        name = max(self.moves_se, key=lambda c: (abs(self.moves_se[c]), c != INTERCEPT, c))
        return name, self.moves_se[name]

    def sentence(self, ctx: RunContext, unit: str = "SE") -> str:
        """E.g. ``moves the door_openings slope by 2.7 SE and flips its sign``."""
        top = self.largest()
        if top is None:
            return "moves no estimable coefficient"
        sources = dict(zip(ctx.design.column_names, ctx.design.column_sources))
        name, moved = top
        text = f"moves {coefficient_phrase(name, sources[name])} by {fmt(abs(moved), 2)} {unit}"
        if name in self.flips:
            text += " and flips its sign"
        others = [c for c in self.flips if c != name]
        if others:
            text += "; flips the sign of " + ", ".join(coefficient_phrase(c, sources[c]) for c in others)
        return text

    def as_details(self) -> dict[str, Any]:
        """The movement as plain data."""
        return {"moves_se": dict(self.moves_se), "flips_sign": list(self.flips)}


def movement(ctx: RunContext, shift: np.ndarray, se: np.ndarray) -> Movement:
    """The movement ``b - b_(S)`` per estimable coefficient in the given standard errors, with sign changes."""
    fit = ctx.fit
    names = ctx.design.column_names
    moves: dict[str, float] = {}
    flips: list[str] = []
    for j, name in enumerate(names):
        if not (np.isfinite(shift[j]) and np.isfinite(se[j]) and se[j] > 0):
            continue
        moves[name] = float(-shift[j] / se[j])
        after = fit.coef[j] - shift[j]
        if fit.coef[j] != 0 and after != 0 and np.sign(after) != np.sign(fit.coef[j]):
            flips.append(name)
    return Movement(moves, tuple(flips))


def dfbetas_scale(ctx: RunContext, sigma: float) -> np.ndarray:
    """``sigma * sqrt((X'X)^-1_jj)``: with the residual SD without the row, the DFBETAS unit (Belsley, Kuh &
    Welsch 1980, eq. 2.7), so one deleted row's movement equals minus its DFBETAS."""
    return sigma * np.sqrt(np.diag(ctx.fit.cov_unscaled))


def single_row_impacts(ctx: RunContext, design_rows: np.ndarray, order_by: np.ndarray) -> list[dict[str, Any]]:
    """For up to ``IMPACT_ROWS`` rows, most extreme first: the coefficient movement of deleting each alone.

    Each refit is the rank-one downdate of the shared fit, never a refit from scratch.
    """
    order = np.lexsort((design_rows, -np.abs(np.nan_to_num(order_by, nan=-np.inf))))[:IMPACT_ROWS]
    chosen = design_rows[order]
    design, scores = ctx.design, ctx.row_scores
    hat, residual = scores.hat[chosen], scores.residual[chosen]
    shifts = deletion_shift(ctx.fit, design.X[chosen], residual, hat)
    sigmas = np.sqrt(deleted_variance(ctx.fit, hat, residual))
    out: list[dict[str, Any]] = []
    for row, shift, sigma in zip(chosen, shifts, sigmas):
        moved = movement(ctx, shift, dfbetas_scale(ctx, float(sigma)))
        out.append({"row": ctx.row_label(int(design.positions[row])), "sentence": moved.sentence(ctx), **moved.as_details()})
    return out


def impact_message(impacts: list[dict[str, Any]]) -> str:
    """The first impact as a clause, e.g. ``dropping row 214 moves the door_openings slope by 2.7 SE``."""
    if not impacts:
        return ""
    first = impacts[0]
    return f"; dropping row {first['row']} alone {first['sentence']}"


def group_message(ctx: RunContext, group: GroupDeletion) -> str:
    """E.g. ``deleting these 90 rows together gives Cook's D = 4.2 and moves ...``."""
    if not np.isfinite(group.cooks):
        return f"deleting these {group.rows} rows together leaves some coefficients without data"
    return f"deleting these {group.rows} rows together gives Cook's D = {fmt(group.cooks)} and {movement(ctx, group.shift, group.se_after).sentence(ctx, GROUP_UNIT)}"

"""An example third-party rule family: flags a target whose name has no unit suffix."""

from prefit.findings import Grade
from prefit.rule import COMMON_PRACTICE, Rule, Threshold

UNIT_SUFFIXES = ("_kwh", "_c", "_m2", "_m3", "_pct", "_kg", "_eur")


def _unit_suffix(ctx, settings):
    target = ctx.roles.target
    if not target.endswith(UNIT_SUFFIXES):
        yield settings.finding(
            Grade.NOTE,
            f"target {target} names no unit",
            columns=[target],
            threshold=settings.threshold("suffixes"),
            remedy="rename the target with its unit, e.g. energy_kwh",
        )


RULES = [
    Rule(
        id="example.target-unit",
        summary="The target's name carries its unit.",
        why="A coefficient is read in units of the target per unit of the predictor; an unnamed unit invites misreading.",
        remedy="rename the target with its unit",
        check=_unit_suffix,
        thresholds=(Threshold("suffixes", len(UNIT_SUFFIXES), COMMON_PRACTICE),),
    )
]

"""assumptions rules (being written)."""

from prefit.rule import Rule

RULES: list[Rule] = []

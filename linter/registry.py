"""Rule discovery through the ``prefit.rules`` entry-point group, the same door for built-ins and plugins.

Discovery is staged: read the entry points, sort them, load each, check
every object against the rule contract, and register it. A plugin that fails
to load is an error naming its distribution and entry point.
"""

from __future__ import annotations

import importlib.metadata as metadata
import re
from dataclasses import dataclass, field
from typing import Iterable, Iterator

from .errors import PluginProblem
from .rule import RuleLike

ENTRY_POINT_GROUP = "prefit.rules"
RULE_ID = re.compile(r"^[a-z][a-z0-9-]*\.[a-z][a-z0-9-]*$")


@dataclass
class Registry:
    """The rules of one run, by id; built fresh by the engine, never a module global."""

    rules: dict[str, RuleLike] = field(default_factory=dict)
    origins: dict[str, str] = field(default_factory=dict)

    def add(self, rule: RuleLike, origin: str) -> None:
        """Register ``rule``; its id must be new and well formed."""
        check_rule(rule, origin)
        if rule.id in self.rules:
            raise PluginProblem(origin, f"registers rule {rule.id!r}, already registered by {self.origins[rule.id]}", "rename one of the rules")
        self.rules[rule.id] = rule
        self.origins[rule.id] = origin

    def __iter__(self) -> Iterator[RuleLike]:
        return iter(self.rules[k] for k in sorted(self.rules))

    def __len__(self) -> int:
        return len(self.rules)

    def get(self, rule_id: str) -> RuleLike | None:
        """The rule with this id, or None."""
        return self.rules.get(rule_id)

    def families(self) -> list[str]:
        """Families of the registered rules, sorted."""
        return sorted({rule.family for rule in self.rules.values()})


RULE_MEMBERS = ("id", "family", "summary", "why", "remedy", "thresholds", "grades", "needs", "heavy", "repair", "recheck", "screen", "demonstration", "check")
"""Every member of the :class:`~prefit.rule.RuleLike` protocol."""


def check_rule(rule: object, origin: str) -> None:
    """Raise if ``rule`` does not honour the rule contract."""
    if not isinstance(rule, RuleLike):
        missing = ", ".join(name for name in RULE_MEMBERS if not hasattr(rule, name)) or "none"
        raise PluginProblem(origin, f"provides {rule!r}, which is not a rule (members missing: {missing})", "build it with prefit.rule.Rule, which gives every optional member its default")
    if not RULE_ID.match(rule.id):
        raise PluginProblem(origin, f"has rule id {rule.id!r}, which is not of the form family.name (lower case)", "rename the rule")
    for text, value in (("summary", rule.summary), ("why", rule.why), ("remedy", rule.remedy)):
        if not isinstance(value, str) or not value.strip():
            raise PluginProblem(origin, f"rule {rule.id} has no {text} text", "write one")
    names = [t.name for t in rule.thresholds]
    if len(names) != len(set(names)):
        raise PluginProblem(origin, f"rule {rule.id} has two thresholds of the same name", "rename one")
    for t in rule.thresholds:
        if not t.source:
            raise PluginProblem(origin, f"rule {rule.id} threshold {t.name!r} has no source", "cite it, or write 'common practice'")


def _rules_of(loaded: object, origin: str) -> Iterable[object]:
    if callable(loaded) and not isinstance(loaded, RuleLike):
        loaded = loaded()
    if isinstance(loaded, RuleLike):
        return [loaded]
    if isinstance(loaded, (list, tuple)):
        return loaded
    rules = getattr(loaded, "RULES", None)
    if isinstance(rules, (list, tuple)):
        return rules
    raise PluginProblem(origin, "provides neither a rule, a list of rules, nor a module with RULES", "point the entry point at a RULES list")


def discover(group: str = ENTRY_POINT_GROUP) -> Registry:
    """Build a registry from every installed entry point of ``group``, in a deterministic order."""
    registry = Registry()
    points = sorted(metadata.entry_points(group=group), key=lambda ep: (ep.name, ep.value))
    for point in points:
        dist = point.dist.name if point.dist is not None else "unknown distribution"
        origin = f"plugin {dist} (entry point {point.name} = {point.value})"
        try:
            loaded = point.load()
        except Exception as exc:  # any import failure of a plugin is reported, never skipped
            raise PluginProblem(origin, f"failed to load ({type(exc).__name__}: {exc})", "fix or uninstall that package") from None
        for rule in _rules_of(loaded, origin):
            registry.add(rule, origin)  # type: ignore[arg-type]
    return registry

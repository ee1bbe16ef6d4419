"""The rule catalogue (``prefit rules``) and rule explanations (``prefit why``)."""

from __future__ import annotations

import json
import textwrap

from .errors import UsageProblem, closest_names
from .registry import Registry, discover
from .rule import RuleLike, default_grades, rule_family
from .teaching import demonstration_for

WRAP = 96


def _grades(rule: RuleLike) -> list[str]:
    return [g.word for g in default_grades(rule)]


def catalogue_json(registry: Registry | None = None) -> str:
    """Every rule with its grades, thresholds and sources, as JSON."""
    registry = registry or discover()
    rules = [
        {
            "id": rule.id,
            "family": rule_family(rule.id),
            "grades": _grades(rule),
            "summary": rule.summary,
            "thresholds": [
                {"name": t.name, "value": t.value, "compare": t.compare, "grade": t.grade.word if t.grade else None, "source": t.source}
                for t in rule.thresholds
            ],
            "origin": registry.origins[rule.id],
        }
        for rule in registry
    ]
    return json.dumps({"rules": rules}, indent=2, ensure_ascii=False) + "\n"


def catalogue_text(registry: Registry | None = None) -> str:
    """Every rule, one paragraph each, grouped by family."""
    registry = registry or discover()
    out: list[str] = []
    for family in registry.families():
        out.append(f"[{family}]")
        for rule in (r for r in registry if rule_family(r.id) == family):
            grades = "/".join(_grades(rule)) or "-"
            out.append(f"  {rule.id}  ({grades})")
            out.extend(textwrap.wrap(rule.summary, WRAP, initial_indent="      ", subsequent_indent="      "))
            for t in rule.thresholds:
                rule_text = f"{t.compare} {t.value:g}" if t.grade is not None else f"= {t.value:g}"
                out.append(f"      {t.name}: {rule_text}  [{t.source}]")
        out.append("")
    return "\n".join(out)


def explain_rule(rule_id: str, registry: Registry | None = None) -> str:
    """The why, thresholds with sources, and remedy of one rule, for teaching."""
    registry = registry or discover()
    rule = registry.get(rule_id)
    if rule is None:
        raise UsageProblem(f"rule {rule_id!r}", "is not a known rule", closest_names(rule_id, sorted(registry.rules)) + "; `prefit why` lists them")
    out = [f"{rule.id}: {rule.summary}", ""]
    out += ["What it does to a fit:"] + textwrap.wrap(rule.why, WRAP, initial_indent="  ", subsequent_indent="  ") + [""]
    if rule.thresholds:
        out.append("Thresholds:")
        for t in rule.thresholds:
            out.append(f"  {t.describe()}  ({t.name}; source: {t.source})")
        out.append("")
    out += ["Remedy:"] + textwrap.wrap(rule.remedy, WRAP, initial_indent="  ", subsequent_indent="  ")
    demo = getattr(rule, "demonstration", None)
    if not callable(demo):
        demo = demonstration_for(rule.id)
    if callable(demo):
        out += ["", "Demonstration on invented warehouse data:", str(demo())]
    return "\n".join(out) + "\n"


def list_by_family(registry: Registry | None = None) -> str:
    """Rule ids and summaries grouped by family."""
    registry = registry or discover()
    out: list[str] = []
    for family in registry.families():
        out.append(f"{family}:")
        for rule in (r for r in registry if rule_family(r.id) == family):
            out.append(f"  {rule.id:34s} {rule.summary}")
    out.append("")
    out.append("`prefit why RULE` explains one rule.")
    return "\n".join(out) + "\n"

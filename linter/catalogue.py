"""The rule catalogue (``prefit rules``) and rule explanations (``prefit why``)."""

from __future__ import annotations

import json
import textwrap

from .errors import UsageProblem, closest_names
from .findings import counted
from .registry import Registry, discover
from .rule import RuleLike, default_grades
from .teaching import DEMONSTRATIONS, Demonstration, demonstration_for
from .teaching.checking import run_on_demonstration

WRAP = 96


def _grades(rule: RuleLike) -> list[str]:
    return [g.word for g in default_grades(rule)]


def catalogue_json(registry: Registry | None = None) -> str:
    """Every rule with its grades, thresholds and sources, as JSON."""
    registry = registry or discover()
    rules = [
        {
            "id": rule.id,
            "family": rule.family,
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


def catalogue_html(registry: Registry | None = None) -> str:
    """Every rule as a self-contained HTML page, one entry per rule (anchor ``rule-family-name``), grouped by family.

    HTML reports carry the same entries for the rules behind their findings, and link each finding to its entry.
    """
    from .report.html import CONTENT_POLICY, STYLE, esc, rule_anchor, rule_entry

    registry = registry or discover()
    sections = []
    for family in registry.families():
        entries = [rule_entry(rule, rule_anchor(rule.id)) for rule in registry if rule.family == family]
        sections.append(f'<section id="family-{esc(family)}"><h2>{esc(family)}</h2>{"".join(entries)}</section>')
    contents = "".join(f'<li><a href="#family-{esc(f)}">{esc(f)}</a></li>' for f in registry.families())
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        f'<meta http-equiv="Content-Security-Policy" content="{CONTENT_POLICY}">'
        f"<title>prefit rule catalogue</title><style>{STYLE}</style></head>\n"
        f'<body><main class="prefit-report"><h1>prefit rule catalogue</h1><nav class="toc"><ul>{contents}</ul></nav>'
        f"{''.join(sections)}</main></body></html>\n"
    )


def catalogue_text(registry: Registry | None = None) -> str:
    """Every rule, one paragraph each, grouped by family."""
    registry = registry or discover()
    out: list[str] = []
    for family in registry.families():
        out.append(f"[{family}]")
        for rule in (r for r in registry if r.family == family):
            grades = "/".join(_grades(rule)) or "-"
            out.append(f"  {rule.id}  ({grades})")
            out.extend(textwrap.wrap(rule.summary, WRAP, initial_indent="      ", subsequent_indent="      "))
            previous_source = None
            for t in rule.thresholds:
                rule_text = f"{t.compare} {t.value:g}" if t.grade is not None else f"= {t.value:g}"
                source = "as above" if t.source == previous_source and len(t.source) > WRAP // 2 else t.source
                out.extend(textwrap.wrap(f"{t.name}: {rule_text}  [{source}]", WRAP, initial_indent="      ", subsequent_indent="          "))
                previous_source = t.source
        out.append("")
    return "\n".join(out)


def explain_rule(rule_id: str, registry: Registry | None = None) -> str:
    """The why, thresholds with sources, and remedy of one rule, for teaching."""
    registry = registry or discover()
    rule = registry.get(rule_id)
    if rule is None and rule_id in registry.families():
        return _explain_family(rule_id, registry)
    if rule is None:
        known = sorted(registry.rules) + registry.families()
        raise UsageProblem(f"{rule_id!r}", "is not a known rule or family", closest_names(rule_id, known, kind="rules and families") + "; `prefit rules` lists them")
    out = [*textwrap.wrap(f"{rule.id}: {rule.summary}", WRAP, subsequent_indent="  "), ""]
    out += ["What it does to a fit:"] + textwrap.wrap(rule.why, WRAP, initial_indent="  ", subsequent_indent="  ") + [""]
    if rule.thresholds:
        out.append("Thresholds:")
        previous_source = None
        for t in rule.thresholds:
            out.append(f"  {t.describe()}")
            source = "as above" if t.source == previous_source and len(t.source) > WRAP // 2 else t.source
            out.extend(textwrap.wrap(f"source: {source}", WRAP, initial_indent="    ", subsequent_indent="      "))
            previous_source = t.source
        out.append("")
    out += ["Remedy:"] + textwrap.wrap(rule.remedy, WRAP, initial_indent="  ", subsequent_indent="  ")
    demo = rule.demonstration
    heading = "Demonstration on invented warehouse data:"
    own = True
    if not callable(demo):
        demo = demonstration_for(rule.id)
        if rule.id not in DEMONSTRATIONS:
            family = rule.family
            heading = f"Demonstration for the {family} family (this rule has none of its own), on invented warehouse data:"
            own = False
    if callable(demo):
        shown = demo()
        out += ["", heading, str(shown)]
        if own and shown.table:
            out += ["", *_found_in_demonstration(rule, shown)]
    return "\n".join(out) + "\n"


def _found_in_demonstration(rule: RuleLike, shown: Demonstration) -> list[str]:
    """What the rule itself reports on the demonstration's table, as `prefit check` would print its first finding."""
    outcome = run_on_demonstration(rule, shown)
    flags = " ".join(_flag(key, value) for key, value in [*shown.options.items(), *shown.companions.items()])
    lines = [f"{rule.id} on the demonstration's table ({flags}):"]
    if outcome.error is not None or not outcome.findings:
        reason = outcome.error or outcome.not_applicable or "no finding"
        return lines + textwrap.wrap(f"nothing to report ({reason})", WRAP, initial_indent="  ", subsequent_indent="    ")
    first = outcome.findings[0]
    lines += textwrap.wrap(f"{first.grade.word}: {first.message}", WRAP, initial_indent="  ", subsequent_indent="    ")
    if len(outcome.findings) > 1:
        lines.append(f"  (and {counted(len(outcome.findings) - 1, 'more finding')})")
    return lines


def _flag(key: str, value: object) -> str:
    """A check option as the command line spells it: ``--id site_id``, ``--group site_id``, ``--baseline last_month.parquet``."""
    from .teaching.checking import COMPANION_FILES

    if key in COMPANION_FILES:
        return f"--{key} {COMPANION_FILES[key]}"
    if key == "ranges" and isinstance(value, dict):
        return " ".join(f"--range {column}={low:g}:{high:g}" for column, (low, high) in value.items())
    flag = key.replace("_", "-")
    if isinstance(value, (list, tuple)):
        return f"--{flag} {','.join(str(v) for v in value)}"
    return f"--{flag} {value}"


def _explain_family(family: str, registry: Registry) -> str:
    """A family's rules, one line each, and the family's demonstration when it has one."""
    out = [f"{family}: {sum(1 for r in registry if r.family == family)} rules", ""]
    for rule in (r for r in registry if r.family == family):
        out.extend(textwrap.wrap(f"{rule.id:34s} {rule.summary}", WRAP + 24, initial_indent="  ", subsequent_indent=" " * 37))
    demo = demonstration_for(family)
    if demo is not None:
        out += ["", "Demonstration on invented warehouse data:", str(demo())]
    out += ["", "`prefit why RULE` explains one rule."]
    return "\n".join(out) + "\n"


def list_by_family(registry: Registry | None = None) -> str:
    """Rule ids and summaries grouped by family."""
    registry = registry or discover()
    out: list[str] = []
    for family in registry.families():
        out.append(f"{family}:")
        for rule in (r for r in registry if r.family == family):
            out.extend(textwrap.wrap(f"{rule.id:34s} {rule.summary}", WRAP + 24, initial_indent="  ", subsequent_indent=" " * 37))
    out.append("")
    out.append("`prefit why RULE` explains one rule; `prefit why FAMILY` lists a family's rules with its demonstration.")
    return "\n".join(out) + "\n"

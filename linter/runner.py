"""Running the rules: configure each from the options, call it, and contain its failures."""

from __future__ import annotations

import traceback
from contextlib import nullcontext
from typing import Iterable, Mapping

import numpy as np

from .context import RunContext
from .errors import UsageProblem, closest_names
from .findings import Finding, Grade
from .options import CheckOptions
from .outcome import RULE_ERROR, RuleOutcome
from .registry import Registry
from .rule import NotApplicable, RuleLike, RuleSettings


def select_rules(registry: Registry, options: CheckOptions) -> list[tuple[RuleLike, RuleSettings]]:
    """The rules to run, each with its configured settings, in id order."""
    families = registry.families()
    for wanted in (*options.skip_rules, *options.rules):
        if registry.get(wanted) is None and wanted not in families:
            raise UsageProblem(f"rule {wanted!r}", "is not a known rule or family", closest_names(wanted, sorted(registry.rules) + families, kind="rules and families") + "; `prefit rules` lists them")
    chosen: list[tuple[RuleLike, RuleSettings]] = []
    for rule in registry:
        if rule.id in options.skip_rules or rule.family in options.skip_rules:
            continue
        config = options.rules.get(rule.id) or options.rules.get(rule.family)
        settings = RuleSettings.defaults(rule)
        if config is not None:
            if not config.enabled:
                continue
            try:
                settings = settings.with_values(config.thresholds)
            except KeyError as exc:
                names = ", ".join(t.name for t in rule.thresholds) or "none"
                raise UsageProblem(f"rule {rule.id}", f"has no threshold {exc.args[0]!r}", f"its thresholds are: {names}") from None
            _check_sides(rule, config.thresholds)
            settings = RuleSettings(settings.rule, settings.thresholds, config.grade, frozenset(config.exempt))
        chosen.append((rule, settings))
    return chosen


def _check_sides(rule: RuleLike, configured: Mapping[str, float]) -> None:
    """Raise when a configured threshold lies on the other side of zero from its default (every default is >= 0)."""
    for default in rule.thresholds:
        if default.name not in configured:
            continue
        value = configured[default.name]
        floor_ok = value > 0 if default.value > 0 else value >= 0
        if default.value >= 0 and not floor_ok:
            side = "positive" if default.value > 0 else "zero or more"
            raise UsageProblem(
                f"rule {rule.id}: threshold {default.name!r}", f"must be {side} like its default {default.value:g}, got {value:g}", f"write e.g. {default.name} = {default.value:g}"
            )


def run_rule(rule: RuleLike, settings: RuleSettings, context: RunContext, debug: bool = False) -> RuleOutcome:
    """Run one rule; an exception becomes an outcome with an error instead of stopping the run.

    Floating-point overflow on extreme tables is silenced here (``hygiene.non-finite``
    reports such values); ``debug`` shows the warnings.
    """
    quiet = nullcontext() if debug else np.errstate(all="ignore")
    try:
        with quiet:
            require_fit(rule, context)
            produced = list(rule.check(context, settings))
        for item in produced:
            if not isinstance(item, Finding):
                raise TypeError(f"check() yielded {type(item).__name__}, not a Finding")
    except NotApplicable as reason:
        return RuleOutcome(rule.id, (), not_applicable=str(reason))
    except MemoryError:
        raise  # the whole run is out of memory, not this rule: the engine says which option helps
    except Exception as exc:  # a rule never crashes the run
        if debug:
            traceback.print_exc()
        return RuleOutcome(rule.id, (), f"{type(exc).__name__}: {exc}")
    kept = tuple(f for f in produced if not (settings.exempt and settings.exempt.intersection(f.columns)))
    return RuleOutcome(rule.id, kept)


def require_fit(rule: RuleLike, context: RunContext) -> None:
    """Raise NotApplicable when a per-row diagnostic of the fit has no fit to diagnose."""
    if not {"rows", "fit"} <= rule.needs:
        return
    if not context.target_is_numeric:
        raise NotApplicable(f"no least-squares fit: the target {context.roles.target} is not numeric")
    design = context.design
    if design.n <= context.fit.rank:
        raise NotApplicable(f"no residual degrees of freedom: {design.n} complete cases for a design of rank {context.fit.rank}")


def error_finding(outcome: RuleOutcome) -> Finding:
    """The report entry for a rule that failed: the check is incomplete."""
    return Finding(
        rule=RULE_ERROR,
        grade=Grade.NOTE,
        message=f"rule {outcome.rule} failed and reported nothing: {outcome.error}",
        remedy=f"the check is incomplete; run with --debug for the traceback and report it, or skip the rule with --skip {outcome.rule}",
        source="prefit engine",
        details={"failed_rule": outcome.rule},
    )


def run_rules(context: RunContext, selected: Iterable[tuple[RuleLike, RuleSettings]], debug: bool = False) -> list[RuleOutcome]:
    """Run every selected rule against one context."""
    return [run_rule(rule, settings, context, debug) for rule, settings in selected]

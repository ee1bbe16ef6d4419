"""Check options, declared once as data so that flags, config keys and their errors agree."""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from typing import Any, Callable, Mapping

from .errors import UsageProblem, closest_names
from .findings import Grade


@dataclass(frozen=True)
class RuleConfig:
    """Per-rule configuration: threshold values, a fixed grade, exempt columns, on/off."""

    thresholds: Mapping[str, float] = field(default_factory=dict)
    grade: Grade | None = None
    exempt: tuple[str, ...] = ()
    enabled: bool = True


@dataclass(frozen=True)
class CheckOptions:
    """Everything that steers one check, after config and flags are merged."""

    target: str | None = None
    id: str | None = None
    exclude: tuple[str, ...] = ()
    predictors: tuple[str, ...] | None = None
    categorical: tuple[str, ...] = ()
    intercept: bool = True
    gate: Grade = Grade.MISLEADS
    skip_rules: tuple[str, ...] = ()
    rules: Mapping[str, RuleConfig] = field(default_factory=dict)
    missing_codes: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    sep: str | None = None
    encoding: str = "utf-8"
    ranges: Mapping[str, tuple[float, float]] = field(default_factory=dict)
    anticipated_r2: float | None = None
    score: str | None = None
    order: str | None = None
    group: str | None = None
    purpose: str = "explain"
    baseline: str | None = None


PURPOSES = ("explain", "predict")


def _as_text(value: Any, where: str) -> str:
    if not isinstance(value, str) or not value:
        raise UsageProblem(where, f"must be a non-empty text, got {value!r}", "write it as a quoted string")
    return value


def _as_names(value: Any, where: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [part.strip() for part in value.split(",") if part.strip()]
    if not isinstance(value, (list, tuple)) or not all(isinstance(v, str) for v in value):
        raise UsageProblem(where, f"must be a list of column names, got {value!r}", 'write e.g. ["a", "b"] or a,b')
    return tuple(value)


def _as_grade(value: Any, where: str) -> Grade:
    try:
        return Grade.parse(_as_text(value, where))
    except ValueError as exc:
        raise UsageProblem(where, str(exc).split(";")[0], str(exc).split("; ")[1]) from None


def _as_bool(value: Any, where: str) -> bool:
    if not isinstance(value, bool):
        raise UsageProblem(where, f"must be true or false, got {value!r}", "write true or false")
    return value


def _as_codes(value: Any, where: str) -> dict[str, tuple[str, ...]]:
    if not isinstance(value, Mapping):
        raise UsageProblem(where, f"must map column names (or \"*\") to codes, got {value!r}", 'write e.g. {humidity_pct = [-999]}')
    codes: dict[str, tuple[str, ...]] = {}
    for column, listed in value.items():
        items = listed if isinstance(listed, (list, tuple)) else [listed]
        if not all(isinstance(c, (str, int, float)) and not isinstance(c, bool) for c in items):
            raise UsageProblem(f"{where}.{column}", f"must be numbers or texts, got {listed!r}", "write e.g. [-999, \"N/A\"]")
        codes[str(column)] = tuple(_code_text(c) for c in items)
    return codes


def _as_number(value: Any, where: str) -> float:
    """A finite number (nan and the infinities are refused: a nan limit would pass every comparison silently)."""
    if isinstance(value, str):
        try:
            value = float(value)
        except ValueError:
            pass
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value or value in (float("inf"), float("-inf")):
        raise UsageProblem(where, f"must be a finite number, got {value!r}", "write e.g. 0.5")
    return float(value)


def _as_share(value: Any, where: str) -> float:
    number = _as_number(value, where)
    if not 0.0 < number < 1.0:
        raise UsageProblem(where, f"must lie strictly between 0 and 1, got {number:g}", "write e.g. 0.6")
    return number


def _as_purpose(value: Any, where: str) -> str:
    text = _as_text(value, where).strip().lower()
    if text not in PURPOSES:
        raise UsageProblem(where, f"must be one of {', '.join(PURPOSES)}, got {value!r}", "write explain (coefficients read as effects) or predict (new rows scored)")
    return text


def _as_ranges(value: Any, where: str) -> dict[str, tuple[float, float]]:
    if not isinstance(value, Mapping):
        raise UsageProblem(where, f"must map column names to [low, high], got {value!r}", "write e.g. {outdoor_c = [-10, 38]}")
    ranges: dict[str, tuple[float, float]] = {}
    for column, bounds in value.items():
        here = f"{where}.{column}"
        if isinstance(bounds, str):
            bounds = bounds.split(":")
        if not isinstance(bounds, (list, tuple)) or len(bounds) != 2:
            raise UsageProblem(here, f"must be [low, high] or \"LOW:HIGH\", got {bounds!r}", "write e.g. [-10, 38]")
        low, high = (_as_number(b, here) for b in bounds)
        if not low < high:
            raise UsageProblem(here, f"must have low < high, got {low:g} and {high:g}", "write the lower end first")
        ranges[str(column)] = (low, high)
    return ranges


def _code_text(code: str | int | float) -> str:
    if isinstance(code, float) and code.is_integer():
        return str(int(code))
    return str(code)


def _as_rules(value: Any, where: str) -> dict[str, RuleConfig]:
    if not isinstance(value, Mapping):
        raise UsageProblem(where, "must be a table of rule ids", 'write e.g. [tool.prefit.rule."collinearity.vif"]')
    parsed: dict[str, RuleConfig] = {}
    for rule_id, body in value.items():
        here = f"{where}.{rule_id}"
        if not isinstance(body, Mapping):
            raise UsageProblem(here, "must be a table", "write thresholds = {...}, grade = ..., exempt = [...], enabled = ...")
        unknown = sorted(set(body) - RULE_KEYS)
        if unknown:
            raise UsageProblem(here, f"has unknown key {unknown[0]!r}", f"use only {', '.join(sorted(RULE_KEYS))}")
        limits = body.get("thresholds", {})
        if not isinstance(limits, Mapping):
            raise UsageProblem(f"{here}.thresholds", "must map threshold names to numbers", "write e.g. {misleads = 8}")
        parsed[str(rule_id)] = RuleConfig(
            thresholds={str(k): _as_number(v, f"{here}.thresholds.{k}") for k, v in limits.items()},
            grade=_as_grade(body["grade"], f"{here}.grade") if "grade" in body else None,
            exempt=_as_names(body.get("exempt", []), f"{here}.exempt"),
            enabled=_as_bool(body.get("enabled", True), f"{here}.enabled"),
        )
    return parsed


RULE_KEYS = frozenset({"thresholds", "grade", "exempt", "enabled"})


@dataclass(frozen=True)
class Setting:
    """One configuration key: the CheckOptions field it fills and how its value is checked."""

    key: str
    field: str
    parse: Callable[[Any, str], Any]
    help: str


SETTINGS: tuple[Setting, ...] = (
    Setting("target", "target", _as_text, "the response column"),
    Setting("id", "id", _as_text, "a column of row labels, never a predictor"),
    Setting("exclude", "exclude", _as_names, "columns left out of the predictors"),
    Setting("predictors", "predictors", _as_names, "exactly these predictors"),
    Setting("categorical", "categorical", _as_names, "numeric columns to treat as categories"),
    Setting("intercept", "intercept", _as_bool, "whether the model has an intercept"),
    Setting("fail-at", "gate", _as_grade, "the weakest grade that fails the check (as --fail-at)"),
    Setting("skip", "skip_rules", _as_names, "rule ids (or families) not to run (as --skip)"),
    Setting("gate", "gate", _as_grade, "older spelling of fail-at, kept for one release"),
    Setting("skip-rules", "skip_rules", _as_names, "older spelling of skip, kept for one release"),
    Setting("rule", "rules", _as_rules, "per-rule thresholds, grade, exempt columns, enabled"),
    Setting("missing-codes", "missing_codes", _as_codes, "per-column values that mean missing ('*' for all)"),
    Setting("sep", "sep", _as_text, "the delimiter of text tables"),
    Setting("encoding", "encoding", _as_text, "the encoding of text tables"),
    Setting("ranges", "ranges", _as_ranges, "per-column range the model is meant to cover, [low, high]"),
    Setting("anticipated-r2", "anticipated_r2", _as_share, "the R-squared expected of the model, for sample-size planning"),
    Setting("score", "score", _as_text, "a table of new rows the model will be asked to predict"),
    Setting("order", "order", _as_text, "a column giving the rows' time order, for the autocorrelation preview"),
    Setting("baseline", "baseline", _as_text, "the last accepted extract (a profile from --save-baseline, or the table) to vet this one against"),
    Setting("purpose", "purpose", _as_purpose, "what the model is for: explain (read its coefficients) or predict (score new rows)"),
    Setting("group", "group", _as_text, "a column whose equal values mark rows of one group (site, customer, machine); \"none\" turns grouping off"),
)
SETTINGS_BY_KEY: Mapping[str, Setting] = {s.key: s for s in SETTINGS}


def parse_settings(raw: Mapping[str, Any], where: str) -> dict[str, Any]:
    """Check a configuration table against :data:`SETTINGS`; return CheckOptions field values."""
    values: dict[str, Any] = {}
    for old, new in (("gate", "fail-at"), ("skip-rules", "skip")):
        if old in raw and new in raw:
            raise UsageProblem(f"{where}: keys {new!r} and {old!r}", "both set the same thing", f"keep {new!r} (the older {old!r} goes after this release)")
    for key, value in raw.items():
        setting = SETTINGS_BY_KEY.get(key)
        if setting is None:
            raise UsageProblem(
                f"{where}: key {key!r}", "is not a prefit setting", closest_names(key, list(SETTINGS_BY_KEY), kind="keys").replace("closest", "known keys close to it")
            )
        values[setting.field] = setting.parse(value, f"{where}: {key}")
    return values


def options_from(**settings: Any) -> CheckOptions:
    """CheckOptions from keyword settings (config keys with ``_`` for ``-``, or field names)."""
    raw: dict[str, Any] = {}
    for key, value in settings.items():
        if value is None:
            continue
        config_key = key.replace("_", "-")
        if key == "fail_at":
            config_key = "gate"
        if config_key not in SETTINGS_BY_KEY and key in {f.name for f in fields(CheckOptions)}:
            config_key = next(s.key for s in SETTINGS_BY_KEY.values() if s.field == key)
        raw[config_key] = value
    return replace(CheckOptions(), **parse_settings(raw, "prefit.check"))

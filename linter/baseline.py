"""Baseline profiles: what a check keeps of an accepted extract, to vet the next extract against it.

A profile is a small JSON document (``format`` :data:`PROFILE_FORMAT`,
``version`` :data:`PROFILE_VERSION`) written by ``prefit check OLD --save-baseline
FILE`` from the statistics the check computed anyway. It holds, and only holds:

- ``table``: the checked table's path, format, row and column counts and SHA-256;
- ``rows_seen``: how many rows the table has, and whether every summary saw
  every row: beyond the row budget of the stream and Dask engines, counts,
  moments, level counts and the fit still come from pass 1 over every row,
  but distributions, observed ranges and the largest leverage come from the
  uniform sample the rules saw (each distribution's rank error says so);
- ``roles``: target, row-label column, predictors and whether the model has an intercept;
- ``columns``: per column its kind, role and Arrow type, row, missing and
  non-finite counts, and for numeric and true/false columns the count, mean,
  central moment sums (2nd to 4th), minimum and maximum of the finite values;
  for the target and numeric predictors their distribution (every distinct
  value with the count of values at or below it when there are at most
  :data:`~prefit.stats.distribution.SKETCH_POINTS`, else that many evenly
  spaced order statistics, with the rank error this leaves); for categorical and
  true/false predictors the count of each level among complete cases;
- ``model``: the design's terms (with reference levels), the coefficients,
  their standard errors, the residual SD, RSS and complete-case count, the
  observed range of each numeric predictor over complete cases, the largest
  leverage among them, and the pivoted QR factor of the unit-length-scaled
  design with ``Q'y`` (``R`` gives ``X'X = R'R`` without any row).

No row of the table is stored: a distribution of a column with few distinct
values lists those values, and a sketch lists a few hundred order
statistics, but neither links values of different columns or says which row
held them.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, replace
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from . import __version__
from .design import Term, category_codes
from .errors import UsageProblem
from .findings import plain_json
from .reading import TableInfo
from .roles import Kind
from .stats.distribution import SAMPLE_CONFIDENCE, Distribution, dkw_rank_error
from .stats.factor import DesignFactor
from .stats.fit import PreliminaryFit
from .stats.mergeable import Moments
from .stats.positions import hashed_share

if TYPE_CHECKING:
    from .context import RunContext
    from .outcome import Report

PROFILE_FORMAT = "prefit-baseline"
PROFILE_VERSION = 1
LEVEL_CAP = 1_000
SKETCH_ROWS = 250_000
SKETCH_SEED = 0x5EED_D157


@dataclass(frozen=True)
class ColumnProfile:
    """What a baseline keeps of one column (see the module docstring)."""

    name: str
    kind: Kind
    role: str
    arrow_type: str
    rows: int
    missing: int
    nonfinite: int
    moments: Moments | None = None
    distribution: Distribution | None = None
    levels: Mapping[str, int] | None = None

    @property
    def missing_share(self) -> float:
        """Share of rows without a usable value (missing or non-finite)."""
        return (self.missing + self.nonfinite) / self.rows if self.rows else float("nan")

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types."""
        out: dict[str, Any] = {"kind": str(self.kind), "role": self.role, "type": self.arrow_type, "rows": self.rows, "missing": self.missing, "nonfinite": self.nonfinite}
        if self.moments is not None and self.moments.count:
            m = self.moments
            out["moments"] = {"count": m.count, "mean": m.mean, "m2": m.m2, "m3": m.m3, "m4": m.m4, "min": m.minimum, "max": m.maximum}
        if self.distribution is not None:
            out["distribution"] = self.distribution.to_dict()
        if self.levels is not None:
            out["levels"] = dict(self.levels)
        return out

    @classmethod
    def from_dict(cls, name: str, data: Mapping[str, Any]) -> "ColumnProfile":
        """The inverse of :meth:`to_dict`."""
        m = data.get("moments")
        moments = Moments(int(m["count"]), float(m["mean"]), float(m["m2"]), float(m["m3"]), float(m["m4"]), float(m["min"]), float(m["max"])) if m else None
        dist = data.get("distribution")
        return cls(
            name, Kind(data["kind"]), str(data["role"]), str(data["type"]), int(data["rows"]), int(data["missing"]), int(data["nonfinite"]),
            moments, Distribution.from_dict(dist) if dist else None,
            {str(k): int(v) for k, v in data["levels"].items()} if "levels" in data else None,
        )


@dataclass(frozen=True)
class ModelProfile:
    """The baseline's design terms and its least-squares fit, kept as the pivoted QR factor (see the module docstring)."""

    intercept: bool
    terms: tuple[Term, ...]
    factor: DesignFactor
    tss: float
    observed: Mapping[str, tuple[float, float]]
    largest_leverage: float

    @cached_property
    def fit(self) -> PreliminaryFit:
        """The baseline fit, rebuilt from the kept factor: coefficients, standard errors, residual SD, leverage map."""
        return PreliminaryFit(self.factor, self.tss, self.intercept)

    @property
    def column_names(self) -> tuple[str, ...]:
        """The design columns, in order."""
        return tuple(c for t in self.terms for c in t.columns)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON types; floats written with every digit, so a profile read back fits exactly as written."""
        fit, f = self.fit, self.factor
        return {
            "intercept": self.intercept,
            "terms": [
                {"column": t.source, "kind": str(t.kind) if t.kind else "intercept", "columns": list(t.columns), **({"levels": list(t.levels), "reference": t.reference} if t.reference is not None else {})}
                for t in self.terms
            ],
            "complete_cases": fit.n,
            "rank": fit.rank,
            "coefficients": dict(zip(self.column_names, fit.coef.tolist())),
            "standard_errors": dict(zip(self.column_names, fit.se.tolist())),
            "residual_sd": fit.sigma,
            "rss": fit.rss,
            "tss": self.tss,
            "observed_ranges": {k: list(v) for k, v in self.observed.items()},
            "largest_leverage": self.largest_leverage,
            "factor": {"scales": f.scales.tolist(), "r": f.r.tolist(), "perm": f.perm.tolist(), "qty": f.qty.tolist(), "rss_outside": f.rss_outside, "n": f.n},
        }

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "ModelProfile":
        """The inverse of :meth:`to_dict`."""
        terms = tuple(
            Term(t["column"], None if t["kind"] == "intercept" else Kind(t["kind"]), tuple(t["columns"]), tuple(t.get("levels", ())), t.get("reference"))
            for t in data["terms"]
        )
        f = data["factor"]
        p = len(f["scales"])
        factor = DesignFactor(
            np.asarray(f["scales"], dtype=np.float64), np.asarray(f["r"], dtype=np.float64).reshape(p, p),
            np.asarray(f["perm"], dtype=np.int64), np.asarray(f["qty"], dtype=np.float64), float(f["rss_outside"]), int(f["n"]),
        )
        observed = {k: (float(v[0]), float(v[1])) for k, v in data["observed_ranges"].items()}
        return cls(bool(data["intercept"]), terms, factor, float(data["tss"]), observed, _nan_if_none(data["largest_leverage"]))


@dataclass(frozen=True)
class BaselineProfile:
    """A baseline: the accepted table's facts, roles, column profiles and fit.

    ``origin`` and ``digest`` say where this run read it from (the profile file,
    or a table profiled on the fly) and that file's SHA-256; they are not part
    of the written profile.
    """

    table: TableInfo
    rows_seen: int
    sampled: bool
    target: str
    id: str | None
    predictors: tuple[str, ...]
    columns: Mapping[str, ColumnProfile]
    model: ModelProfile | None
    origin: str = ""
    digest: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """The profile as written: plain JSON types with the format and version first."""
        return {
            "format": PROFILE_FORMAT,
            "version": PROFILE_VERSION,
            "tool": {"name": "prefit", "version": __version__},
            "table": {"path": self.table.path, "format": self.table.format, "rows": self.table.rows, "columns": self.table.columns, "sha256": self.table.sha256},
            "rows_seen": {"rows": self.rows_seen, "every_row": not self.sampled},
            "roles": {"target": self.target, "id": self.id, "predictors": list(self.predictors)},
            "columns": {name: c.to_dict() for name, c in self.columns.items()},
            "model": self.model.to_dict() if self.model is not None else None,
        }

    def to_json(self) -> str:
        """The profile file's text: JSON with one key per line and each list of numbers on one line; NaN written as null."""
        return _dumped(plain_json(self.to_dict()), 0) + "\n"

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], origin: str = "", digest: str | None = None) -> "BaselineProfile":
        """The inverse of :meth:`to_dict`."""
        t = data["table"]
        roles = data["roles"]
        return cls(
            table=TableInfo(str(t["path"]), str(t["format"]), int(t["rows"]), int(t["columns"]), t.get("sha256")),
            rows_seen=int(data["rows_seen"]["rows"]),
            sampled=not bool(data["rows_seen"]["every_row"]),
            target=str(roles["target"]),
            id=roles.get("id"),
            predictors=tuple(roles["predictors"]),
            columns={name: ColumnProfile.from_dict(name, c) for name, c in data["columns"].items()},
            model=ModelProfile.from_dict(data["model"]) if data.get("model") else None,
            origin=origin,
            digest=digest,
        )

    def describe(self) -> dict[str, Any]:
        """Where this run's baseline came from, for the report header."""
        return {"path": self.origin, "sha256": self.digest, "table": self.table.path, "rows": self.table.rows}


def _nan_if_none(value: Any) -> float:
    return float("nan") if value is None else float(value)


def _dumped(value: Any, depth: int) -> str:
    """Indented JSON whose objects take a line per key and whose lists stay on one line (a 512-point sketch is one line)."""
    if isinstance(value, dict) and value:
        inner = " " * (depth + 1)
        items = [f"{inner}{json.dumps(k, ensure_ascii=False)}: {_dumped(v, depth + 1)}" for k, v in value.items()]
        return "{\n" + ",\n".join(items) + "\n" + " " * depth + "}"
    return json.dumps(value, ensure_ascii=False, allow_nan=False)


def _role(name: str, ctx: "RunContext") -> str:
    roles = ctx.roles
    if name == roles.target:
        return "target"
    if name == roles.id:
        return "id"
    if name in roles.predictors:
        return "predictor"
    return "left out"


def complete_level_counts(ctx: "RunContext", column: str) -> dict[str, int]:
    """Each level's count among the complete cases (the rows the fit uses), at most :data:`LEVEL_CAP` levels."""
    codes, labels = category_codes(ctx.table.column(column), ctx.roles.kinds[column])
    kept = codes[ctx.design.positions]
    counts = np.bincount(kept[kept >= 0], minlength=len(labels))
    return {labels[i]: int(c) for i, c in sorted(enumerate(counts), key=lambda item: labels[item[0]]) if c > 0}


def profile_of(ctx: "RunContext") -> BaselineProfile:
    """The baseline profile of a checked table, from the statistics its check computed.

    Counts, moments, level counts and the R factor are the context's: under
    the stream and Dask engines, the merged pass-1 statistics of every row
    (:attr:`RunContext.whole_statistics`), also when the rules saw a sample.
    The distributions are sketched from the rows the context holds, or from
    a seeded, position-hashed uniform sample of about :data:`SKETCH_ROWS` of
    them (a sort of a quarter of a million values per column instead of
    millions), with the Dvoretzky-Kiefer-Wolfowitz bound of each sample added
    to the rank error; beyond the row budget the observed ranges and the
    largest leverage are the sample's.
    """
    roles = ctx.roles
    sampled = ctx.file_positions is not None
    held = ctx.table.num_rows
    sketched = hashed_share(np.arange(held), SKETCH_ROWS / held, SKETCH_SEED) if held > SKETCH_ROWS else None
    whole = ctx.whole_statistics if sampled else None
    model_columns = set(ctx.model_columns)
    columns: dict[str, ColumnProfile] = {}
    for name in ctx.table.column_names:
        kind = roles.kinds[name]
        column = ctx.table.column(name)
        base = ColumnProfile(name, kind, _role(name, ctx), str(column.type), len(column), column.null_count, 0)
        if whole is not None and whole.tallies:
            tally = whole.tallies.get(name)
        else:
            tally = ctx.tally(name) if kind in (Kind.NUMERIC, Kind.BOOLEAN) else None
        if tally is not None:
            moments = tally.moments if kind in (Kind.NUMERIC, Kind.BOOLEAN) else None
            base = replace(base, rows=tally.rows, missing=tally.missing, nonfinite=tally.nonfinite, moments=moments)
        if name in model_columns and kind is Kind.NUMERIC:
            values = ctx.values(name)
            error = dkw_rank_error(int(np.count_nonzero(np.isfinite(values))), SAMPLE_CONFIDENCE) if sampled else 0.0
            if sketched is not None:
                values = values[sketched]
                error += dkw_rank_error(int(np.count_nonzero(np.isfinite(values))), SAMPLE_CONFIDENCE)
            base = replace(base, distribution=Distribution.of(values, sample_error=error))
        elif name in roles.predictors and kind in (Kind.CATEGORICAL, Kind.BOOLEAN) and ctx.target_is_numeric:
            counts = dict(sorted(whole.model.level_counts[name].items())) if whole is not None else complete_level_counts(ctx, name)
            base = replace(base, levels=counts if len(counts) <= LEVEL_CAP else None)
        columns[name] = base
    model = None
    if ctx.target_is_numeric and ctx.design.n > 0:
        design = ctx.design
        observed = {}
        for term in design.terms:
            if term.kind is Kind.NUMERIC and term.reference is None:
                values = ctx.design_column(term.source)
                observed[term.source] = (float(values.min()), float(values.max()))
        hat = ctx.row_scores.hat
        largest = float(hat.max()) if hat.size else float("nan")
        if whole is not None:
            terms = whole.model.terms(roles.kinds)
            factor, tss = whole.model.design_factor(terms), whole.model.total_sum_of_squares(ctx.options.intercept)
        else:
            terms, factor, tss = design.terms, ctx.factor, ctx.fit.tss
        model = ModelProfile(ctx.options.intercept, terms, factor, tss, observed, largest)
    rows = whole.rows if whole is not None else ctx.table.num_rows
    return BaselineProfile(ctx.info, rows, sampled, roles.target, roles.id, roles.predictors, columns, model)


def save_profile(profile: BaselineProfile, path: str | Path) -> None:
    """Write ``profile`` to ``path`` (a usage problem when it cannot be written)."""
    try:
        Path(path).write_text(profile.to_json(), encoding="utf-8")
    except OSError as exc:
        raise UsageProblem(f"--save-baseline {path}", f"cannot be written ({exc.strerror})", "choose a writable path") from None


def read_profile(path: str) -> BaselineProfile | None:
    """Read a baseline profile file written by ``--save-baseline``; None when ``path`` is a table, which the engine profiles now."""
    where = f"--baseline {path}"
    if not Path(path).is_file():
        raise UsageProblem(where, "names no file", "give a profile written by --save-baseline, or the accepted table itself")
    with open(path, "rb") as handle:
        head = handle.read(256)
    if head.lstrip().startswith(b"{") and b'"format"' in head:
        raw = Path(path).read_bytes()
        try:
            data = json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise UsageProblem(where, f"is not valid JSON ({exc})", "write it again with --save-baseline") from None
        if not isinstance(data, dict) or data.get("format") != PROFILE_FORMAT:
            raise UsageProblem(where, f"is JSON but not a prefit baseline (no \"format\": \"{PROFILE_FORMAT}\")", "write it with --save-baseline")
        if data.get("version") != PROFILE_VERSION:
            raise UsageProblem(where, f"has profile version {data.get('version')!r}, this prefit reads version {PROFILE_VERSION}", "write it again with this prefit's --save-baseline")
        try:
            return BaselineProfile.from_dict(data, origin=path, digest=hashlib.sha256(raw).hexdigest())
        except (KeyError, TypeError, ValueError) as exc:
            raise UsageProblem(where, f"is a damaged profile ({type(exc).__name__}: {exc})", "write it again with --save-baseline") from None
    return None


def write_baseline(report: Report, path: str | Path) -> BaselineProfile:
    """Write the baseline profile of a checked table (``--save-baseline``) and return it."""
    profile = report.profile
    if profile is None:
        raise UsageProblem("--save-baseline", "needs the statistics of a check run in this process", "run the check and save in one call")
    save_profile(profile, path)
    return profile

"""Load a NIST StRD linear-regression dataset and its certified values as a table prefit can check.

The data and the certified values are NIST's own (tests/reference/nist-strd, public domain). Polynomial
datasets become a table of the powers x, x^2, ..., x^k computed in double precision, which is what an
analyst would hand to prefit; the others keep their predictor columns as given.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from conftest import REFERENCE

NIST = REFERENCE / "nist-strd"


@dataclass(frozen=True)
class Certified:
    """One dataset: the table to check, its target, whether the model has an intercept, and NIST's values."""

    name: str
    table: pd.DataFrame
    target: str
    intercept: bool
    estimates: np.ndarray
    standard_errors: np.ndarray
    estimate_texts: tuple[str, ...]
    sd_texts: tuple[str, ...]
    residual_sd: float
    r_squared: float
    raw: dict[str, Any]


def certified_rounding(texts: tuple[str, ...]) -> np.ndarray:
    """Half a unit in the last printed digit of each certified value: how exact the certificate itself is."""
    out = []
    for text in texts:
        mantissa = text.strip().lstrip("+-").upper().split("E")[0]
        exponent = int(text.upper().split("E")[1]) if "E" in text.upper() else 0
        decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
        out.append(0.5 * 10.0 ** (exponent - decimals))
    return np.array(out)


def load(name: str) -> Certified:
    """The dataset ``name`` (e.g. ``"Filip"``) with its certified values."""
    raw = json.loads((NIST / f"{name.lower()}.certified.json").read_text(encoding="utf-8"))
    lines = (NIST / raw["file"]).read_text(encoding="utf-8").splitlines()
    first, last = raw["data_file_lines"]
    rows = np.array([[float(token) for token in line.split()] for line in lines[first - 1 : last]])
    y, predictors = rows[:, 0], rows[:, 1:]
    degree = raw.get("polynomial_degree_in_x")
    if degree:
        x = predictors[:, 0]
        columns = {("x" if k == 1 else f"x{k}"): x**k for k in range(1, degree + 1)}
    else:
        columns = {f"x{j + 1}": predictors[:, j] for j in range(predictors.shape[1])}
    table = pd.DataFrame({"y": y, **columns})
    parameters = raw["parameters"]
    return Certified(
        name=name,
        table=table,
        target="y",
        intercept=bool(raw["intercept"]),
        estimates=np.array([p["estimate"] for p in parameters]),
        standard_errors=np.array([p["sd"] for p in parameters]),
        estimate_texts=tuple(p["estimate_text"] for p in parameters),
        sd_texts=tuple(p["sd_text"] for p in parameters),
        residual_sd=float(raw["residual_sd"]),
        r_squared=float(raw["r_squared"]),
        raw=raw,
    )

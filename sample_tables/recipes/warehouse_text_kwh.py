"""The energy target exported as text with thousands separators ("12,345.6")."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_text_kwh"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("target.not-numeric", "blocks", ("energy_kwh",)),
    ("hygiene.numeric-as-text", "misleads", ("energy_kwh",)),
    ("outliers.univariate", "note", ("floor_area_m2",)),
]
FIX_FIRST = [
    ("target.not-numeric", "blocks", ("energy_kwh",), 0),
    ("hygiene.numeric-as-text", "misleads", ("energy_kwh",), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    frame["energy_kwh"] = [f"{v:,.1f}" for v in frame["energy_kwh"]]
    return frame

"""Last year's energy on the same day, a predictor exported as text with thousands separators ("12,345")."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_text_last_year"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("hygiene.numeric-as-text", "weakens", ("last_year_kwh",)),
    ("design.excluded-column", "note", ("last_year_kwh",)),
    ("outliers.univariate", "note", ("pallets_stored",)),
]
FIX_FIRST = [
    ("hygiene.numeric-as-text", "weakens", ("last_year_kwh",), 0),
]
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    last_year = frame["energy_kwh"] * rng.uniform(0.8, 1.2, len(frame))
    frame["last_year_kwh"] = [f"{v:,.0f}" for v in last_year]
    return frame

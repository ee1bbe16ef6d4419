"""Holes: door counts missing for a sixth of site-days (a counter offline), stored as Parquet."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_holes"
FORMAT = "parquet"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("missingness.column-rate", "weakens", ("door_openings",)),
    ("missingness.complete-cases", "weakens", ("door_openings", "outdoor_c")),
    ("missingness.pattern", "weakens", ("outdoor_c", "door_openings")),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
]
FIX_FIRST = [
    ("missingness.column-rate", "weakens", ("door_openings",), 0),
    ("missingness.complete-cases", "weakens", ("door_openings", "outdoor_c"), 0),
    ("missingness.pattern", "weakens", ("outdoor_c", "door_openings"), 0),
]
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    n = len(frame)
    doors = frame["door_openings"].astype("Float64")
    doors[rng.random(n) < 0.16] = pd.NA
    frame["door_openings"] = doors
    outdoor = frame["outdoor_c"].copy()
    outdoor[rng.random(n) < 0.01] = np.nan
    frame["outdoor_c"] = outdoor
    return frame

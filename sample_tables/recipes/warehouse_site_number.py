"""The site code exported as a number (101 to 140, rows sorted by site) and left among the predictors."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_site_number"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--exclude", "day"]
EXPECTED = [
    ("hygiene.identifier", "misleads", ("site_id",)),
    ("outliers.multivariate", "note", ("site_id", "outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles")),
]
FIX_FIRST = [
    ("hygiene.identifier", "misleads", ("site_id",), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    frame["site_id"] = frame["site_id"].str.removeprefix("CS-").astype(int) + 100
    return frame

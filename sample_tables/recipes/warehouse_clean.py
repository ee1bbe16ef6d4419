"""A clean extract: 40 sites of similar size x 90 days, linear response, no holes, no dependencies. It passes the
default gate; its one finding (weakens) is about robust distances of whole sites."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_clean"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("outliers.multivariate", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles")),
]
FIX_FIRST = [
    ("outliers.multivariate", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles"), 0),
]
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    return site_days(rng, similar_sites=True)

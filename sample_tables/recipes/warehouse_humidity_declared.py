"""The table `warehouse_humidity_codes` again, its -999 dropouts declared missing with --missing-codes: the holes they leave depend on heat and load."""

import zlib

import numpy as np
import pandas as pd

from .warehouse_humidity_codes import NAME as CODES_NAME
from .warehouse_humidity_codes import humidity_with_dropouts

NAME = "warehouse_humidity_declared"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--missing-codes", "humidity_pct=-999"]
EXPECTED = [
    ("missingness.column-rate", "weakens", ("humidity_pct",)),
    ("missingness.complete-cases", "note", ("humidity_pct",)),
    ("missingness.informative", "misleads", ("humidity_pct", "energy_kwh", "outdoor_c", "pallets_stored", "door_openings", "floor_area_m2")),
    ("missingness.mcar", "weakens", ("humidity_pct",)),
    ("missingness.pattern", "note", ("humidity_pct",)),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles", "humidity_pct")),
]
FIX_FIRST = [
    ("missingness.informative", "misleads", ("humidity_pct", "energy_kwh", "outdoor_c", "pallets_stored", "door_openings", "floor_area_m2"), 0),
    ("missingness.column-rate", "weakens", ("humidity_pct",), 0),
    ("missingness.mcar", "weakens", ("humidity_pct",), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    return humidity_with_dropouts(np.random.default_rng(zlib.crc32(CODES_NAME.encode("utf-8"))))

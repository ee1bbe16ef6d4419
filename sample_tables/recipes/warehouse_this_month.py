"""This month's extract (July) vetted against last month's (`--baseline`): the same 40 sites, but the building-management
export now writes `outdoor_c` in degrees Fahrenheit, and four sites replaced their compressors with a type last month's
extract never had (`magnetic centrifugal`)."""

import numpy as np
import pandas as pd

from ._warehouse import site_days
from .warehouse_last_month import DAYS, site_facts

NAME = "warehouse_this_month"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--baseline", "sample_tables/warehouse_last_month.csv"]
EXPECTED = [
    ("drift.coverage", "note", ("outdoor_c", "door_openings", "pallets_stored")),
    ("drift.levels", "misleads", ("compressor_type",)),
    ("drift.units", "misleads", ("outdoor_c",)),
    ("grouping.between-predictors", "weakens", ("floor_area_m2", "compressor_type")),
]
FIX_FIRST = [
    ("drift.levels", "misleads", ("compressor_type",), 0),
    ("drift.units", "misleads", ("outdoor_c",), 0),
    ("grouping.between-predictors", "weakens", ("floor_area_m2", "compressor_type"), 0),
]
EXIT_CODE = 1
NEW_TYPE = "magnetic centrifugal"
REPLACED_SITES = ("CS-004", "CS-017", "CS-023", "CS-036")


def build(rng: np.random.Generator) -> pd.DataFrame:
    facts = site_facts()
    facts.loc[facts["site_id"].isin(REPLACED_SITES), "compressor_type"] = NEW_TYPE
    frame = site_days(rng, days=DAYS, facts=facts, start="2026-07-01")
    frame["outdoor_c"] = (frame["outdoor_c"] * 1.8 + 32).round(1)
    return frame

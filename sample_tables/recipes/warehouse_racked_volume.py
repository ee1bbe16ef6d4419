"""Racked volume next to floor area: every site's racks stand about six metres high, so the two move together."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_racked_volume"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("collinearity.condition", "misleads", ("floor_area_m2", "rack_volume_m3")),
    ("grouping.between-predictors", "weakens", ("floor_area_m2", "compressor_type", "rack_volume_m3")),
    ("grouping.group-outliers", "weakens", ("floor_area_m2", "rack_volume_m3")),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
]
FIX_FIRST = [
    ("collinearity.condition", "misleads", ("floor_area_m2", "rack_volume_m3"), 0),
    ("grouping.between-predictors", "weakens", ("floor_area_m2", "compressor_type", "rack_volume_m3"), 0),
    ("grouping.group-outliers", "weakens", ("floor_area_m2", "rack_volume_m3"), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    site_codes = frame["site_id"].unique()
    racked_height = dict(zip(site_codes, rng.uniform(5.5, 6.5, site_codes.size)))
    frame["rack_volume_m3"] = (frame["floor_area_m2"] * frame["site_id"].map(racked_height)).round(-1)
    return frame

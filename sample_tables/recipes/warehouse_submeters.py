"""Sub-meter readings next to their exact total: gross_kwh = compressor_kwh + lighting_kwh + defrost_kwh."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_submeters"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.nonlinearity", "weakens", ("compressor_kwh", "gross_kwh")),
    ("collinearity.condition", "misleads", ("floor_area_m2", "defrost_cycles", "compressor_kwh", "lighting_kwh", "defrost_kwh")),
    ("collinearity.exact", "blocks", ("compressor_kwh", "lighting_kwh", "defrost_kwh", "gross_kwh")),
]
FIX_FIRST = [
    ("collinearity.exact", "blocks", ("compressor_kwh", "lighting_kwh", "defrost_kwh", "gross_kwh"), 0),
    ("collinearity.condition", "misleads", ("floor_area_m2", "defrost_cycles", "compressor_kwh", "lighting_kwh", "defrost_kwh"), 0),
    ("assumptions.nonlinearity", "weakens", ("compressor_kwh", "gross_kwh"), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    n = len(frame)
    frame["compressor_kwh"] = (frame["energy_kwh"] * rng.uniform(0.55, 0.7, n)).round(0)
    frame["lighting_kwh"] = (frame["floor_area_m2"] * 0.004 * rng.uniform(0.8, 1.2, n)).round(0)
    frame["defrost_kwh"] = (frame["defrost_cycles"] * rng.uniform(25, 40, n)).round(0)
    frame["gross_kwh"] = frame["compressor_kwh"] + frame["lighting_kwh"] + frame["defrost_kwh"]
    return frame

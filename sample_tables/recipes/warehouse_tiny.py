"""A small extract: 18 site-days with 9 predictors (10 parameters with the intercept)."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_tiny"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_day"]
EXPECTED = [
    ("collinearity.condition", "misleads", ("outdoor_c", "floor_area_m2", "racks")),
    ("influence.cooks-distance", "weakens", ()),
    ("influence.dfbetas", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "humidity_pct", "racks", "staff_on_shift", "forklift_hours")),
    ("outliers.univariate", "note", ("outdoor_c", "pallets_stored")),
    ("sample-size.minimum", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "humidity_pct", "racks", "staff_on_shift", "forklift_hours")),
    ("sample-size.per-parameter", "misleads", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "humidity_pct", "racks", "staff_on_shift", "forklift_hours")),
]
FIX_FIRST = [
    ("collinearity.condition", "misleads", ("outdoor_c", "floor_area_m2", "racks"), 0),
    ("sample-size.per-parameter", "misleads", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "humidity_pct", "racks", "staff_on_shift", "forklift_hours"), 0),
    ("influence.cooks-distance", "weakens", (), 0),
    ("influence.dfbetas", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "humidity_pct", "racks", "staff_on_shift", "forklift_hours"), 0),
    ("sample-size.minimum", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "humidity_pct", "racks", "staff_on_shift", "forklift_hours"), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng, site_count=18, days=1).drop(columns=["compressor_type"])
    frame.insert(0, "site_day", [f"{s}/{d}" for s, d in zip(frame["site_id"], frame["day"])])
    frame = frame.drop(columns=["site_id", "day"])
    n = len(frame)
    frame["humidity_pct"] = rng.uniform(40, 95, n).round(1)
    frame["racks"] = (frame["floor_area_m2"] / 40 * rng.uniform(0.6, 1.4, n)).round(0).astype(int)
    frame["staff_on_shift"] = rng.integers(3, 30, n)
    frame["forklift_hours"] = rng.uniform(5, 120, n).round(1)
    return frame

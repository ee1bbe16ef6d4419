"""Dock humidity sensors that drop out on hot, busy days at large sites (long docks, damp heat), dropouts exported as -999."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_humidity_codes"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.nonlinearity", "weakens", ("humidity_pct",)),
    ("influence.robust-distortion", "misleads", ()),
    ("missingness.disguised-codes", "misleads", ("humidity_pct",)),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles", "humidity_pct")),
    ("outliers.univariate", "note", ("humidity_pct",)),
]
FIX_FIRST = [
    ("missingness.disguised-codes", "misleads", ("humidity_pct",), 4),
]
EXIT_CODE = 1
DROPOUT_CODE = -999


def humidity_with_dropouts(rng: np.random.Generator) -> pd.DataFrame:
    """Site-days with dock humidity (raising energy by 12 kWh per point) and sensor dropouts on hot, busy days at large sites."""
    frame = site_days(rng)
    n = len(frame)
    humidity = np.clip(rng.normal(68, 12, n), 40, 95).round(1)
    frame["energy_kwh"] = (frame["energy_kwh"] + 12 * (humidity - 68)).round(1)
    heat = np.clip(frame["outdoor_c"].to_numpy() - 14, 0, None) / 10
    busy = frame["door_openings"].to_numpy() / 800
    large = frame["floor_area_m2"].to_numpy() / 40_000
    dropout_chance = np.clip(0.5 * heat * busy * large, 0.0, 0.5)
    humidity[rng.random(n) < dropout_chance] = DROPOUT_CODE
    frame["humidity_pct"] = humidity
    return frame


def build(rng: np.random.Generator) -> pd.DataFrame:
    return humidity_with_dropouts(rng)

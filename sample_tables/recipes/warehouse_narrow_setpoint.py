"""Frozen rooms whose setpoint barely moves: -22.0 C on nearly every site-day, a few readings at -22.1 or -21.9, while the model is meant for setpoints from -28 to -16 C."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_narrow_setpoint"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--range", "setpoint_c=-28:-16"]
EXPECTED = [
    ("collinearity.condition", "weakens", ("pallets_stored", "floor_area_m2")),
    ("collinearity.precision", "note", ("setpoint_c",)),
    ("influence.cooks-distance", "misleads", ()),
    ("influence.leverage", "note", ()),
    ("range.narrow", "misleads", ("setpoint_c",)),
    ("range.near-constant", "weakens", ("setpoint_c",)),
]
FIX_FIRST = [
    ("influence.cooks-distance", "misleads", (), 0),
    ("range.narrow", "misleads", ("setpoint_c",), 0),
    ("collinearity.condition", "weakens", ("pallets_stored", "floor_area_m2"), 0),
    ("range.near-constant", "weakens", ("setpoint_c",), 0),
]
EXIT_CODE = 1
NOMINAL_C = -22.0
WOBBLE_SHARE = 0.03
KWH_PER_C_COLDER = 90.0


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    n = len(frame)
    wobble = np.where(rng.random(n) < WOBBLE_SHARE, rng.choice([-0.1, 0.1], n), 0.0)
    frame["setpoint_c"] = (NOMINAL_C + wobble).round(1)
    frame["energy_kwh"] = (frame["energy_kwh"] - KWH_PER_C_COLDER * (frame["setpoint_c"] - NOMINAL_C)).round(1)
    return frame

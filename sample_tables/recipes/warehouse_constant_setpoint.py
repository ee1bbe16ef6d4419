"""An extract of frozen sites only, where the setpoint column holds -22 on every row."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_constant_setpoint"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("hygiene.constant-predictor", "blocks", ("setpoint_c",)),
]
FIX_FIRST = [
    ("hygiene.constant-predictor", "blocks", ("setpoint_c",), 0),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    frame["setpoint_c"] = -22.0
    return frame

"""An extract in which one week of site-days was appended twice (280 exact copies of earlier rows)."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_duplicate_days"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("hygiene.duplicate-rows", "weakens", ()),
]
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    days = pd.to_datetime(frame["day"])
    week = frame[(days >= "2026-07-06") & (days < "2026-07-13")]
    return pd.concat([frame, week], ignore_index=True)

"""A clean extract: 40 sites x 90 days, linear response, no holes, no dependencies. It passes."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_clean"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED: list[tuple[str, str, tuple[str, ...]]] = []
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    return site_days(rng)

"""A clean extract: 40 sites of similar size x 90 days, linear response, no holes, no dependencies. Checked with its
repeating --id as the group, it passes with no finding: site facts are measured one point per site."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_clean"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
]
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    return site_days(rng, similar_sites=True)

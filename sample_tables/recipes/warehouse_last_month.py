"""Last month's accepted extract (June): 40 sites, 30 days, outdoor temperature in degrees Celsius. It is the baseline of `warehouse_this_month.csv`."""

import numpy as np
import pandas as pd

from ._warehouse import site_days, sites

NAME = "warehouse_last_month"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
]
EXIT_CODE = 0
SITES_SEED = 20260601
DAYS = 30


def site_facts() -> pd.DataFrame:
    """The sites both months share, drawn with their own seed."""
    return sites(np.random.default_rng(SITES_SEED))


def build(rng: np.random.Generator) -> pd.DataFrame:
    return site_days(rng, days=DAYS, facts=site_facts(), start="2026-06-01")

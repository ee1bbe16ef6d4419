"""A summer extract, and a scoring table (`warehouse_heatwave_score.csv`) asking for each site's energy on three heat-wave days hotter than any day in the extract."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_heatwave"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day", "--score", "sample_tables/warehouse_heatwave_score.csv"]
EXPECTED = [
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
    ("range.extrapolation", "misleads", ("outdoor_c",)),
]
FIX_FIRST = [
    ("range.extrapolation", "misleads", ("outdoor_c",), 0),
]
EXIT_CODE = 1
HEATWAVE_DAYS = ("2026-08-30", "2026-08-31", "2026-09-01")
HEATWAVE_ABOVE_MAX_C = (3.0, 5.5, 4.0)


def build(rng: np.random.Generator) -> pd.DataFrame:
    return site_days(rng)


def build_score(rng: np.random.Generator, data: pd.DataFrame) -> pd.DataFrame:
    """Each site's latest day in the extract, carried to the heat-wave days with the forecast temperature; no energy column."""
    hottest = float(data["outdoor_c"].max())
    latest = data.groupby("site_id", sort=True).tail(1).reset_index(drop=True)
    days = []
    for day, above in zip(HEATWAVE_DAYS, HEATWAVE_ABOVE_MAX_C):
        rows = latest.drop(columns=["energy_kwh"]).copy()
        rows["day"] = day
        rows["outdoor_c"] = (hottest + above + rng.uniform(-0.5, 0.5, len(rows))).round(1)
        days.append(rows)
    return pd.concat(days, ignore_index=True)


COMPANIONS = {"warehouse_heatwave_score.csv": build_score}

"""Residual spread that grows with site size: a large site's daily energy varies far more than a small one's.

Mixing small and large spreads also gives heavy-tailed residuals, reported as a note."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_uneven_spread"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.heteroscedasticity", "weakens", ("floor_area_m2",)),
    ("assumptions.residual-normality", "note", ("energy_kwh",)),
    ("influence.cooks-distance", "weakens", ()),
    ("influence.dfbetas", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "compressor_type")),
    ("influence.dffits", "weakens", ()),
    ("influence.leverage", "note", ()),
    ("outliers.studentized-residual", "misleads", ("energy_kwh",)),
    ("outliers.univariate", "note", ("pallets_stored",)),
]
FIX_FIRST = [
    ("outliers.studentized-residual", "misleads", ("energy_kwh",), 0),
    ("assumptions.heteroscedasticity", "weakens", ("floor_area_m2",), 0),
    ("influence.cooks-distance", "weakens", (), 0),
    ("influence.dfbetas", "weakens", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "compressor_type"), 0),
    ("influence.dffits", "weakens", (), 0),
]
EXIT_CODE = 1
SPREAD_PER_M2 = 0.06


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng, noise_kwh=100.0)
    wobble = rng.normal(0.0, SPREAD_PER_M2, len(frame)) * frame["floor_area_m2"]
    frame["energy_kwh"] = (frame["energy_kwh"] + wobble).round(1)
    return frame

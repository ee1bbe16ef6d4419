"""Sites whose days share an unmeasured site effect (door seals and insulation in varying repair): each site runs
above or below the model on all its 90 days. The usual standard errors of the site-level slopes are several times too
small; cluster-robust ones by site_id say how much."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_site_effect"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.nonlinearity", "weakens", ("pallets_stored", "floor_area_m2")),
    ("grouping.few-groups", "note", ("site_id",)),
    ("grouping.residual-correlation", "misleads", ("compressor_type",)),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
    ("outliers.univariate", "note", ("pallets_stored",)),
]
FIX_FIRST = [
    ("grouping.residual-correlation", "misleads", ("compressor_type",), 2),
]
EXIT_CODE = 1

NOISE_KWH = 400.0
SITE_EFFECT_KWH = 280.0
SITES = 40


def build(rng: np.random.Generator) -> pd.DataFrame:
    shared = rng.normal(0.0, SITE_EFFECT_KWH, SITES)
    frame = site_days(rng, site_count=SITES, noise_kwh=NOISE_KWH, similar_sites=True)
    effect = dict(zip(frame["site_id"].unique(), shared))
    frame["energy_kwh"] = (frame["energy_kwh"] + frame["site_id"].map(effect)).round(1)
    return frame

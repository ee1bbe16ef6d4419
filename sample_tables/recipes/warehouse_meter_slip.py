"""One meter reading entered ten times too large: a single site-day's energy_kwh has an extra digit.

prefit names the row (site CS-021), calls the value a suspected 10x slip, finds its residual beyond the
Bonferroni limit, and shows the damage: dropping that one row moves the defrost_cycles slope by 4.0 SE.
"""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_meter_slip"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.residual-normality", "note", ("energy_kwh",)),
    ("influence.cooks-distance", "weakens", ()),
    ("influence.dfbetas", "misleads", ("door_openings", "defrost_cycles", "compressor_type")),
    ("influence.dffits", "weakens", ()),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
    ("outliers.studentized-residual", "misleads", ("energy_kwh",)),
    ("outliers.univariate", "weakens", ("energy_kwh",)),
]
FIX_FIRST = [
    ("outliers.univariate", "weakens", ("energy_kwh",), 5),
]
EXIT_CODE = 1


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    slipped = int(rng.integers(0, len(frame)))
    frame.loc[slipped, "energy_kwh"] = round(float(frame.loc[slipped, "energy_kwh"]) * 10, 1)
    return frame

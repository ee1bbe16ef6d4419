"""An energy response that bends on hot days: above 24 C each further degree costs far more refrigeration energy."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_heat_bend"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("grouping.residual-correlation", "misleads", ("outdoor_c",)),
    ("assumptions.nonlinearity", "weakens", ("outdoor_c",)),
    ("influence.cooks-distance", "weakens", ()),
    ("influence.dffits", "weakens", ()),
    ("outliers.studentized-residual", "weakens", ("energy_kwh",)),
    ("grouping.few-groups", "note", ("site_id",)),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
]
EXIT_CODE = 1
BEND_AT_C = 24.0
EXTRA_KWH_PER_C = 260.0


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    heat = np.clip(frame["outdoor_c"] - BEND_AT_C, 0.0, None)
    frame["energy_kwh"] = (frame["energy_kwh"] + EXTRA_KWH_PER_C * heat).round(1)
    return frame

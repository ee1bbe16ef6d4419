"""An energy response that bends on warm days: above 10 C each further degree costs more refrigeration energy than the one before."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_heat_bend"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.nonlinearity", "misleads", ("outdoor_c",)),
    ("grouping.few-groups", "note", ("site_id",)),
    ("grouping.residual-correlation", "misleads", ("outdoor_c",)),
    ("influence.robust-distortion", "weakens", ()),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
]
FIX_FIRST = [
    ("assumptions.nonlinearity", "misleads", ("outdoor_c",), 3),
]
EXIT_CODE = 1
BEND_AT_C = 10.0
EXTRA_KWH_PER_C2 = 4.5


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng)
    heat = np.clip(frame["outdoor_c"] - BEND_AT_C, 0.0, None)
    frame["energy_kwh"] = (frame["energy_kwh"] + EXTRA_KWH_PER_C2 * heat**2).round(1)
    return frame

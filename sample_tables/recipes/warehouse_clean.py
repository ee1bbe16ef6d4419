"""A clean extract: 40 sites of similar size x 90 days, linear response, no holes, no dependencies. It passes the
default gate; its one finding (weakens) is about robust distances of whole sites."""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_clean"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    # Rows of whole sites sit outside the robust ellipse: site facts repeat on every row of a site, a shape the
    # chi-square cut-off does not expect, so the finding is a note.
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles")),
    ("outliers.univariate", "note", ("floor_area_m2",)),
]
EXIT_CODE = 0


def build(rng: np.random.Generator) -> pd.DataFrame:
    return site_days(rng, similar_sites=True)

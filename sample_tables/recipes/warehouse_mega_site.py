"""One mega-site ten times larger than the rest, and better insulated: half the energy per square metre.

No single site-day of the mega-site stands out (each hides the other 89: masking), but deleting the
high-leverage rows together gives Cook's D = 6,314 and moves the floor_area_m2 slope by 135 SE. With site_id as
the group, its floor area is one point among 41 sites, and deleting the whole site moves the floor_area_m2 slope by
18 cluster-robust SE.
"""

import numpy as np
import pandas as pd

from ._warehouse import site_days

NAME = "warehouse_mega_site"
FORMAT = "csv"
ARGS = ["--target", "energy_kwh", "--id", "site_id", "--exclude", "day"]
EXPECTED = [
    ("assumptions.nonlinearity", "misleads", ("pallets_stored", "floor_area_m2")),
    ("grouping.few-groups", "note", ("site_id",)),
    ("grouping.group-influence", "misleads", ("floor_area_m2",)),
    ("grouping.group-outliers", "weakens", ("floor_area_m2",)),
    ("grouping.residual-correlation", "misleads", ("compressor_type",)),
    ("grouping.within-between", "weakens", ("pallets_stored",)),
    ("influence.cooks-distance", "misleads", ()),
    ("influence.leverage", "note", ()),
    ("influence.robust-distortion", "misleads", ()),
    ("outliers.multivariate", "note", ("outdoor_c", "door_openings", "pallets_stored", "defrost_cycles")),
    ("outliers.univariate", "note", ("energy_kwh", "pallets_stored")),
    ("target.skewed", "note", ("energy_kwh",)),
]
FIX_FIRST = [
    ("grouping.group-influence", "misleads", ("floor_area_m2",), 9),
]
EXIT_CODE = 1

AREA_KWH_PER_M2 = 0.22
MEGA_SITE = "CS-041"


def build(rng: np.random.Generator) -> pd.DataFrame:
    frame = site_days(rng, site_count=41)
    mega = frame["site_id"] == MEGA_SITE
    typical_area = float(frame.loc[~mega, "floor_area_m2"].median())
    area = round(10 * typical_area, -1)
    old_area = frame.loc[mega, "floor_area_m2"].to_numpy()
    frame.loc[mega, "pallets_stored"] = (frame.loc[mega, "pallets_stored"] * area / old_area).round(0).astype(int)
    frame.loc[mega, "energy_kwh"] = (frame.loc[mega, "energy_kwh"] + 0.5 * AREA_KWH_PER_M2 * area - AREA_KWH_PER_M2 * old_area).round(1)
    frame.loc[mega, "floor_area_m2"] = area
    return frame

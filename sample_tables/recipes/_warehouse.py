"""The invented cold-storage scenario shared by every sample table: sites, days and their refrigeration energy.

Every number here is invented for demonstrations; none is a measurement.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

COMPRESSOR_TYPES = ("screw", "scroll", "reciprocating", "CO2 transcritical")
TYPE_EFFECT_KWH = {"screw": 0.0, "scroll": 350.0, "reciprocating": 650.0, "CO2 transcritical": -300.0}
START_DAY = "2026-06-01"
NEW_TYPE_EFFECT_KWH = -450.0


def sites(rng: np.random.Generator, count: int = 40, similar: bool = False) -> pd.DataFrame:
    """Invented site facts that do not change from day to day.

    By default site sizes spread evenly from small to very large and occupancy varies widely, so pallets fan out
    with floor area; ``similar`` draws sizes and occupancy around a typical site instead (a bell-shaped spread).
    """
    if similar:
        area = rng.normal(18_000, 4_000, count).clip(9_000, 27_000).round(-1)
        occupancy = rng.normal(0.65, 0.08, count).clip(0.45, 0.85)
    else:
        area = rng.uniform(2_000, 40_000, count).round(-1)
        occupancy = rng.uniform(0.25, 0.95, count)
    return pd.DataFrame(
        {
            "site_id": [f"CS-{i:03d}" for i in range(1, count + 1)],
            "floor_area_m2": area,
            "occupancy": occupancy,
            "climate_c": rng.uniform(8, 22, count),
            "compressor_type": rng.choice(COMPRESSOR_TYPES, count, p=(0.4, 0.25, 0.2, 0.15)),
            "frozen": rng.random(count) < 0.45,
        }
    )


def site_days(
    rng: np.random.Generator,
    site_count: int = 40,
    days: int = 90,
    noise_kwh: float = 400.0,
    similar_sites: bool = False,
    facts: pd.DataFrame | None = None,
    start: str = START_DAY,
) -> pd.DataFrame:
    """One invented row per site-day, with a linear, homoscedastic energy response.

    With ``similar_sites`` the day-to-day stock varies by a fixed amount rather than in proportion to the site;
    ``facts`` gives the sites (default: drawn with ``rng``), ``start`` the first day.
    """
    facts = sites(rng, site_count, similar=similar_sites) if facts is None else facts
    site_count = len(facts)
    calendar = pd.date_range(start, periods=days, freq="D")
    frame = facts.loc[facts.index.repeat(days)].reset_index(drop=True)
    frame.insert(1, "day", np.tile(calendar.date, site_count))
    n = len(frame)
    season = 6 * np.sin(np.linspace(0, np.pi, days))
    frame["outdoor_c"] = (frame["climate_c"] + np.tile(season, site_count) + rng.normal(0, 3.0, n)).round(1)
    frame["door_openings"] = rng.integers(50, 800, n)
    stock = frame["floor_area_m2"] * 0.55 * frame["occupancy"]
    if similar_sites:
        stock = stock + rng.normal(0, 350, n)
    else:
        stock = stock * rng.uniform(0.85, 1.15, n)
    frame["pallets_stored"] = stock.round(0).astype(int)
    frame["defrost_cycles"] = rng.integers(0, 9, n)
    energy = (
        600
        + 0.22 * frame["floor_area_m2"]
        + 0.08 * frame["pallets_stored"]
        + 55 * frame["outdoor_c"]
        + 2.5 * frame["door_openings"]
        + 140 * frame["defrost_cycles"]
        + frame["compressor_type"].map(TYPE_EFFECT_KWH).fillna(NEW_TYPE_EFFECT_KWH)
        + rng.normal(0, noise_kwh, n)
    )
    frame["energy_kwh"] = energy.round(1)
    columns = ["site_id", "day", "energy_kwh", "outdoor_c", "door_openings", "pallets_stored", "floor_area_m2", "defrost_cycles", "compressor_type"]
    return frame[columns]

"""A small invented town for the sweep tests (tests/sweep/): the 4 x 3 grid of
tests/data/make_broken.py with a third elementary site, E3 (status new, 300 seats, in
unit U08), so a scenario can open it or keep it shut."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import geopandas as gpd
import pandas as pd

_spec = importlib.util.spec_from_file_location(
    "make_broken", Path(__file__).parent / "data" / "make_broken.py")
town = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(town)


def write_sweep_town(folder: Path) -> Path:
    """The project file of the town with E3 (new) beside E1 and E2."""
    sites = town.town_sites()
    e3 = gpd.GeoDataFrame(
        {"site_id": ["E3"], "name": ["Brackenloft Elementary"], "level": ["elementary"],
         "capacity": [300.0], "status": ["new"]},
        geometry=gpd.points_from_xy([town.X0 + 3500], [town.Y0 + 1500]), crs=town.CRS)
    return town.write_town(folder, sites=pd.concat([sites, e3], ignore_index=True))

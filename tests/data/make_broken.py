"""Write the corpus of broken projects in tests/data/broken/ (one folder per problem).

Run from the repository root::

    .venv/bin/python tests/data/make_broken.py

Every folder holds a ``project.toml`` and small layers of the same invented town: a
4 x 3 grid of 1 km planning units (U01..U12, projected CRS EPSG:32633), two elementary
sites and one middle site, counts for 2026 (current) and 2027-2028, and today's zones.
Each folder then carries exactly one problem (a few carry a cluster of related ones). The
tests import :func:`write_town` from here to build clean projects in a temporary folder.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
import warnings
import zipfile
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
import tomli_w

HERE = Path(__file__).resolve().parent
BROKEN = HERE / "broken"
CRS = "EPSG:32633"
X0, Y0, SIDE = 500_000.0, 4_000_000.0, 1000.0
COLS, ROWS = 4, 3
YEARS = (2027, 2028)
CURRENT = 2026
LEVELS = ("elementary", "middle")


def town_units() -> gpd.GeoDataFrame:
    """The grid units with counts and today's zones (west half E1, east half E2)."""
    k = np.arange(COLS * ROWS)
    col, row = k % COLS, k // COLS
    geoms = shapely.box(X0 + col * SIDE, Y0 + row * SIDE, X0 + (col + 1) * SIDE,
                        Y0 + (row + 1) * SIDE)
    data = {"unit_id": [f"U{i + 1:02d}" for i in k]}
    for y, year in enumerate((CURRENT, *YEARS)):
        data[f"elementary_{year}"] = (40 + 3 * k + 2 * y).astype(float)
        data[f"middle_{year}"] = (20 + k + y).astype(float)
    data["zone_elementary"] = np.where(col < 2, "E1", "E2")
    data["zone_middle"] = "M1"
    return gpd.GeoDataFrame(data, geometry=geoms, crs=CRS)


def town_sites() -> gpd.GeoDataFrame:
    """E1 in U01, E2 in U12, M1 in U06; elementary 2 x 500 seats, middle 600."""
    pts = [(X0 + 500, Y0 + 500), (X0 + 3500, Y0 + 2500), (X0 + 1500, Y0 + 1500)]
    return gpd.GeoDataFrame(
        {"site_id": ["E1", "E2", "M1"],
         "name": ["Larkspur Elementary", "Fennick Elementary", "Corrow Middle"],
         "level": ["elementary", "elementary", "middle"],
         "capacity": [500.0, 500.0, 600.0],
         "status": ["open", "open", "open"]},
        geometry=gpd.points_from_xy(*zip(*pts, strict=True)), crs=CRS,
    )


def project_dict(units: str = "units.geojson", sites: str = "sites.geojson",
                 units_layer: str = "", sites_layer: str = "") -> dict:
    """The TOML of the town (paths relative to the project folder)."""
    def src(path, layer):
        return {"source": path, **({"layer": layer} if layer else {})}

    return {
        "project": {"name": "Grid Town (invented test data)", "current_year": CURRENT,
                    "years": list(YEARS), "levels": list(LEVELS)},
        "units": {**src(units, units_layer), "id": "unit_id", "counts": "{level}_{year}"},
        "sites": {**src(sites, sites_layer), "id": "site_id", "name": "name", "level": "level",
                  "capacity": "capacity", "status": "status"},
        "zones": {**src(units, units_layer), "id": "unit_id",
                  "columns": {"elementary": "zone_elementary", "middle": "zone_middle"}},
        "solve": {"max_utilization": 1.0, "min_utilization": 0.3},
    }


def write_layer(frame: gpd.GeoDataFrame, path: Path, layer: str | None = None) -> None:
    """GeoJSON, FlatGeobuf, GeoPackage or zipped Shapefile, by the file's suffix."""
    path.parent.mkdir(parents=True, exist_ok=True)
    suffix = path.suffix.lower()
    if suffix == ".zip":
        with tempfile.TemporaryDirectory() as tmp:
            shp = Path(tmp) / f"{layer or path.stem}.shp"
            frame.to_file(shp, driver="ESRI Shapefile", engine="pyogrio")
            with zipfile.ZipFile(path, "w") as zf:
                for part in sorted(Path(tmp).iterdir()):
                    zf.write(part, part.name)
        return
    driver = {".geojson": "GeoJSON", ".fgb": "FlatGeobuf", ".gpkg": "GPKG"}[suffix]
    kw = {"layer": layer} if layer else {}
    frame.to_file(path, driver=driver, engine="pyogrio", **kw)


def write_toml(data: dict, path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(tomli_w.dumps(data).encode("utf-8"))


def write_town(folder: Path, units: gpd.GeoDataFrame | None = None,
               sites: gpd.GeoDataFrame | None = None, toml: dict | None = None,
               units_file: str = "units.geojson", sites_file: str = "sites.geojson") -> Path:
    """Write the town (or the given variants) into ``folder``; returns the project file."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    write_layer(town_units() if units is None else units, folder / units_file)
    write_layer(town_sites() if sites is None else sites, folder / sites_file)
    path = folder / "project.toml"
    write_toml(project_dict(units_file, sites_file) if toml is None else toml, path)
    return path


#: The river of the town: along x = 2 km, between the west and east halves; its bridge
#: crosses at y = 1.5 km (between U06 and U07).
RIVER_X, BRIDGE_Y = X0 + 2000, Y0 + 1500


def river_toml(folder: Path) -> dict:
    """Write the river and its bridge beside the project; the TOML naming them."""
    river = gpd.GeoDataFrame(geometry=[shapely.LineString([(RIVER_X, Y0 - 10),
                                                           (RIVER_X, Y0 + 3010)])], crs=CRS)
    bridge = gpd.GeoDataFrame(geometry=[shapely.Point(RIVER_X, BRIDGE_Y)], crs=CRS)
    write_layer(river, Path(folder) / "river.geojson")
    write_layer(bridge, Path(folder) / "bridge.geojson")
    toml = project_dict()
    toml["barriers"] = {"source": "river.geojson"}
    toml["bridges"] = {"source": "bridge.geojson"}
    return toml


def _unit(units: gpd.GeoDataFrame, uid: str) -> int:
    return int(np.flatnonzero(units["unit_id"].to_numpy() == uid)[0])


def _write_ids(folder: Path, ids: dict) -> None:
    """The town with some unit ids replaced (old id -> new id, None for none)."""
    units = town_units()
    for old, new in ids.items():
        units.loc[_unit(units, old), "unit_id"] = new
    write_town(folder, units=units)


# ----------------------------------------------------------------------------- the cases
def _cases() -> dict:
    """folder name -> function(folder) writing that broken project."""
    cases = {}

    def case(fn):
        cases[fn.__name__] = fn
        return fn

    @case
    def missing_file(d):
        t = project_dict()
        t["units"]["source"] = "no_such_units.gpkg"
        t["zones"]["source"] = "no_such_units.gpkg"
        write_town(d, toml=t)
        (d / "units.geojson").unlink()

    @case
    def unreadable_file(d):
        t = project_dict(units="units.gpkg")
        write_town(d, toml=t)
        (d / "units.geojson").unlink()
        (d / "units.gpkg").write_text("this is a note, not a GeoPackage\n")

    @case
    def missing_layer(d):
        write_layer(town_units(), d / "town.gpkg", layer="units")
        write_layer(town_sites(), d / "town.gpkg", layer="sites")
        t = project_dict("town.gpkg", "town.gpkg", "units", "schools")
        write_toml(t, d / "project.toml")

    @case
    def missing_column(d):
        write_town(d, sites=town_sites().drop(columns="capacity"))

    @case
    def no_crs(d):
        units = town_units().set_crs(None, allow_override=True)
        with warnings.catch_warnings():  # pyogrio warns that the layer has no CRS: the point
            warnings.simplefilter("ignore", UserWarning)
            write_town(d, units=units, toml=project_dict(units="units.fgb"),
                       units_file="units.fgb")

    @case
    def geographic_crs(d):
        write_town(d, units=town_units().to_crs(4326), sites=town_sites().to_crs(4326))

    @case
    def invalid_geometry(d):
        units = town_units()
        i = _unit(units, "U06")
        x0, y0, x1, y1 = units.geometry.iloc[i].bounds
        units.loc[i, "geometry"] = shapely.Polygon(  # a spike back along itself
            [(x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0 + 500), (x0 + 300, y0 + 500),
             (x0, y0 + 500)])
        write_town(d, units=units)

    @case
    def empty_geometry(d):
        units = town_units()
        units.loc[_unit(units, "U07"), "geometry"] = None
        write_town(d, units=units)

    @case
    def duplicate_id(d):
        _write_ids(d, {"U08": "U07"})

    @case
    def missing_id(d):
        _write_ids(d, {"U08": None})

    @case
    def negative_count(d):
        units = town_units()
        units.loc[_unit(units, "U03"), "middle_2028"] = -4.0
        write_town(d, units=units)

    @case
    def nonnumeric_count(d):
        units = town_units()
        units["elementary_2027"] = units["elementary_2027"].map(lambda v: f"{v:g}").astype(object)
        units.loc[_unit(units, "U04"), "elementary_2027"] = "about 40"
        write_town(d, units=units)

    @case
    def missing_count(d):
        units = town_units()
        units.loc[_unit(units, "U05"), "elementary_2028"] = np.nan
        write_town(d, units=units)

    @case
    def overlap(d):
        units = town_units()
        i = _unit(units, "U06")
        x0, y0, x1, y1 = units.geometry.iloc[i].bounds
        units.loc[i, "geometry"] = shapely.box(x0 - 300, y0, x1, y1)  # 30% of U05
        write_town(d, units=units)

    @case
    def site_outside(d):
        sites = town_sites()
        sites.loc[1, "geometry"] = shapely.Point(X0 + 6000, Y0 + 2500)  # E2, 2 km east
        write_town(d, sites=sites)

    @case
    def bad_capacity(d):
        sites = town_sites()
        sites["capacity"] = [0.0, np.nan, -50.0]  # E1 zero, E2 missing, M1 negative
        write_town(d, sites=sites)

    @case
    def unknown_status(d):
        sites = town_sites()
        sites.loc[1, "status"] = "reopening"
        write_town(d, sites=sites)

    @case
    def site_other_level(d):
        sites = pd.concat([town_sites(), town_sites().iloc[[0]].assign(
            site_id="P1", name="Tansy Preschool", level="preschool")], ignore_index=True)
        write_town(d, sites=gpd.GeoDataFrame(sites, crs=CRS))

    @case
    def zone_unknown_site(d):
        units = town_units()
        units.loc[_unit(units, "U03"), "zone_elementary"] = "E9"
        write_town(d, units=units)

    @case
    def zone_wrong_level(d):
        units = town_units()
        units.loc[_unit(units, "U04"), "zone_elementary"] = "M1"
        write_town(d, units=units)

    @case
    def lock_unknown(d):
        t = project_dict()
        t["locks"] = [{"level": "elementary", "unit": "U99", "site": "E1"},
                      {"level": "middle", "unit": "U02", "site": "E2"}]
        t["forbids"] = [{"level": "elementary", "unit": "U01", "site": "E7"}]
        write_town(d, toml=t)

    @case
    def island(d):
        units = town_units()
        extra = units.iloc[[0]].copy()
        extra["unit_id"] = "U13"
        extra["zone_elementary"] = "E1"
        extra["geometry"] = [shapely.box(X0, Y0 - 3000, X0 + SIDE, Y0 - 2000)]
        write_town(d, units=gpd.GeoDataFrame(pd.concat([units, extra], ignore_index=True),
                                             crs=CRS))

    @case
    def island_linked(d):
        island(d)
        (d / "links.csv").write_text("unit_a,unit_b,action\nU13,U01,add\n")
        t = project_dict()
        t["adjacency"] = {"contiguity": "rook", "links": "links.csv"}
        write_toml(t, d / "project.toml")

    @case
    def bad_links(d):
        (d / "links.csv").write_text("unit_a,unit_b,action\nU01,U02,remove\n"
                                     "U01,U77,add\nU05,U06,join\n")
        t = project_dict()
        t["adjacency"] = {"contiguity": "rook", "links": "links.csv"}
        write_town(d, toml=t)

    @case
    def over_capacity(d):
        units = town_units()
        units["elementary_2028"] = 90.0  # 1080 students for 1000 seats
        write_town(d, units=units)

    @case
    def year_no_column(d):
        t = project_dict()
        t["project"]["years"] = [2027, 2028, 2029]
        write_town(d, toml=t)

    @case
    def counts_csv(d):
        units = town_units()
        counts = pd.DataFrame(units.drop(columns=["geometry", "zone_elementary",
                                                  "zone_middle"]))
        units = units[["unit_id", "zone_elementary", "zone_middle", "geometry"]]
        counts = counts[counts["unit_id"] != "U07"]  # U07 has no row
        counts = pd.concat([counts, counts.iloc[[2]], counts.iloc[[0]].assign(unit_id="U99")])
        d.mkdir(parents=True, exist_ok=True)
        counts.to_csv(d / "counts.csv", index=False)
        t = project_dict()
        t["counts"] = {"source": "counts.csv", "id": "unit_id"}
        write_town(d, units=units, toml=t)

    @case
    def bad_toml(d):
        write_town(d)
        text = (d / "project.toml").read_text()
        (d / "project.toml").write_text(text.replace("current_year = 2026",
                                                     "current_year = 2026 2027"))

    @case
    def bad_settings(d):
        t = project_dict()
        t["project"]["plan_year"] = 2035
        t["solve"].update({"min_utilization": 1.2, "gapp": 0.01})
        t["adjacency"] = {"contiguity": "hexagon"}
        write_town(d, toml=t)

    @case
    def misspelt_setting(d):
        t = project_dict()
        t["solve"]["max_utilisation"] = 0.9  # British spelling of max_utilization
        write_town(d, toml=t)

    @case
    def utilization_percent(d):
        t = project_dict()
        t["solve"]["max_utilization"] = 90  # a percentage where a share is meant
        write_town(d, toml=t)

    @case
    def toml_windows_path(d):
        write_town(d)
        text = (d / "project.toml").read_text()
        (d / "project.toml").write_text(text.replace('"sites.geojson"',
                                                     r'"C:\data\sites.geojson"'))

    @case
    def empty_sites(d):
        write_layer(town_units(), d / "town.gpkg", layer="units")
        write_layer(town_sites().iloc[:0], d / "town.gpkg", layer="sites")
        write_toml(project_dict("town.gpkg", "town.gpkg", "units", "sites"), d / "project.toml")

    @case
    def empty_units(d):
        write_layer(town_units().iloc[:0], d / "town.gpkg", layer="units")
        write_layer(town_sites(), d / "town.gpkg", layer="sites")
        write_toml(project_dict("town.gpkg", "town.gpkg", "units", "sites"), d / "project.toml")

    @case
    def degrees_as_metres(d):  # lon/lat values labelled with the metre CRS
        units = town_units().to_crs(4326).set_crs(CRS, allow_override=True)
        sites = town_sites().to_crs(4326).set_crs(CRS, allow_override=True)
        write_town(d, units=units, sites=sites)

    @case
    def sites_degrees_as_metres(d):
        write_town(d, sites=town_sites().to_crs(4326).set_crs(CRS, allow_override=True))

    @case
    def sites_other_crs(d):  # Web Mercator sites beside UTM units: reprojected, warned
        write_town(d, sites=town_sites().to_crs(3857))

    @case
    def empty_barriers(d):
        t = project_dict()
        t["barriers"] = {"source": "river.geojson"}
        write_town(d, toml=t)
        line = gpd.GeoDataFrame(geometry=[shapely.LineString([(X0, Y0), (X0, Y0 + 1)])],
                                crs=CRS)
        write_layer(line.iloc[:0], d / "river.geojson")

    @case
    def unicode_twin_ids(d):  # "Ü05" composed and decomposed: they print the same
        _write_ids(d, {"U05": "\u00dc05", "U06": "U\u030805"})

    @case
    def case_twin_ids(d):
        _write_ids(d, {"U06": "u05"})

    @case
    def site_util_percent(d):
        sites = town_sites()
        sites["max_util"] = [0.95, 95.0, np.nan]  # E2 written as a percentage
        t = project_dict()
        t["sites"]["max_util"] = "max_util"
        write_town(d, sites=sites, toml=t)

    return cases


CASES = _cases()


def main(argv: list[str]) -> int:
    names = argv or list(CASES)
    for name in names:
        folder = BROKEN / name
        shutil.rmtree(folder, ignore_errors=True)
        folder.mkdir(parents=True)
        CASES[name](folder)
        print(f"wrote {folder.relative_to(HERE.parent.parent)}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))

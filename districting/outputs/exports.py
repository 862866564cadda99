"""Exports of one option: GeoPackage, GeoJSON (WGS84), zipped Shapefile and CSV tables.

:func:`export_all` writes, for one :class:`~districting.study.Outcome`:

- ``<option>.gpkg`` (OGC GeoPackage 1.3) with the layers ``zones`` (one row per school:
  students per year, capacity, utilization per year, moved in / out, n_parts), ``units``
  (current and proposed school, changed flag, distance), ``sites``, ``changed_areas``
  (the units whose school changes, dissolved by from -> to pair, with students), and an
  attribute table ``about`` (option, level, dates, the draft notice). Every layer also
  carries the notice as its ``gpkg_contents`` description and an ``option`` column;
- ``<option>_zones.geojson``: the zones in WGS84 longitude/latitude per RFC 7946 (written by
  GDAL's GeoJSON driver with ``RFC7946=YES``), the option, level, date and notice in the
  top-level ``description``, and an ``option`` property on each feature;
- ``<option>_zones_shp.zip``: the zones as an ESRI Shapefile (field names of at most 10
  characters; ``.prj`` and a UTF-8 ``.cpg``) with a ``README.txt`` giving the notice and
  the field legend;
- ``<option>_units.csv`` and ``<option>_schools.csv``: plain tables a spreadsheet opens as
  they are (header on line 1; :mod:`districting.outputs.sheets`), each with a sidecar
  ``<option>_units.about.json`` / ``<option>_schools.about.json`` holding the option,
  level, status in words, travel measure, dates, the notice and a note per column
  (:func:`read_export_csv` reads both).

Each zone feature (GeoPackage, GeoJSON, Shapefile) carries its school's display colour as
``colour`` (``#RRGGBB``, :func:`districting.outputs.store.stored_school_colours`), the
colour the packet and the workbench draw it in.

The tables come from :mod:`districting.outputs.tables`, which the hearing packet and the
workbench use too, so a figure printed or shown is the figure exported. Every file is
written through :func:`districting.io.atomic_path`.
"""

from __future__ import annotations

import json
import os
import tempfile
import zipfile
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio

from .. import DRAFT_NOTICE
from ..io import atomic_path, atomic_write_text
from ..names import slug
from ..study import Outcome, now_iso
from .feeders import feeder_sheet
from .sheets import about_json, csv_text, school_sheet, sidecar_name, unit_sheet
from .store.colours import stored_school_colours
from .tables import (
    changed_frame,
    plan_status,
    plan_years,
    require_plan,
    unit_table,
    zones_frame,
)
from .wording import status_words, travel_words

__all__ = ["export_all", "about", "read_export_csv", "SHAPEFILE_FIELDS"]

def about(outcome: Outcome) -> dict[str, str]:
    """The record every export carries: option, level, dates, status and the notice."""
    s = outcome.inputs.settings
    return {
        "option": outcome.name or "(unsaved option)",
        "level": outcome.level,
        "project": s.name,
        "plan_year": str(outcome.settings.plan_year),
        "years": ", ".join(str(y) for y in plan_years(outcome)),
        "created": outcome.created,
        "exported": now_iso(),
        "status": status_words(outcome.plan),
        "travel measure": travel_words(outcome),
        "notice": DRAFT_NOTICE,
    }


# ---------------------------------------------------------------------------- writers
def read_export_csv(path: str | os.PathLike) -> tuple[pd.DataFrame, dict]:
    """Read an exported CSV and its sidecar: the table and the record (with ``columns``,
    a note per column)."""
    path = Path(path)
    record = json.loads((path.parent / sidecar_name(path.name)).read_text(encoding="utf-8"))
    return pd.read_csv(path, keep_default_na=False, na_values=[""]), record


def _gpkg_layer(frame, path: Path, layer: str, record: dict[str, str]) -> None:
    frame = frame.copy()
    frame.insert(0, "option", record["option"])
    description = f"{record['option']} ({record['level']}, exported {record['exported']}). " \
        f"{record['notice']}"
    pyogrio.write_dataframe(frame, path, layer=layer, driver="GPKG",
                            layer_options={"DESCRIPTION": description})


#: Shapefile field names (at most 10 characters) of the zones layer's columns; per-year
#: columns ``students_<y>``, ``util_<y>`` and ``flag_<y>`` become ``st_<y>``, ``ut_<y>`` and
#: ``fl_<y>``.
SHAPEFILE_FIELDS = {
    "option": "option", "site_id": "site_id", "name": "name", "status": "status",
    "open": "open", "capacity": "capacity", "min_util": "min_util", "max_util": "max_util",
    "units": "units", "students_now": "st_now", "moved_in": "moved_in",
    "moved_out": "moved_out", "mean_distance_m": "mean_m", "max_distance_m": "max_m",
    "out_of_band": "out_band", "n_parts": "n_parts", "colour": "colour",
}
_SHP_PREFIX = {"students_": "st_", "util_": "ut_", "flag_": "fl_", "walkers_": "wk_",
               "transported_": "tr_"}
_FIELD_MEANING = {
    "option": "option name", "site_id": "school site id", "name": "school name",
    "status": "site status in the plan year", "open": "1 if open in the plan",
    "capacity": "capacity (students)", "min_util": "lowest utilization in the band",
    "max_util": "highest utilization in the band", "units": "planning units in the zone",
    "st_now": "students today (current year, today's zones)",
    "moved_in": "plan-year students who join from another school",
    "moved_out": "plan-year students who leave for another school",
    "mean_m": "mean travel distance, metres (student-weighted)",
    "max_m": "longest travel distance of a unit with students, metres",
    "out_band": "1 if outside the utilization band in some year",
    "n_parts": "polygon parts of the zone (1 = one piece)",
    "colour": "the school's display colour on every map (#RRGGBB)",
    "st_": "students in the proposed zone, year", "ut_": "utilization (students / capacity), year",
    "fl_": "over / under the band, year",
    "wk_": "students within walking distance of the school, year",
    "tr_": "students needing transport, year",
}


def _group_of(column: str) -> str:
    """``share_meal_support_2027`` -> ``meal_support``."""
    return column.removeprefix("share_").rsplit("_", 1)[0]


def _shp_name(column: str, groups: list[str] = ()) -> str:
    """The Shapefile field name; a group share ``share_<group>_<y>`` is ``g<k>_<y>``, k the
    group's place in ``groups`` (from 1)."""
    if column in SHAPEFILE_FIELDS:
        return SHAPEFILE_FIELDS[column]
    if column.startswith("share_") and _group_of(column) in groups:
        return f"g{list(groups).index(_group_of(column)) + 1}_{column.rsplit('_', 1)[1]}"
    for long, short in _SHP_PREFIX.items():
        if column.startswith(long):
            return short + column[len(long):]
    raise KeyError(f"no Shapefile field name for column {column!r}")


def _write_shapefile_zip(zones: gpd.GeoDataFrame, target: Path, record: dict[str, str]) -> None:
    frame = zones.copy()
    frame.insert(0, "option", record["option"])
    for c in frame.columns:
        if frame[c].dtype == bool:
            frame[c] = frame[c].astype(np.int32)
    groups = list(dict.fromkeys(_group_of(c) for c in frame.columns if c.startswith("share_")))
    names = {c: _shp_name(c, groups) for c in frame.columns if c != "geometry"}
    frame = frame.rename(columns=names)
    stem = target.stem.removesuffix("_shp")
    meaning = {**_FIELD_MEANING, **{f"g{k + 1}_": f"share of {g} among the students (0-1), "
                                    "year" for k, g in enumerate(groups)}}
    legend = []
    for short in names.values():
        key = next((p for p in meaning if short == p or
                    (p.endswith("_") and short.startswith(p))), short)
        year = short[len(key):] if key.endswith("_") else ""
        legend.append(f"  {short:<10} {meaning.get(key, '')}{' ' + year if year else ''}")
    readme = "\n".join([
        f"Attendance zones of option: {record['option']}",
        f"Level: {record['level']}    Plan year: {record['plan_year']}    "
        f"Years: {record['years']}",
        f"Project: {record['project']}",
        f"Created: {record['created']}    Exported: {record['exported']}",
        f"Status: {record['status']}",
        f"Travel measure: {record['travel measure']}",
        "",
        record["notice"],
        "",
        f"Files: {stem}.shp/.shx/.dbf (zones), .prj (coordinate system), .cpg (UTF-8 text).",
        "Fields:",
        *legend,
        "",
    ])
    with tempfile.TemporaryDirectory(dir=target.parent, prefix=".tmp-shp-") as tmpdir:
        shp = Path(tmpdir) / f"{stem}.shp"
        pyogrio.write_dataframe(frame, shp, driver="ESRI Shapefile",
                                layer_options={"ENCODING": "UTF-8"})
        with atomic_path(target) as tmp, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as zf:
            for part in sorted(Path(tmpdir).iterdir()):
                zf.write(part, part.name)
            zf.writestr("README.txt", readme)


def export_all(outcome: Outcome, folder: str | os.PathLike) -> dict[str, Path]:
    """Write every export of ``outcome`` into ``folder``; return {kind: path}.

    Kinds: ``gpkg``, ``geojson``, ``shapefile`` (zip), ``units_csv``, ``schools_csv``,
    ``feeders_csv`` (where each school's students go at the neighbouring level), and
    ``units_about``, ``schools_about``, ``feeders_about`` (the CSVs' sidecars). File names
    start with
    :func:`slug` of the option name.
    """
    require_plan(outcome, "export")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    record = about(outcome)
    stem = slug(outcome.name, fallback=f"unsaved-{outcome.level}")
    paths = {
        "gpkg": folder / f"{stem}.gpkg",
        "geojson": folder / f"{stem}_zones.geojson",
        "shapefile": folder / f"{stem}_zones_shp.zip",
        "units_csv": folder / f"{stem}_units.csv",
        "schools_csv": folder / f"{stem}_schools.csv",
        "feeders_csv": folder / f"{stem}_feeders.csv",
    }
    for kind in ("units", "schools", "feeders"):
        paths[f"{kind}_about"] = folder / sidecar_name(paths[f"{kind}_csv"].name)
    colours = stored_school_colours(outcome.inputs, outcome.level)
    zones = zones_frame(outcome)
    zones.insert(len(zones.columns) - 1, "colour", zones["site_id"].map(colours).fillna(""))
    ut = unit_table(outcome)
    units = gpd.GeoDataFrame(ut, geometry=outcome.inputs.units.geometry.to_numpy(),
                             crs=outcome.inputs.crs)
    sites = outcome.sites
    site_layer = gpd.GeoDataFrame({
        "site_id": outcome.site_ids,
        "name": sites["name"].astype(str).to_list(),
        "status": plan_status(outcome),
        "open": np.asarray(outcome.plan.open_sites, bool),
        "capacity": sites["capacity"].to_numpy(dtype=float),
    }, geometry=sites.geometry.to_numpy(), crs=outcome.inputs.crs)
    changed = changed_frame(outcome)

    with atomic_path(paths["gpkg"]) as tmp:
        for layer, frame in (("zones", zones), ("units", units), ("sites", site_layer),
                             ("changed_areas", changed)):
            _gpkg_layer(frame, tmp, layer, record)
        about_table = pd.DataFrame({"key": list(record), "value": list(record.values())})
        pyogrio.write_dataframe(about_table, tmp, layer="about", driver="GPKG",
                                layer_options={"DESCRIPTION": record["notice"]})

    with atomic_path(paths["geojson"]) as tmp:
        wgs = zones.to_crs("EPSG:4326")
        wgs.insert(0, "option", record["option"])
        description = (f"{record['option']} - {record['level']}, plan year "
                       f"{record['plan_year']}, exported {record['exported']}. "
                       f"{record['notice']}")
        pyogrio.write_dataframe(wgs, tmp, driver="GeoJSON", layer=stem,
                                layer_options={"RFC7946": "YES", "DESCRIPTION": description})

    _write_shapefile_zip(zones, paths["shapefile"], record)
    for kind, (sheet, notes) in (("units", unit_sheet(outcome)),
                                 ("schools", school_sheet(outcome, colours)),
                                 ("feeders", feeder_sheet(outcome))):
        atomic_write_text(paths[f"{kind}_csv"], csv_text(sheet))
        atomic_write_text(paths[f"{kind}_about"], about_json(record, notes))
    return paths


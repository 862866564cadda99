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
- ``<option>_units.csv`` and ``<option>_schools.csv``: leading ``# `` lines give the option,
  level, dates and the notice; text fields are quoted, so
  ``pandas.read_csv(path, comment="#")`` (or :func:`read_export_csv`) reads the table and
  a spreadsheet shows the block above the header.

The tables come from :mod:`districting.outputs.tables`, which the hearing packet and the
workbench use too, so a figure printed or shown is the figure exported. Every file is
written through :func:`districting.io.atomic_path`.
"""

from __future__ import annotations

import csv
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
from .tables import (
    changed_frame,
    plan_status,
    plan_years,
    require_plan,
    school_table,
    unit_table,
    zones_frame,
)

__all__ = ["export_all", "about", "read_export_csv", "SHAPEFILE_FIELDS"]

def about(outcome: Outcome) -> dict[str, str]:
    """The record every export carries: option, level, dates, status and the notice."""
    s = outcome.inputs.settings
    plan = outcome.plan
    return {
        "option": outcome.name or "(unsaved option)",
        "level": outcome.level,
        "project": s.name,
        "plan_year": str(outcome.settings.plan_year),
        "years": ", ".join(str(y) for y in plan_years(outcome)),
        "created": outcome.created,
        "exported": now_iso(),
        "status": plan.status,
        "gap": f"{plan.gap:.4g}",
        "travel": outcome.travel_line.removeprefix("Travel: "),
        "notice": DRAFT_NOTICE,
    }


# ---------------------------------------------------------------------------- writers
def _csv_text(table: pd.DataFrame, record: dict[str, str]) -> str:
    head = [f"# {k}: {v}" for k, v in record.items()]
    head.append('# read with pandas: pd.read_csv(path, comment="#")')
    body = table.to_csv(index=False, quoting=csv.QUOTE_NONNUMERIC, lineterminator="\n")
    return "\n".join(head) + "\n" + body


def read_export_csv(path: str | os.PathLike) -> tuple[pd.DataFrame, dict[str, str]]:
    """Read an exported CSV: the table and its ``# key: value`` header record."""
    record = {}
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            if not line.startswith("# "):
                break
            key, _, value = line[2:].rstrip("\n").partition(": ")
            record[key] = value
    return pd.read_csv(path, comment="#", keep_default_na=False, na_values=[""]), record


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
    "out_of_band": "out_band", "n_parts": "n_parts",
}
_SHP_PREFIX = {"students_": "st_", "util_": "ut_", "flag_": "fl_"}
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
    "st_": "students in the proposed zone, year", "ut_": "utilization (students / capacity), year",
    "fl_": "over / under the band, year",
}


def _shp_name(column: str) -> str:
    if column in SHAPEFILE_FIELDS:
        return SHAPEFILE_FIELDS[column]
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
    names = {c: _shp_name(c) for c in frame.columns if c != "geometry"}
    frame = frame.rename(columns=names)
    stem = target.stem.removesuffix("_shp")
    legend = []
    for short in names.values():
        key = next((p for p in _FIELD_MEANING if short == p or
                    (p.endswith("_") and short.startswith(p))), short)
        year = short[len(key):] if key.endswith("_") else ""
        legend.append(f"  {short:<10} {_FIELD_MEANING.get(key, '')}{' ' + year if year else ''}")
    readme = "\n".join([
        f"Attendance zones of option: {record['option']}",
        f"Level: {record['level']}    Plan year: {record['plan_year']}    "
        f"Years: {record['years']}",
        f"Project: {record['project']}",
        f"Created: {record['created']}    Exported: {record['exported']}",
        f"Status: {record['status']} (gap {record['gap']})",
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

    Kinds: ``gpkg``, ``geojson``, ``shapefile`` (zip), ``units_csv``, ``schools_csv``.
    File names start with :func:`slug` of the option name.
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
    }
    zones = zones_frame(outcome)
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
    atomic_write_text(paths["units_csv"], _csv_text(ut, record))
    atomic_write_text(paths["schools_csv"], _csv_text(school_table(outcome), record))
    return paths


"""Tables for spreadsheets: the CSV exports, with titles people read and a sidecar.

:func:`school_sheet` and :func:`unit_sheet` turn the report tables
(:mod:`districting.outputs.tables`) into plain tables a spreadsheet opens as they are:
the header on line 1, one row per school or planning unit, no index column, clear column
titles with their units, years as plain numbers, whole students as integers, utilization
in percent (one decimal, so 100.4% over the limit never reads as 100%), distances in km
with two decimals, yes / no for flags. A value that does not exist (the mean travel of a
school with no students) is an empty cell, and the column's note says why.

Each CSV has a sidecar ``<name>.about.json`` (UTF-8 JSON): the option, level, project,
years, status in words, the travel measure, when it was made and exported, the
decision-support notice, and a note per column (what it holds; when a cell is empty,
why). :func:`csv_text` writes the table, :func:`about_json` the sidecar.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from ..study import Outcome
from .practice import practice_sheet
from .tables import plan_years, school_table, unit_table
from .wording import DASH

__all__ = ["school_sheet", "unit_sheet", "csv_text", "about_json", "sidecar_name", "whole_numbers",
           "for_people"]


def whole_numbers(values) -> pd.Series:
    """Whole numbers (nullable integers: an empty cell where there is no value)."""
    return pd.Series(np.round(np.asarray(values, dtype=float))).astype("Int64")


def _decimals(values, places: int) -> pd.Series:
    return pd.Series(np.round(np.asarray(values, dtype=float), places))


def _yes(values) -> list[str]:
    return ["yes" if bool(v) else "no" for v in values]


def school_sheet(outcome: Outcome, colours: dict[str, str] | None = None
                 ) -> tuple[pd.DataFrame, dict[str, str]]:
    """One row per school of the level, and a note per column."""
    t = school_table(outcome)
    s = outcome.inputs.settings
    plan_year = int(outcome.settings.plan_year)
    sheet = pd.DataFrame({
        "Site id": t["site_id"],
        "School": t["name"],
        f"Status in {plan_year}": t["status"],
        "Open in the plan": _yes(t["open"]),
        "Capacity (students)": whole_numbers(t["capacity"]),
        "Lowest utilization allowed (%)": _decimals(100 * t["min_util"], 1),
        "Highest utilization allowed (%)": _decimals(100 * t["max_util"], 1),
        "Planning units in the zone": whole_numbers(t["units"]),
        f"Students {s.current_year}, today's zones": whole_numbers(t["students_now"]),
    })
    notes = {
        "Site id": "the school site's id in the project",
        "School": "the school's name",
        f"Status in {plan_year}": "open, new, candidate, closing or closed, in the plan year",
        "Open in the plan": "yes when the school takes students in this option",
        "Capacity (students)": "seats; empty when the project gives none",
        "Lowest utilization allowed (%)": "the band's floor, percent of capacity",
        "Highest utilization allowed (%)": "the band's limit, percent of capacity",
        "Planning units in the zone": "planning units assigned to the school in this option",
        f"Students {s.current_year}, today's zones":
            f"students in {s.current_year} living in the school's zone today",
    }
    for y in plan_years(outcome):
        sheet[f"Students {y}"] = whole_numbers(t[f"students_{y}"])
        notes[f"Students {y}"] = f"students in the proposed zone in {y}"
        sheet[f"Utilization {y} (%)"] = _decimals(100 * t[f"util_{y}"], 1)
        notes[f"Utilization {y} (%)"] = (f"students {y} / capacity, percent; empty when the "
                                         "school has no capacity")
        sheet[f"Band {y}"] = t[f"flag_{y}"].map({"over": "over the limit",
                                                 "under": "under the floor"}).fillna("")
        notes[f"Band {y}"] = f"whether the school is outside its band in {y}; empty if inside"
    sheet[f"Students moving in ({plan_year})"] = whole_numbers(t["moved_in"])
    sheet[f"Students moving out ({plan_year})"] = whole_numbers(t["moved_out"])
    sheet["Mean travel (km)"] = _decimals(t["mean_distance_m"] / 1000, 2)
    sheet["Longest travel (km)"] = _decimals(t["max_distance_m"] / 1000, 2)
    sheet["Outside the band in some year"] = _yes(t["out_of_band"])
    extra, extra_notes = practice_sheet(outcome, t, whole_numbers, _decimals)
    for title, values in extra.items():
        sheet[title] = values
    notes.update(extra_notes)
    notes.update({
        f"Students moving in ({plan_year})": "students who join from another school's zone",
        f"Students moving out ({plan_year})": "students who leave for another school's zone",
        "Mean travel (km)": "student-weighted mean travel to the school, km; empty when the "
                            "school has no students",
        "Longest travel (km)": "longest travel of a planning unit with students, km; empty "
                               "when the school has no students",
        "Outside the band in some year": "yes when above the limit or below the floor in "
                                         "any projected year",
    })
    if colours is not None:
        sheet["Colour"] = [colours.get(sid, "") for sid in t["site_id"]]
        notes["Colour"] = "the school's display colour on every map (#RRGGBB)"
    return sheet, notes


def unit_sheet(outcome: Outcome) -> tuple[pd.DataFrame, dict[str, str]]:
    """One row per planning unit, and a note per column."""
    u = unit_table(outcome)
    plan_year = int(outcome.settings.plan_year)
    names = dict(zip(outcome.site_ids, outcome.sites["name"].astype(str), strict=True))
    sheet = pd.DataFrame({
        "Unit id": u["unit_id"],
        "Today's school (site id)": u["current"],
        "Proposed school (site id)": u["proposed"],
        "Proposed school": [names.get(s, "") for s in u["proposed"]],
        "Changes school": _yes(u["changed"]),
        f"Students {plan_year}": whole_numbers(u[f"students_{plan_year}"]),
        "Travel to the proposed school (km)": _decimals(u["distance_m"] / 1000, 2),
    })
    notes = {
        "Unit id": "the planning unit's id in the project",
        "Today's school (site id)": "today's school; empty when the unit has no zone today",
        "Proposed school (site id)": "the school in this option",
        "Proposed school": "the proposed school's name",
        "Changes school": "yes when the proposed school differs from today's",
        f"Students {plan_year}": f"students living in the unit in {plan_year} (whole students)",
        "Travel to the proposed school (km)": "from the unit's point to the school, km, by "
                                              "the option's travel measure",
    }
    return sheet, notes


def csv_text(sheet: pd.DataFrame) -> str:
    """The table as CSV: header on line 1, no index, text quoted where needed."""
    return sheet.to_csv(index=False, lineterminator="\n")


def about_json(record: dict[str, str], notes: dict[str, str]) -> str:
    """The sidecar's text: the export's record and a note per column."""
    return json.dumps({**record, "columns": notes}, ensure_ascii=False, indent=2) + "\n"


def sidecar_name(csv_name: str) -> str:
    """``option-a_units.csv`` -> ``option-a_units.about.json``."""
    return csv_name.removesuffix(".csv") + ".about.json"


def for_people(sheet: pd.DataFrame) -> pd.DataFrame:
    """A sheet as text for a table on screen or paper: whole numbers with thousands
    separators, decimals as rounded in the sheet, a dash where there is no number (the
    column notes say why), no index column to show."""
    out = {}
    for column in sheet.columns:
        values = sheet[column]
        if pd.api.types.is_integer_dtype(values):
            out[column] = [DASH if pd.isna(v) else f"{int(v):,}" for v in values]
        elif pd.api.types.is_float_dtype(values):
            places = 2 if "(km)" in column else 1
            out[column] = [DASH if pd.isna(v) else f"{v:,.{places}f}" for v in values]
        else:
            out[column] = [DASH if pd.isna(v) else str(v) for v in values]
    return pd.DataFrame(out).reset_index(drop=True)

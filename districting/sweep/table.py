"""The sweep's table: one row per combination, as a CSV with its ``.about.json`` sidecar.

Plain columns a spreadsheet opens as they are (see :mod:`districting.outputs.sheets`):
whole students, km with two decimals, percent with one; an empty cell where a combination
has no plan. The sidecar says what the sweep was, a note per column, and that results are
decision support.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from .. import DRAFT_NOTICE
from ..intake import Inputs
from ..io import atomic_write_text
from ..outputs.sheets import about_json, csv_text, sidecar_name, whole_numbers
from ..study import now_iso
from .frontier import non_dominated
from .results import SweepResult

__all__ = ["sweep_paths", "sweep_sheet", "write_table", "read_table", "default_folder",
           "OPTION", "MOVED", "MEAN_KM", "SPREAD",
           "SETTINGS", "FRONTIER",
           "TOTAL_KM"]

OPTION, SETTINGS = "Option", "Settings"
MOVED, MEAN_KM = "Students moved", "Mean travel (km)"
TOTAL_KM = "Total travel (student-km)"
SPREAD, FRONTIER = "Utilization spread (points)", "On the frontier"


def sweep_paths(folder: str | Path, level: str) -> dict[str, Path]:
    """The chart, the table and its sidecar of a level's latest sweep in ``folder``."""
    folder = Path(folder)
    csv = folder / f"sweep-{level}.csv"
    return {"png": folder / f"sweep-{level}.png", "csv": csv,
            "about": folder / sidecar_name(csv.name)}


def default_folder(inputs: Inputs) -> Path:
    """Where a sweep writes its chart and table without --out: out/ beside the project."""
    return Path(inputs.settings.path).parent / "out"


def read_table(folder: str | Path, level: str) -> pd.DataFrame | None:
    """The table of the level's latest sweep in ``folder`` (None when there is none)."""
    path = sweep_paths(folder, level)["csv"]
    if not path.exists():
        return None
    return pd.read_csv(path, keep_default_na=False, na_values=[""])


def _round(values, places: int) -> pd.Series:
    return pd.Series(np.round(np.asarray(values, float), places))


def sweep_sheet(results: Sequence[SweepResult], plan_year: int
                ) -> tuple[pd.DataFrame, dict[str, str]]:
    """The table and a note per column."""
    r = list(results)
    # on the unrounded figures: total travel tells apart plans whose mean km round alike
    front = non_dominated([x.students_moved for x in r], [x.total_km for x in r])
    sheet = pd.DataFrame({
        OPTION: [x.name for x in r],
        SETTINGS: [x.words for x in r],
        "Charge per student moved (m)": _round([x.setting.stability_weight for x in r], 0),
        "Lowest utilization allowed (%)": _round([100 * x.setting.min_util for x in r], 1),
        "Highest utilization allowed (%)": _round([100 * x.setting.max_util for x in r], 1),
        "Site scenario": [x.setting.scenario.name for x in r],
        "Status": [x.status for x in r],
        MOVED: whole_numbers([x.students_moved for x in r]),
        MEAN_KM: _round([x.mean_km for x in r], 2),
        TOTAL_KM: whole_numbers([x.total_km for x in r]),
        "Highest utilization (%)": _round([x.highest_util for x in r], 1),
        "Lowest utilization (%)": _round([x.lowest_util for x in r], 1),
        SPREAD: _round([x.spread for x in r], 1),
        FRONTIER: ["yes" if f else "no" for f in front],
        "Solve time (s)": _round([x.seconds for x in r], 1),
    })
    notes = {
        OPTION: "the saved option's name (open it with the workbench, verify or export)",
        SETTINGS: "the combination in words",
        "Charge per student moved (m)": "metres of travel charged per student moved away "
                                        "from today's school (stability weight)",
        "Lowest utilization allowed (%)": "the band's floor, percent of capacity",
        "Highest utilization allowed (%)": "the band's limit, percent of capacity",
        "Site scenario": "the site statuses changed for this combination; empty: as in the "
                         "project",
        "Status": "how good the plan is proven to be, or why there is none",
        MOVED: f"students in {plan_year} whose school differs from today's; empty: no plan",
        MEAN_KM: f"student-weighted mean travel in {plan_year}, km; empty: no plan",
        TOTAL_KM: f"students x km summed over the level in {plan_year}",
        "Highest utilization (%)": f"the fullest open school in {plan_year}, percent of "
                                   "capacity",
        "Lowest utilization (%)": f"the emptiest open school in {plan_year}, percent of "
                                  "capacity",
        SPREAD: "highest minus lowest utilization, percentage points: how evenly the "
                "schools are filled (lower is more even)",
        FRONTIER: "yes when no other option of the sweep moves at most as many students "
                  "with at most as much total travel, and fewer or less of one",
        "Solve time (s)": "seconds this combination took to solve (when it was solved)",
    }
    return sheet, notes


def write_table(results: Sequence[SweepResult], inputs: Inputs, level: str,
                folder: str | Path, travel: str) -> dict:
    """Write the CSV and its sidecar atomically; returns their paths (``csv``, ``about``,
    ``png`` for the chart) and the table itself (``sheet``)."""
    paths = sweep_paths(folder, level)
    sheet, notes = sweep_sheet(results, int(inputs.settings.plan_year))
    paths["sheet"] = sheet
    record = {"project": inputs.settings.name, "level": level,
              "plan_year": str(inputs.settings.plan_year), "travel measure": travel,
              "combinations": str(len(sheet)), "written": now_iso(),
              "notice": DRAFT_NOTICE + " The sweep compares options; the board decides "
                                       "under its own policy and local law."}
    atomic_write_text(paths["csv"], csv_text(sheet))
    atomic_write_text(paths["about"], about_json(record, notes))
    return paths

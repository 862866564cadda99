"""Feeder patterns: where each school's students go at the next level, built once for the
exports, the packet, the workbench and the command line.

For an option of one level, :func:`feeder_table` pairs it with each neighbouring level:
the level below feeds this option's schools, and this option's schools feed the level
above. The neighbouring level's zones are the ones the option was solved against (its
feeder rule's fixed zones), else the saved option named in the project's ``[feeders]
zones``, else today's zones. Students are counted at the lower level in the plan year:
the students of the lower level living in a unit follow that unit's upper-level school.

A lower school *splits* when its students go to two or more upper schools.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..intake import Inputs
from ..intake.feeders import neighbour
from ..study import Outcome
from .sheets import whole_numbers
from .store import OptionError, option_zones

__all__ = ["given_zones", "feeder_run", "level_zones", "feeder_table", "split_feeders",
           "feeder_sheet", "feeder_words"]


def given_zones(inputs: Inputs, level: str) -> tuple[dict[str, str], str]:
    """(unit id -> site id, option name) of the saved option ``[feeders] zones`` names for
    ``level``; ({}, "") when it names none (today's zones stand for the level).

    A name the store does not hold, or an option of another level, is refused naming the
    project file, the key and the fix.
    """
    s = inputs.settings
    name = s.feeders.zones.get(level, "")
    if not name:
        return {}, ""
    where = f"{s.path}: [feeders] zones, {level} = {name!r}"
    try:
        saved_level, zones = option_zones(s.store, name)
    except OptionError as exc:
        raise ValueError(f"{where}: {exc}; fix: save a {level} option under that name "
                         f"(solve --level {level} --save {name!r}), correct the name "
                         f"(`districting options` lists them), or remove it to use today's "
                         f"{level} zones") from None
    if saved_level != level:
        raise ValueError(f"{where}: that option is a {saved_level} option, not a {level} one;"
                         f" fix: name a saved {level} option, or remove it to use today's "
                         f"{level} zones")
    return zones, name


def feeder_run(inputs: Inputs, level: str, feeding: str | None = None,
               given: str | None = None) -> dict:
    """The :class:`~districting.study.RunSettings` fields of a run's feeder rule.

    ``feeding`` is "whole", "nested" or "none" (None: the project's ``[feeders]``);
    ``given`` names a saved option of the neighbouring level whose zones stay fixed (None:
    the one ``[feeders] zones`` names, else today's zones, which the study fills in).
    """
    for named in inputs.settings.feeders.zones:  # every named option refused up front
        given_zones(inputs, named)
    rule = inputs.settings.feeders.rule(level) if feeding is None else (
        "" if feeding == "none" else feeding)
    if not rule:
        if given:
            raise ValueError(f"--given {given!r} names the zones a feeder rule holds fixed, "
                             f"and the {level} run has no feeder rule; fix: add --feeding "
                             "whole or --feeding nested, or leave out --given")
        return {"feeding": ""}
    other = neighbour(inputs.settings.levels, level, rule)
    if other is None:
        where = "below" if rule == "whole" else "above"
        raise ValueError(f"--feeding {rule}: {level} has no level {where} it (levels: "
                         f"{', '.join(inputs.settings.levels)}); fix: "
                         + ("use --feeding nested to keep its zones inside those above"
                            if rule == "whole" else
                            "use --feeding whole to have the level below feed it whole"))
    if not given:
        zones, name = given_zones(inputs, other)
        return {"feeding": rule, "given": zones, "given_name": name}
    try:
        saved_level, zones = option_zones(inputs.settings.store, given)
    except OptionError as exc:
        raise ValueError(f"--given {given!r}: {exc}; fix: name a saved {other} option "
                         "(`districting options` lists them)") from None
    if saved_level != other:
        raise ValueError(f"--given {given!r} is a {saved_level} option, and {rule} feeding "
                         f"of {level} holds the {other} zones fixed; fix: name a saved "
                         f"{other} option")
    return {"feeding": rule, "given": zones, "given_name": given}


def level_zones(inputs: Inputs, level: str) -> tuple[np.ndarray, str]:
    """The zones standing for ``level`` (row of ``inputs.sites`` per unit, -1 none) and
    where they come from in words ("option 'X'" or "today's zones")."""
    zones, name = given_zones(inputs, level)
    if not name:
        return np.asarray(inputs.current[level], np.int64), "today's zones"
    return _rows_of(inputs, zones), f"option {name!r}"


def _rows_of(inputs: Inputs, zones: dict[str, str]) -> np.ndarray:
    pos = {sid: k for k, sid in enumerate(inputs.sites["site_id"].astype(str))}
    units = inputs.units["unit_id"].astype(str).tolist()
    return np.array([pos.get(zones.get(u, ""), -1) for u in units], np.int64)


def _neighbour_zones(outcome: Outcome, other: str) -> tuple[np.ndarray, str]:
    rs = outcome.settings
    if rs.feeding and rs.given and neighbour(outcome.inputs.settings.levels, outcome.level,
                                             rs.feeding) == other:
        source = f"option {rs.given_name!r}" if rs.given_name else "today's zones"
        return _rows_of(outcome.inputs, rs.given), source
    return level_zones(outcome.inputs, other)


def _pairs(inputs: Inputs, lower_level: str, lower: np.ndarray, upper: np.ndarray,
           year: int) -> pd.DataFrame:
    """One row per (lower school, upper school) pair with students, in the sites' order."""
    d = np.asarray(inputs.counts[lower_level][inputs.year_row(year)], float)
    ok = (lower >= 0) & (upper >= 0)
    frame = pd.DataFrame({"from_row": lower[ok], "to_row": upper[ok], "students": d[ok]})
    pairs = frame.groupby(["from_row", "to_row"], sort=True, as_index=False)["students"].sum()
    sites = inputs.sites
    total = pairs.groupby("from_row")["students"].transform("sum")
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(total > 0, pairs["students"] / total, np.nan)
    fed = pairs[pairs["students"] > 0].groupby("from_row")["to_row"].nunique()
    ids, names = sites["site_id"].astype(str).to_numpy(), sites["name"].astype(str).to_numpy()
    return pd.DataFrame({
        "from_id": ids[pairs["from_row"]], "from_name": names[pairs["from_row"]],
        "to_id": ids[pairs["to_row"]], "to_name": names[pairs["to_row"]],
        "students": pairs["students"].to_numpy(), "share": share,
        "from_students": total.to_numpy(),
        "split": pairs["from_row"].map(fed).fillna(0).to_numpy() > 1,
    })


def feeder_table(outcome: Outcome) -> pd.DataFrame:
    """Feeder pairs of an option with each neighbouring level, one row per (lower school,
    upper school) pair with students or a unit: ``lower_level``, ``upper_level``,
    ``from_id``, ``from_name``, ``to_id``, ``to_name``, ``students`` (lower-level students
    in the plan year), ``share`` of the lower school's students (0-1), ``from_students``,
    ``split`` (the lower school feeds two or more upper schools) and ``source`` (whose
    zones stand for the neighbouring level)."""
    inputs, level = outcome.inputs, outcome.level
    year = int(outcome.settings.plan_year)
    plan = np.full(len(outcome.assignment), -1, np.int64)
    a = np.asarray(outcome.assignment, np.int64)
    plan[a >= 0] = np.asarray(outcome.site_rows)[a[a >= 0]]
    parts = []
    for rule, lower_side in (("whole", True), ("nested", False)):
        other = neighbour(inputs.settings.levels, level, rule)
        if other is None:
            continue
        zones, source = _neighbour_zones(outcome, other)
        lower_level, upper_level = (other, level) if lower_side else (level, other)
        lower, upper = (zones, plan) if lower_side else (plan, zones)
        part = _pairs(inputs, lower_level, lower, upper, year)
        part.insert(0, "upper_level", upper_level)
        part.insert(0, "lower_level", lower_level)
        part["source"] = f"{other}: {source}"
        parts.append(part)
    if not parts:
        return pd.DataFrame(columns=["lower_level", "upper_level", "from_id", "from_name",
                                     "to_id", "to_name", "students", "share",
                                     "from_students", "split", "source"])
    return pd.concat(parts, ignore_index=True)


def split_feeders(table: pd.DataFrame, lower_level: str | None = None) -> int:
    """Lower schools that feed two or more upper schools (of ``lower_level`` only, if given)."""
    t = table if lower_level is None else table[table["lower_level"] == lower_level]
    return int(t.loc[t["split"], ["lower_level", "from_id"]].drop_duplicates().shape[0])


def feeder_words(outcome: Outcome) -> list[str]:
    """One line per neighbouring level: the split feeders in words."""
    table = feeder_table(outcome)
    lines = []
    for (lower, upper), part in table.groupby(["lower_level", "upper_level"], sort=False):
        n = split_feeders(part)
        schools = part["from_id"].nunique()
        # "1 of 4 middle schools split": the count is of the schools, never "school splits"
        lines.append(f"feeders {lower} -> {upper}: {n} of {schools} {lower} schools split "
                     f"({part['source'].iloc[0]})")
    return lines


def feeder_sheet(outcome: Outcome) -> tuple[pd.DataFrame, dict[str, str]]:
    """The feeder table for spreadsheets (one row per pair), and a note per column."""
    t = feeder_table(outcome)
    year = int(outcome.settings.plan_year)
    sheet = pd.DataFrame({
        "Feeding": [f"{lo} to {up}" for lo, up in zip(t["lower_level"], t["upper_level"],
                                                       strict=True)],
        "From school (site id)": t["from_id"],
        "From school": t["from_name"],
        "To school (site id)": t["to_id"],
        "To school": t["to_name"],
        f"Students {year}": whole_numbers(t["students"]),
        "Share of the from school's students (%)": pd.Series(
            np.round(100 * t["share"].to_numpy(dtype=float), 1)),
        "From school splits": ["yes" if v else "no" for v in t["split"]],
        "Zones of the other level": t["source"],
    })
    notes = {
        "Feeding": "the lower level and the level it feeds",
        "From school (site id)": "the lower-level school",
        "From school": "the lower-level school's name",
        "To school (site id)": "the upper-level school its students go to",
        "To school": "the upper-level school's name",
        f"Students {year}": f"lower-level students in {year} living in units of the from "
                            "school's zone that lie in the to school's zone",
        "Share of the from school's students (%)": "students / all the from school's "
                                                   "students, percent; empty when it has none",
        "From school splits": "yes when the from school's students go to two or more "
                              "upper-level schools",
        "Zones of the other level": "whose zones stand for the neighbouring level: a saved "
                                    "option or today's zones",
    }
    return sheet, notes

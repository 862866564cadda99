"""Barriers, bridges, manual links, and the adjacency graph they shape."""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from .. import rules
from .adjacency import Adjacency
from .cells import text_values
from .checks import (
    check_graph,
)
from .reading import (
    Reading,
    csv_columns,
    in_degrees,
    source_layer,
    source_table,
    to_project_crs,
)
from .report import ids_text

__all__ = ["read_lines", "read_links", "build_adjacency"]



def read_lines(st: Reading) -> None:
    for key in ("barriers", "bridges"):
        if key not in st.settings.sources:
            continue
        file = st.settings.sources[key].path
        frame = source_layer(st, key)
        if frame is None or in_degrees(st, frame, key, file):
            continue
        frame = to_project_crs(st, frame, key, file)
        geoms = frame.geometry.reset_index(drop=True)
        geoms = geoms[~(geoms.isna() | geoms.is_empty)].reset_index(drop=True)
        if not len(geoms):
            effect = ("no adjacency is cut" if key == "barriers"
                      else "no pair is kept across a barrier")
            st.report.warning(file, f"[{key}]", f"the {key} layer has no features, so "
                              f"{effect}", f"point [{key}] at the layer that holds them, or "
                              f"remove the [{key}] table if there are none")
        if key == "barriers":
            points = np.isin(shapely.get_type_id(geoms.to_numpy()), [0, 4])
            if points.any():
                st.report.error(file, f"features {ids_text(list(np.flatnonzero(points) + 1))}",
                                "barriers must be lines (or polygons); a point cannot cut "
                                "adjacency", "draw the river, road or rail as a line, or put "
                                "points in [bridges]")
                geoms = geoms[~points].reset_index(drop=True)
        setattr(st, key, geoms)


def read_links(st: Reading) -> None:
    path = st.settings.links
    if path is None:
        return
    table = source_table(st, path, "links")
    if table is None:
        return
    cols = csv_columns(st, path, table, ("unit_a", "unit_b", "action"), "the links CSV")
    if cols is None:
        return
    a = text_values(table[cols["unit_a"]])[0]
    b = text_values(table[cols["unit_b"]])[0]
    action = np.char.lower(text_values(table[cols["action"]])[0].astype(str))
    line = np.arange(len(table)) + 2  # the header is line 1
    known = set(st.unit_ids) if st.unit_ids is not None else None
    bad = np.zeros(len(table), bool)
    for what, mask, fix in (
        ("action must be add or remove", ~np.isin(action, ["add", "remove"]),
         "write add (join the pair) or remove (separate it)"),
        ("a unit cannot be linked to itself", (a == b) & (a != ""), "name two units"),
        ("unit_a or unit_b is not a planning unit",
         ~np.isin(a, list(known)) | ~np.isin(b, list(known)) if known is not None
         else np.zeros(len(table), bool), "correct the unit id"),
    ):
        mask = mask & ~bad
        if mask.any():
            rows = [f"row {k} ({a[i]}, {b[i]}, {action[i]})" for i, k in
                    zip(np.flatnonzero(mask), line[mask], strict=True)]
            st.report.error(path, ids_text(rows, 4), what, fix, [str(k) for k in line[mask]])
            bad |= mask
    st.links = pd.DataFrame({"unit_a": a, "unit_b": b, "action": action})[~bad]


def build_adjacency(st: Reading) -> None:
    if not st.units_ok or st.units is None:
        return
    file = st.settings.sources["units"].path
    try:
        st.adjacency = Adjacency.from_polygons(
            st.units.geometry, st.units["unit_id"].tolist(), st.settings.contiguity,
            barriers=st.barriers if len(st.barriers) else None,
            bridges=st.bridges if len(st.bridges) else None,
            links=st.links if st.links is not None and len(st.links) else None,
        )
    except ValueError as err:
        st.report.error(file, "adjacency", f"the adjacency graph cannot be built ({err})",
                        "fix the units, barriers or links named")
        return
    serving, site_labels = {}, {}
    if st.sites is not None:
        for level in st.settings.levels:
            lv = st.sites[st.sites["level"] == level]
            serving[level] = lv.loc[rules.takes_students(lv["status"]), "unit_index"].to_numpy()
            site_labels[level] = lv["site_id"].to_numpy()
    check_graph(st.report, file, st.adjacency, st.labels, serving, site_labels)

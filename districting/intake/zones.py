"""Today's attendance zone of each unit, per level (site ids)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .. import rules
from .cells import cell_text, columns_text, find_column, text_values
from .checks import (
    check_ids,
)
from .reading import (
    Reading,
    a_word,
    positions,
    source_layer,
    source_table,
)
from .report import ids_text, where_units

__all__ = ["read_zones"]



def read_zones(st: Reading) -> None:
    s = st.settings
    n = len(st.labels)
    st.current = {level: np.full(n, -1, dtype=np.int64) for level in s.levels}
    src = s.sources.get("zones")
    if src is None or st.unit_frame is None:
        return
    file = src.path
    units_src = s.sources["units"]
    if (src.path, src.layer) == (units_src.path, units_src.layer):
        frame = st.unit_frame
    elif src.path.suffix.lower() == ".csv":
        frame = source_table(st, src.path, "zones")
    else:
        frame = source_layer(st, "zones")
    if frame is None:
        return
    roles = {"id": src.columns["id"], **src.level_columns}
    found, lacking = {}, []
    for role, want in roles.items():
        col = find_column(frame.columns, want)
        if col is None:
            lacking.append(f"{want!r} ({role})")
        found[role] = col
    if lacking:
        st.report.error(file, "[zones] columns", f"column{'s' if len(lacking) > 1 else ''} "
                        f"{', '.join(lacking)} not found (columns: {columns_text(frame.columns)})",
                        "rename the column in the data, or correct [zones] id / columns")
    for level in [lv for lv in s.levels if lv not in src.level_columns]:
        st.report.warning(file, "[zones] columns", f"today's {level} zones are not given; "
                          f"students moved and the stability weight do not apply to {level}",
                          f"add {level} = \"<column>\" to [zones] columns")
    if found["id"] is None or st.unit_ids is None:
        return
    if frame is st.unit_frame:
        pos = np.arange(n)
    else:
        ids, missing = text_values(frame[found["id"]])
        check_ids(st.report, file, ids, missing, "row", found["id"], raw=frame[found["id"]])
        first = ~pd.Series(ids).duplicated().to_numpy() & ~missing
        index = pd.Index(ids[first])
        frame = frame[first].reset_index(drop=True)
        pos = index.get_indexer(st.unit_ids)
        extra = ~index.isin(st.unit_ids)
        if extra.any():
            st.report.warning(file, where_units(list(index[extra])), "zone rows for units that "
                              "are not in the units layer are ignored",
                              "correct the unit ids", list(index[extra]))
    site_ids = [] if st.sites is None else st.sites["site_id"].tolist()
    for level, col in src.level_columns.items():
        if col is None or found.get(level) is None:
            continue
        col = found[level]
        cells = np.full(n, "", dtype=object)
        cells[pos >= 0] = text_values(frame[col])[0][pos[pos >= 0]]
        st.current[level] = _zone_column(st, cells, level, col, site_ids, file)


def _zone_column(st: Reading, cells, level, col, site_ids, file) -> np.ndarray:
    none = cells == ""
    index = positions(list(site_ids), cells)
    unknown = ~none & (index < 0)
    if st.sites is None:
        return index
    if unknown.any():
        st.report.error(file, f"column {col}, {where_units(st.labels[unknown])}",
                        f"today's {level} zone names site {cell_text(cells, unknown)}, which "
                        "is not in the sites layer",
                        f"correct the site id in {col}, or add the site", st.labels[unknown])
    known = index >= 0
    site_level = np.where(known, st.sites["level"].to_numpy(dtype=object)[index], level)
    wrong = known & (site_level != level)
    if wrong.any():
        st.report.error(file, f"column {col}, {where_units(st.labels[wrong])}",
                        f"today's {level} zone names site {cell_text(cells, wrong)}, which is "
                        f"{a_word(ids_text(sorted(set(site_level[wrong]))))} site",
                        f"name {a_word(level)} site in {col}", st.labels[wrong])
    status = np.where(known, st.sites["status"].to_numpy(dtype=object)[index], "")
    future = known & ~wrong & np.isin(status, rules.NOT_OPEN_TODAY)
    if future.any():
        st.report.warning(file, f"column {col}, {where_units(st.labels[future])}",
                          f"today's {level} zone names a site that is not open today "
                          f"({cell_text(cells, future)}: new or candidate)",
                          "name the school the unit attends today", st.labels[future])
    if none.any():
        st.report.warning(file, f"column {col}, {where_units(st.labels[none])}",
                          f"no current {level} zone: the unit attends no {level} site today, "
                          "so no plan counts it as moved",
                          f"enter today's {level} site id in {col}", st.labels[none])
    return np.where(known & ~wrong, index, -1)

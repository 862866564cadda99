"""Student counts per level and year, from the units layer or a CSV joined on the unit id."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .cells import columns_text, find_column, text_values
from .checks import (
    check_counts,
    check_ids,
)
from .groups import read_group_counts
from .reading import (
    Reading,
    source_table,
)
from .records import Source
from .report import where_units

__all__ = ["read_counts"]



def read_counts(st: Reading) -> None:
    s = st.settings
    template = s.sources["units"].columns["counts"]
    src = s.sources.get("counts")
    if src is not None:
        table = source_table(st, src.path, "counts")
        if table is None:
            return
        file = src.path
        values, labels, present = _join_csv(st, table, src, file)
    else:
        if st.unit_frame is None:
            return
        table, file = st.unit_frame, s.sources["units"].path
        values, labels = table, st.labels
        present = np.ones(len(table), bool)
    n = len(labels)
    for level in s.levels:
        arr = np.zeros((len(s.all_years), n))
        absent = []
        for t, year in enumerate(s.all_years):
            try:
                name = template.format(level=level, year=year)
            except (KeyError, IndexError, ValueError):
                return  # the template itself is reported with the project file
            col = find_column(table.columns, name)
            if col is None:
                absent.append((year, name))
                st.doubtful.add((level, year))
                continue
            cells = values[col].to_numpy(dtype=object)
            before = len(st.report.errors)
            arr[t, present] = check_counts(st.report, file, cells[present], labels[present],
                                           col)
            if len(st.report.errors) > before:
                st.doubtful.add((level, year))
        if absent:
            yrs = ", ".join(str(y) for y, _ in absent)
            names = ", ".join(c for _, c in absent)
            st.report.error(file, f"column{'s' if len(absent) > 1 else ''} {names}",
                            f"no {level} student counts for year{'s' if len(absent) > 1 else ''}"
                            f" {yrs}: the [units] counts template {template!r} names column"
                            f"{'s' if len(absent) > 1 else ''} {names}, which the data lack",
                            "add the column(s), correct the counts template, or remove the "
                            f"year from [project] years (columns: {columns_text(table.columns)})",
                            [c for _, c in absent])
        st.counts[level] = arr
    read_group_counts(st, values, labels, present, file)


def _join_csv(st: Reading, table: pd.DataFrame, src: Source, file: Path):
    """Rows of the counts CSV in unit order: (frame, labels, which units have a row)."""
    id_col = find_column(table.columns, src.columns["id"])
    units = st.unit_ids if st.unit_ids is not None else None
    if id_col is None:
        st.report.error(file, "[counts] id", f"column {src.columns['id']!r} not found "
                        f"(columns: {columns_text(table.columns)})",
                        "set [counts] id to the column holding the unit ids")
        empty = np.zeros(0, dtype=object)
        return table.iloc[:0], empty, np.zeros(0, bool)
    ids, missing = text_values(table[id_col])
    check_ids(st.report, file, ids, missing, "row", id_col, row_word="row",
              raw=table[id_col])
    if units is None:  # no units to join to: check the CSV on its own
        keep = ~missing
        return table[keep].reset_index(drop=True), ids[keep], np.ones(keep.sum(), bool)
    first = ~pd.Series(ids).duplicated().to_numpy() & ~missing
    index = pd.Index(ids[first])
    pos = index.get_indexer(units)
    present = pos >= 0
    extra = ~index.isin(units)
    if extra.any():
        st.report.warning(file, where_units(list(index[extra])),
                          "rows for units that are not in the units layer are ignored",
                          "correct the unit ids, or add the units", list(index[extra]))
    if (~present).any():
        lacking = st.labels[~present]
        st.report.error(file, where_units(lacking), "the counts CSV has no row for the unit",
                        f"add a row per unit (id in column {id_col}), with 0 where there "
                        "are no students", lacking)
    rows = table[first].reset_index(drop=True)
    joined = rows.iloc[np.where(present, pos, 0)].reset_index(drop=True)
    return joined, st.labels, present

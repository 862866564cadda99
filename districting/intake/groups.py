"""Group counts per unit ([groups] columns), read beside the student counts.

Each template is formatted per level and year like the counts template. With {year} the
group's students are read for every year of the counts; without it the one column is the
plan year's, and the other years stay NaN (no band there). A group count must be a number,
0 or more, and at most the unit's students of that level and year.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .cells import columns_text, find_column
from .checks import check_counts
from .reading import Reading
from .report import where_units

__all__ = ["read_group_counts"]


def read_group_counts(st: Reading, table: pd.DataFrame, labels: np.ndarray,
                      present: np.ndarray, file: Path) -> None:
    """Fill ``st.groups[level]`` (groups, years, units) from the table the counts came from."""
    s = st.settings
    templates = s.groups.columns
    if not templates:
        return
    years = s.all_years
    for level in s.levels:
        counts = st.counts.get(level)
        arr = np.full((len(templates), len(years), len(labels)), np.nan)
        for g, template in enumerate(templates):
            try:
                names = {y: template.format(level=level, year=y) for y in years}
            except (KeyError, IndexError, ValueError):
                return  # the template itself is reported with the project file
            rows = range(len(years)) if "{year}" in template else [s.all_years.index(
                s.plan_year)]
            for t in rows:
                name = names[years[t]]
                col = find_column(table.columns, name)
                if col is None:
                    st.report.error(file, f"column {name}", f"no {level} counts of group "
                                    f"{template!r}: the [groups] columns template names "
                                    f"column {name}, which the data lack",
                                    "add the column, or correct the template in [groups] "
                                    f"columns (columns: {columns_text(table.columns)})")
                    break
                cells = table[col].to_numpy(dtype=object)
                values = np.zeros(len(labels))
                values[present] = check_counts(st.report, file, cells[present],
                                               labels[present], col)
                arr[g, t] = values
                if counts is not None:
                    _at_most_total(st, file, col, labels, values, counts[t], level, years[t])
        st.groups[level] = arr


def _at_most_total(st: Reading, file: Path, col: str, labels: np.ndarray,
                   group: np.ndarray, total: np.ndarray, level: str, year: int) -> None:
    above = group > total + 1e-9
    if above.any():
        i = np.flatnonzero(above)
        st.report.error(file, f"column {col}, {where_units(labels[i])}",
                        f"the group count is above the unit's {level} students in {year} "
                        f"({group[i[0]]:g} of {total[i[0]]:g} in {labels[i[0]]})",
                        f"a group is part of the students: correct {col} (at most the "
                        f"unit's {level} count of {year})", labels[i])

"""A project: one TOML file -> validated inputs.

The TOML file names where each layer comes from and which column plays which role
(see DEVELOPERS.md, "Project file"). :func:`load_project` reads it, validates everything
before any solve, and returns :class:`Inputs`; every problem found is reported at once in a
:class:`Report` (errors stop the run, warnings do not). Every command that loads a project
goes through :func:`load_project` or :func:`validate_project`.

The steps: :mod:`.settings` (TOML -> :class:`Settings`, checked against :mod:`.schema`),
then one function per source over a :class:`~.reading.Reading` (:mod:`.units`,
:mod:`.counts`, :mod:`.sites`, :mod:`.zones`, :mod:`.network`, :mod:`.limits`,
:mod:`.streets`), each
running the checks of :mod:`.checks`. Reads only: nothing is written.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd

from .counts import read_counts
from .limits import check_capacity, check_locks, read_travel
from .network import build_adjacency, read_lines, read_links
from .reading import Reading
from .records import LEVELS, Inputs, Lock, Settings, SolveSettings, Source
from .report import ProjectError, Report
from .settings import read_settings
from .sites import read_sites
from .streets import read_streets
from .summary import check_summary
from .tomlfile import PROJECT_FILE, project_file
from .units import read_units
from .zones import read_zones

__all__ = [
    "Settings", "SolveSettings", "Lock", "Source", "Inputs", "Report", "ProjectError",
    "LEVELS", "load_project", "validate_project", "read_settings", "read_inputs",
    "check_summary", "project_file", "PROJECT_FILE",
]

#: The steps of a reading, in order; each goes as far as the data allow.
_STEPS = (read_units, read_counts, read_sites, read_zones, read_lines, read_links,
          build_adjacency, check_locks, read_travel, read_streets, check_capacity)


def read_inputs(settings: Settings, report: Report, *, cache: bool = True) -> Inputs | None:
    """Read every source the settings name, check it, and assemble :class:`Inputs`.

    Returns None when any error was reported (the report says what and where). ``cache``
    False: travel is not kept in the project's disk cache (nothing is written).
    """
    st = Reading(settings, report, cache=cache)
    for step in _STEPS:
        step(st)
    if report.has_errors:
        return None
    empty = gpd.GeoSeries([], crs=st.crs)
    return Inputs(
        settings=settings, units=st.units, counts=st.counts, sites=st.sites,
        current=st.current,
        barriers=st.barriers if len(st.barriers) else empty,
        bridges=st.bridges if len(st.bridges) else empty,
        adjacency=st.adjacency, report=report, travel=st.travel, streets=st.streets,
        street_lines=st.street_lines,
        street_travel=st.street_travel, groups=st.groups,
    )


def validate_project(path: str | Path, *, cache: bool = True) -> tuple[Inputs | None, Report]:
    """Read and check a project: (Inputs, report), Inputs None when there are errors.

    Every problem found is in the report at once. A folder stands for its
    ``project.toml``. Writes nothing but, with ``cache``, the travel along streets to the
    project's disk cache (``.districting-cache/``).
    """
    path = project_file(path)
    report = Report(path)
    settings = read_settings(path, report)
    if settings is None:
        return None, report
    return read_inputs(settings, report, cache=cache), report


def load_project(path: str | Path) -> Inputs:
    """Read, validate and return a project's inputs; raise ProjectError listing every error."""
    inputs, report = validate_project(path)
    if inputs is None:
        raise ProjectError(report)
    return inputs

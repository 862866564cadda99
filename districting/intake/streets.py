"""The street layer: lines -> a :class:`~districting.travel.StreetNetwork`, travel along it,
and the checks on how units and sites reach it.

Travel along streets is computed here once per load (through the project's disk cache,
:mod:`districting.travel.cache`), because its checks need it: units on a piece of street
joined to no school, units and sites far from any street, sites off the main network.
"""

from __future__ import annotations

import numpy as np
import shapely

from .. import rules
from ..travel import StreetNetwork, StreetTravel, street_travel
from ..travel.cache import cache_key, cached_arrays
from .reading import Reading, in_degrees, source_layer, to_project_crs
from .report import ids_text, plural, where_units

__all__ = ["read_streets", "street_travel_cached"]

_JOIN_FIX = ("join the pieces in the streets layer: streets meet only at a shared vertex, "
             "so draw the street across the river or rail line (a bridge or level crossing) "
             "with a vertex where it meets the streets on each side")


def street_travel_cached(folder, lines: np.ndarray, net: StreetNetwork,
                         unit_xy: np.ndarray, site_xy: np.ndarray) -> StreetTravel:
    """Street travel from ``folder``'s disk cache, computed and stored on a miss (None:
    computed, nothing stored)."""
    key = cache_key("streets", lines, unit_xy=unit_xy, site_xy=site_xy)
    arrays = cached_arrays(folder, key,
                           lambda: street_travel(net, unit_xy, site_xy).arrays())
    return StreetTravel(**arrays)


def _lines(st: Reading):
    """The street lines in the project's CRS, or None after an error naming the fix."""
    file = st.settings.sources["streets"].path
    frame = source_layer(st, "streets")
    if frame is None or in_degrees(st, frame, "streets", file):
        return None
    if frame.crs is None:
        to_project_crs(st, frame, "streets", file)  # reports the missing CRS
        return None
    geoms = to_project_crs(st, frame, "streets", file).geometry.to_numpy()
    present = ~(shapely.is_missing(geoms) | shapely.is_empty(geoms))
    if not present.any():
        st.report.error(file, "[streets]", "the streets layer has no lines, so travel along "
                        "streets cannot be measured", "point [streets] at the layer of street "
                        'centrelines, or remove [streets] and set [solve] travel = '
                        '"barrier-aware"')
        return None
    lines = np.isin(shapely.get_type_id(geoms), [1, 5]) | ~present
    if not lines.all():
        st.report.error(file, f"features {ids_text(list(np.flatnonzero(~lines) + 1))}",
                        "streets must be lines (centrelines); points and polygons cannot be "
                        "travelled along", "keep only the street centrelines in the layer "
                        "(points such as bridges go in [bridges])")
        return None
    return geoms[present]


def read_streets(st: Reading) -> None:
    if "streets" not in st.settings.sources:
        return
    lines = _lines(st)
    if lines is None:
        return
    st.streets = StreetNetwork.from_lines(lines)
    st.street_lines = lines
    if not st.units_ok or st.units is None or st.sites is None:
        return
    unit_xy = shapely.get_coordinates(st.units["point"].to_numpy())
    site_xy = shapely.get_coordinates(st.sites.geometry.to_numpy())
    folder = st.settings.path.parent if st.cache else None
    st.street_travel = street_travel_cached(folder, lines, st.streets, unit_xy, site_xy)
    _check_reach(st, st.street_travel)


def _check_reach(st: Reading, tr: StreetTravel) -> None:
    """Name units and sites far from the streets or on pieces apart from the main network."""
    s, file = st.settings, st.settings.sources["streets"].path
    site_ids = st.sites["site_id"].astype(str).to_numpy()
    limit = s.max_access
    far = tr.unit_access > limit
    if far.any():
        st.report.warning(file, where_units(st.labels[far]), f"{plural(int(far.sum()), 'unit')}"
                          f" lie more than {limit:g} m from the nearest street (up to "
                          f"{tr.unit_access.max():,.0f} m); their travel starts with that "
                          "straight walk", "add the streets that reach them, or raise [streets]"
                          " max_access if the walk is real", st.labels[far])
    far_sites = tr.site_access > limit
    if far_sites.any():
        st.report.warning(file, f"sites {ids_text(site_ids[far_sites])}", "the school lies "
                          f"more than {limit:g} m from the nearest street (up to "
                          f"{tr.site_access.max():,.0f} m)", "add the street to the school's "
                          "entrance, or correct the site's position", site_ids[far_sites])
    main = tr.main_piece()
    apart_units, apart_sites = tr.unit_piece != main, tr.site_piece != main
    if apart_units.any() or apart_sites.any():
        pieces = len(set(tr.unit_piece[apart_units]) | set(tr.site_piece[apart_sites]))
        held = [f"{where_units(st.labels[apart_units])}" if apart_units.any() else "",
                f"sites {ids_text(site_ids[apart_sites])}" if apart_sites.any() else ""]
        st.report.warning(file, " and ".join(h for h in held if h),
                          f"{plural(pieces, 'piece')} of street not joined to the main "
                          "network hold these units or sites; travel between pieces is "
                          "impossible along streets", _JOIN_FIX,
                          [*st.labels[apart_units], *site_ids[apart_sites]])
    if s.solve.travel != "streets" or s.solve.travel_matrix is not None:
        return
    for level in s.levels:
        cols = np.flatnonzero(((st.sites["level"] == level)
                               & rules.takes_students(st.sites["status"])).to_numpy())
        if not len(cols):
            continue
        stranded = ~np.isfinite(tr.metres[:, cols]).any(axis=1)
        if stranded.any():
            st.report.error(file, where_units(st.labels[stranded]), "no street path joins "
                            f"the unit to any {level} school, so it cannot be assigned "
                            "with travel along streets", _JOIN_FIX + ', or set [solve] '
                            'travel = "barrier-aware"', st.labels[stranded])

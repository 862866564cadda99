"""The travel measures by name: what each is called, in words, and the one dispatcher.

``streets``: along the street network (:mod:`.streets`); ``barrier-aware``: around the
barrier lines, crossing them only at bridges or crossings
(:func:`districting.travel.barriers.barrier_distances`); ``straight-line``: as the crow
flies. Every place that names a measure to people (the CLI summary, exports, the packet,
the workbench) takes its words from here.
"""

from __future__ import annotations

import numpy as np

from .network import StreetNetwork
from .streets import street_travel

__all__ = ["MEASURES", "WORDS", "TABLE_WORDS", "default_measure", "measure_words",
           "measure_line", "distance_note", "straight_line", "travel_matrix", "check_measure"]

MEASURES = ("streets", "barrier-aware", "straight-line")
WORDS = {
    "streets": "along streets",
    "barrier-aware": "around barriers, crossing only at bridges",
    "straight-line": "in a straight line",
}
#: A travel table given in the project replaces every measure.
TABLE_WORDS = "from the project's travel table"


def check_measure(measure: str) -> str:
    """``measure`` when it is one of :data:`MEASURES`; ValueError naming them otherwise."""
    if measure not in MEASURES:
        raise ValueError(f"travel {measure!r} is not a travel measure; write one of "
                         + ", ".join(MEASURES))
    return measure


def default_measure(has_streets: bool) -> str:
    """The measure of a project that names none: streets when it has them.

    Without streets, barrier-aware: straight lines pull units across a river toward a
    school their zone cannot reach.
    """
    return "streets" if has_streets else "barrier-aware"


def measure_words(measure: str, table: bool = False) -> str:
    """The measure in plain words ("along streets"), or the travel table's words."""
    return TABLE_WORDS if table else WORDS[check_measure(measure)]


def measure_line(measure: str, table: bool = False) -> str:
    """One line for a summary or an export: "Travel: along streets"."""
    return f"Travel: {measure_words(measure, table)}"


def distance_note(measure: str, table: bool = False) -> str:
    """The packet's sentence on distances: "distances are km along streets, from ..."."""
    return f"distances are km {measure_words(measure, table)}, from a planning unit to its school"


def straight_line(unit_xy: np.ndarray, site_xy: np.ndarray) -> np.ndarray:
    """(n, m) straight-line metres."""
    u, s = np.asarray(unit_xy, float), np.asarray(site_xy, float)
    return np.hypot(u[:, None, 0] - s[None, :, 0], u[:, None, 1] - s[None, :, 1])


def travel_matrix(measure: str, unit_xy: np.ndarray, site_xy: np.ndarray, *,
                  streets: StreetNetwork | None = None, barriers=None, crossings=None,
                  unit_polygons=None) -> np.ndarray:
    """(n, m) travel in metres by ``measure``; ``inf`` where no path joins the pair.

    ``streets``: the network (required for "streets"); ``barriers``, ``crossings`` and
    ``unit_polygons``: arrays of shapely geometries for "barrier-aware". Without any
    barrier line, barrier-aware travel is the straight line (nothing to go around).
    """
    check_measure(measure)
    unit_xy = np.asarray(unit_xy, float).reshape(-1, 2)
    site_xy = np.asarray(site_xy, float).reshape(-1, 2)
    if measure == "streets":
        if streets is None:
            raise ValueError("travel along streets needs a street network: add a [streets] "
                             "table to the project, or choose another travel measure")
        return street_travel(streets, unit_xy, site_xy).metres
    if measure == "barrier-aware" and barriers is not None and len(barriers):
        from .barriers import barrier_distances  # built apart, merged in later

        crossings = np.asarray(crossings if crossings is not None else [], dtype=object)
        return barrier_distances(unit_xy, site_xy, np.asarray(barriers, dtype=object),
                                 crossings, unit_polygons)
    return straight_line(unit_xy, site_xy)

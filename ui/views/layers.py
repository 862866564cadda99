"""Map layers every workbench map draws alike: barriers by kind and school sites.

The zone map (:mod:`ui.views.map`), the compare maps (:mod:`ui.views.compare`) and the
printable map (:mod:`ui.views.printmap`) call these, so a river or a new school looks the
same on each.
"""

from __future__ import annotations

import shapely
from bokeh.models import ColumnDataSource

from ..mapdata import BARRIER_KINDS, MapData

__all__ = ["NO_ZONE_COLOR", "BARRIER_STYLE", "SITE_MARKERS", "draw_barriers", "site_columns",
           "draw_sites", "zone_fill"]

NO_ZONE_COLOR = "#d9d9d9"
BARRIER_STYLE = {  # kind of ui.mapdata.BARRIER_KINDS -> (colour, width, dash)
    "river": ("#2f6db5", 4, "solid"),
    "highway": ("#6b3e1e", 3, "solid"),
    "rail": ("#303030", 3, "dotdash"),  # apart from the dashed line of today's boundaries
}
OTHER_BARRIER = ("#555555", 2, "solid")
SITE_MARKERS = {"open": "circle", "new": "star", "closing": "x", "candidate": "square",
                "closed": "x"}


def draw_barriers(fig, mapdata: MapData, *, legend: bool = True) -> None:
    """The barrier lines, one styled layer per kind (in the legend when ``legend``)."""
    for kind in (*BARRIER_KINDS, None):
        if kind not in mapdata.barriers:
            continue
        xs, ys = mapdata.barriers[kind]
        color, width, dash = BARRIER_STYLE.get(kind, OTHER_BARRIER)
        extra = {"legend_label": kind or "barrier"} if legend else {}
        fig.multi_line("xs", "ys", source=ColumnDataSource({"xs": xs, "ys": ys}),
                       line_color=color, line_width=width, line_dash=dash,
                       name=f"barrier-{kind or 'other'}", **extra)


def site_columns(store, colors: dict[str, str]) -> dict:
    """Columns of the level's school markers: place, name, status, marker and fill."""
    sites = store.inputs.sites
    sites = sites.loc[sites["level"] == store.level]
    frame = store.sites_frame(resolved_settings=store.effective)
    xy = shapely.get_coordinates(sites.geometry.to_numpy())
    status = frame["status"].tolist()
    ids = frame["site_id"].tolist()
    return {
        "x": xy[:, 0], "y": xy[:, 1], "site_id": ids, "name": frame["name"].tolist(),
        "status": status, "capacity": frame["capacity"].to_numpy(),
        "marker": [SITE_MARKERS.get(s, "circle") for s in status],
        "fill": [colors.get(s, "#ffffff") for s in ids],
        "label": [f"{n} ({s})" if s != "open" else n
                  for n, s in zip(frame["name"], status, strict=True)],
    }


def draw_sites(fig, source: ColumnDataSource, *, size: int = 14, name: str = "sites"):
    """The school markers (shape by status, fill = the school's zone colour)."""
    return fig.scatter("x", "y", source=source, marker="marker", size=size,
                       fill_color="fill", line_color="#000000", line_width=1.5, name=name)


def zone_fill(site_ids, colors: dict[str, str]) -> list[str]:
    """The fill of each unit from its school's id ('' or unknown: no zone, grey)."""
    return [colors.get(s, NO_ZONE_COLOR) for s in site_ids]

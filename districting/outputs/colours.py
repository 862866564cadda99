"""Zone colours: touching zones never share a colour, on the workbench map and in print.

:func:`color_zones` colours the zone adjacency graph with DSATUR (D. Brelaz, "New methods
to color the vertices of a graph", Communications of the ACM 22(4), 1979, 251-256; as
``networkx.greedy_color(strategy="DSATUR")``) so touching zones never share a colour;
:data:`ZONE_PALETTE` is our own qualitative palette whose grey values are spread apart.

:func:`school_colours` gives each school of a level one display colour for every map and
export: DSATUR on a school graph where two schools are neighbours when today's zones touch
or their sites are Delaunay neighbours (so new and candidate schools, which have no zone
today, get neighbours too), with colours given before (``saved``) kept as they are. The
options store keeps the choice (:mod:`districting.outputs.store.colours`), so a school's
colour never changes after a rerun.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence

import geopandas as gpd
import networkx as nx
import numpy as np
import shapely

from ..intake.adjacency import default_tolerance
from .zones import _ids

__all__ = ["ZONE_PALETTE", "grey_value", "zone_color", "zone_edges",
           "color_zones", "school_graph", "school_colours"]

#: Qualitative zone colours of our own choosing. Lightness (Rec. 601 luma) steps by about
#: 20 of 255 from 52 to 232, ordered so consecutive colours differ strongly in both hue and
#: lightness; zones stay apart when printed in grey. Colour 0 (the most used by DSATUR)
#: is the lightest.
ZONE_PALETTE: tuple[str, ...] = (
    "#F5E9C4",  # pale sand       luma 232
    "#296C8E",  # deep sea blue   luma 92
    "#E8977C",  # salmon          luma 172
    "#452556",  # aubergine       luma 52
    "#ABD397",  # fern            luma 192
    "#C95E93",  # orchid          luma 132
    "#B3E2E2",  # frost           luma 212
    "#68411A",  # walnut          luma 72
    "#7B9AD9",  # cornflower      luma 152
    "#379256",  # moss            luma 112
)


def grey_value(color: str) -> float:
    """Rec. 601 luma (0..255) of a ``#RRGGBB`` colour: its grey level in print."""
    r, g, b = (int(color.lstrip("#")[k:k + 2], 16) for k in (0, 2, 4))
    return 0.299 * r + 0.587 * g + 0.114 * b


def zone_color(index: int) -> str:
    """Palette colour of a colour index (cycles past the palette's end)."""
    return ZONE_PALETTE[int(index) % len(ZONE_PALETTE)]


def zone_edges(adjacency, assignment_ids) -> set[tuple[str, str]]:
    """Pairs of zones (site ids, sorted) that contain adjacent units: the zone graph.

    Exact and cheap when the unit :class:`~districting.intake.adjacency.Adjacency` is at hand;
    note that barrier-cut pairs do not count, so for map colouring prefer the geometry
    (:func:`color_zones` with a zones GeoDataFrame) or add ``adjacency.cut_edges``.
    """
    zone_of = _ids(assignment_ids, adjacency.n, "assignment")
    e = np.vstack([adjacency.edges, adjacency.cut_edges])
    za, zb = zone_of[e[:, 0]], zone_of[e[:, 1]]
    keep = (za != zb) & (za != "") & (zb != "")
    lo, hi = np.minimum(za[keep], zb[keep]), np.maximum(za[keep], zb[keep])
    return set(zip(lo.tolist(), hi.tolist(), strict=True))


def _touching_zones(zones: gpd.GeoDataFrame, tol: float) -> set[tuple[str, str]]:
    ids = zones["site_id"].astype(str).to_numpy()
    geoms = zones.geometry.to_numpy()
    a, b = shapely.STRtree(geoms).query(geoms, predicate="dwithin", distance=tol)
    keep = a < b
    return {tuple(sorted(p)) for p in zip(ids[a[keep]], ids[b[keep]], strict=True)}


def color_zones(
    zones: gpd.GeoDataFrame | Iterable[tuple[str, str]],
    *,
    nodes: Iterable[str] | None = None,
    tolerance: float | None = None,
) -> dict[str, int]:
    """Colour index per site id such that no two touching zones share one (DSATUR).

    ``zones``: a zones GeoDataFrame (``site_id``, geometry; zones within ``tolerance`` of
    each other, corners included, count as touching) or an iterable of (site_a, site_b)
    pairs with ``nodes`` naming zones that touch nothing. Map an index to a colour with
    :func:`zone_color`; planar zone maps need at most 4 colours in theory and DSATUR rarely
    needs more than 5, within the palette's 10.
    """
    g = nx.Graph()
    if isinstance(zones, gpd.GeoDataFrame | gpd.GeoSeries):
        frame = zones if isinstance(zones, gpd.GeoDataFrame) else gpd.GeoDataFrame(
            {"site_id": zones.index.astype(str)}, geometry=zones.to_numpy())
        geoms = frame.geometry.to_numpy()
        tol = default_tolerance(geoms) if tolerance is None else float(tolerance)
        g.add_nodes_from(frame["site_id"].astype(str))
        g.add_edges_from(_touching_zones(frame, tol))
    else:
        g.add_edges_from((str(a), str(b)) for a, b in zones if str(a) != str(b))
    if nodes is not None:
        g.add_nodes_from(str(u) for u in nodes)
    ordered = nx.Graph()
    ordered.add_nodes_from(sorted(g.nodes))  # deterministic colours for the same map
    ordered.add_edges_from(g.edges)
    return dict(nx.greedy_color(ordered, strategy="DSATUR"))


# ---------------------------------------------------------------------------- per school
def _delaunay_pairs(ids: Sequence[str], points: np.ndarray) -> set[tuple[str, str]]:
    """Pairs of sites joined by an edge of the Delaunay triangulation of their points;
    sites at one point are joined to each other and share that point's edges."""
    at: dict[tuple[float, float], list[str]] = {}
    for sid, (x, y) in zip(ids, points, strict=True):
        at.setdefault((round(float(x), 3), round(float(y), 3)), []).append(sid)
    pairs = {tuple(sorted((a, b))) for group in at.values() for a in group for b in group
             if a != b}
    if len(at) < 2:
        return pairs
    edges = shapely.get_parts(shapely.delaunay_triangles(
        shapely.multipoints(np.array(list(at))), only_edges=True))
    ends = np.round(shapely.get_coordinates(edges), 3).reshape(-1, 2, 2)
    for (ax, ay), (bx, by) in ends:
        for a in at.get((ax, ay), ()):
            for b in at.get((bx, by), ()):
                pairs.add(tuple(sorted((a, b))))
    return pairs


def school_graph(inputs, level: str) -> nx.Graph:
    """The schools of ``level`` (site ids), neighbours when today's zones touch (units
    adjacent, barrier-cut pairs included) or their sites are Delaunay neighbours."""
    sites = inputs.sites
    rows = np.flatnonzero(sites["level"].astype(str).to_numpy() == level)
    ids = sites["site_id"].astype(str).to_numpy()[rows].tolist()
    graph = nx.Graph()
    graph.add_nodes_from(sorted(ids))
    current = np.asarray(inputs.current.get(level, np.full(len(inputs.units), -1)))
    all_ids = np.array([*sites["site_id"].astype(str), ""], dtype=object)
    today = all_ids[np.where(current >= 0, current, len(all_ids) - 1)]
    graph.add_edges_from(zone_edges(inputs.adjacency, today))
    xy = shapely.get_coordinates(sites.geometry.to_numpy()[rows])
    graph.add_edges_from(_delaunay_pairs(ids, xy))
    return graph


def _choose(graph: nx.Graph, node: str, colour: dict[str, str], uses: dict[str, int]) -> str:
    """A palette colour for ``node``: none of its neighbours' if possible, then the fewest
    schools two steps away, then the least used, then palette order."""
    near = {colour[v] for v in graph[node] if v in colour}
    two = [colour[w] for v in graph[node] for w in graph[v] if w != node and w in colour]
    free = [c for c in ZONE_PALETTE if c not in near] or list(ZONE_PALETTE)
    return min(free, key=lambda c: (two.count(c), uses.get(c, 0), ZONE_PALETTE.index(c)))


def school_colours(inputs, level: str, saved: Mapping[str, str] | None = None
                   ) -> dict[str, str]:
    """One ``#RRGGBB`` colour per school (site id) of ``level``.

    DSATUR (Brelaz 1979) on :func:`school_graph`: the school whose neighbours already show
    the most distinct colours is coloured next (ties: more neighbours, then site id), with
    the colour :func:`_choose` prefers, so touching zones differ and the palette's hues are
    spread over the level. Schools in ``saved`` keep their colour; only the others are
    chosen, each unlike its neighbours. Deterministic: the same inputs give the same colours.
    """
    graph = school_graph(inputs, level)
    colour = {s: str(c).upper() for s, c in (saved or {}).items() if s in graph}
    uses: dict[str, int] = {}
    for c in colour.values():
        uses[c] = uses.get(c, 0) + 1
    left = sorted(set(graph.nodes) - set(colour))
    while left:
        def urgency(v: str) -> tuple:
            seen = {colour[w] for w in graph[v] if w in colour}
            return (-len(seen), -graph.degree(v), v)

        node = min(left, key=urgency)
        colour[node] = _choose(graph, node, colour, uses)
        uses[colour[node]] = uses.get(colour[node], 0) + 1
        left.remove(node)
    return {s: colour[s] for s in sorted(colour)}

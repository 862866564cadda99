"""The demo town's streets: an invented network drawn after the units, sites and zones.

The streets use a random stream of their own (``default_rng([seed, STREET_STREAM])``), so
adding them changed nothing else in the town. How they are drawn (whole-array shapely 2):

1. A grid in the old centre (130 m blocks, slightly turned) inside a disc around the middle.
2. Curving roads outward: radial roads with a gentle sine bend, an inner ring (a collector)
   and an outer ring road (an arterial bypass with no footway: ``walkable`` false).
3. Local streets filling the rest: a 240 m grid whose lines wave (sine offsets), so the
   outer neighbourhoods get long gently curving streets rather than straight blocks.
4. Every line is cut a few metres short of the river, the highway and the rail line
   (dead ends); at each crossing of the ``bridges`` layer a short street passes over the
   line and is joined, on each side, to the nearest street of that side.
5. All lines are noded (a union at the 1 cm precision): a junction is a vertex shared by
   the streets that meet there (each street is then merged back into as few LineStrings
   as it has stretches). Pieces not joined to the main network get a short link inside their part of
   the town, or are dropped; a unit farther than ``SPUR_FROM`` from any walkable street, or
   whose nearest street lies across a barrier, gets a cul-de-sac to its point.

The result is one connected network (the walkable streets alone too), crossing a barrier
only at a bridge. :func:`street_reach` measures the distance from points to the streets.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from .constants import CENTRE, GRID
from .geometry import split_pieces

STREET_STREAM = 16  # second key of the streets' random stream
CUT = 3.0  # metres: streets stop this far short of a barrier line
BRIDGE_HALF = 30.0  # metres of street on each side of a crossing
SPUR_FROM = 250.0  # metres: a unit point farther than this from a walkable street gets one
OVERSHOOT = 0.5  # metres a link is carried past the street it joins (then trimmed)
LINK_MAX = 400.0  # metres: a loose piece farther than this from the network is dropped
KINDS = ("arterial", "collector", "local")  # rank: a piece on two lines takes the first

_FIRST = ("Ash", "Bram", "Cor", "Dun", "Fen", "Gill", "Hal", "Kest", "Lin", "Mar", "Nor",
          "Pell", "Quen", "Rad", "Sel", "Thorn", "Wen", "Yar", "Brack", "Cald", "Elm", "Tor")
_LAST = ("by", "cote", "dale", "field", "ford", "gate", "holm", "ley", "mere", "stead",
         "ton", "wick", "worth", "brook", "croft")


def _words(rng: np.random.Generator) -> list[str]:
    """Invented street words (syllable pairs) in a random order, taken from the end with
    ``pop``; after all the pairs come the same with "Upper", then "Lower" before them."""
    pairs = [_FIRST[k // len(_LAST)] + _LAST[k % len(_LAST)]
             for k in rng.permutation(len(_FIRST) * len(_LAST))]
    return [f"Lower {w}" for w in pairs] + [f"Upper {w}" for w in pairs] + pairs


def _ordinal(k: int) -> str:
    suffix = "th" if 10 <= k % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(k % 10, "th")
    return f"{k}{suffix}"


def _turn(u: np.ndarray, v: np.ndarray, angle: float) -> np.ndarray:
    """Points (u, v) in a frame turned by ``angle`` about the centre, as (.., 2) x/y."""
    c, s = np.cos(angle), np.sin(angle)
    return np.stack([CENTRE[0] + c * u - s * v, CENTRE[1] + s * u + c * v], axis=-1)


def _grid(rng, half: float, spacing: float, step: float, wave: float):
    """Both families of a (waving) grid over a square of side ``2 * half``: LineStrings."""
    angle = rng.uniform(-0.3, 0.3)
    k = np.arange(-np.floor(half / spacing), np.floor(half / spacing) + 1) * spacing
    t = np.arange(-half, half + step, step)
    lines = []
    for family in (0, 1):
        phase = rng.uniform(0, 2 * np.pi, (len(k), 2))
        offset = wave * (np.sin(2 * np.pi * t[None] / 1700.0 + phase[:, :1])
                         + 0.5 * np.sin(2 * np.pi * t[None] / 650.0 + phase[:, 1:]))
        across, along = k[:, None] + offset, np.broadcast_to(t, offset.shape)
        xy = _turn(across, along, angle) if family == 0 else _turn(along, across, angle)
        lines.append(shapely.linestrings(xy))
    return lines


def _rings_and_radials(rng, radius: float):
    t = np.linspace(0.0, 2 * np.pi, 361)
    rings = []
    for share in (0.45, 0.78):
        r = share * radius * (1 + 0.05 * np.sin(3 * t + rng.uniform(0, 6.3))
                              + 0.03 * np.sin(5 * t + rng.uniform(0, 6.3)))
        rings.append(_turn(r * np.cos(t), r * np.sin(t), 0.0))
    n_rad = 8
    start = rng.uniform(0, 2 * np.pi)
    r = np.linspace(0.18 * radius, 1.3 * radius, 120)
    radials = []
    for m in range(n_rad):
        a0 = start + 2 * np.pi * m / n_rad + rng.uniform(-0.15, 0.15)
        bend = 0.12 * np.sin(np.pi * r / radius * rng.uniform(0.6, 1.2) + rng.uniform(0, 6.3))
        a = a0 + bend
        radials.append(_turn(r * np.cos(a), r * np.sin(a), 0.0))
    return shapely.linestrings(np.array(rings)), shapely.linestrings(np.array(radials))


def _raw_streets(rng, outline, radius: float, words: list[str]) -> gpd.GeoDataFrame:
    """Every drawn line, clipped to the town, with name, kind and walkable."""
    core_r = 0.3 * radius
    core = shapely.Point(CENTRE).buffer(core_r, quad_segs=32)
    rows: list[tuple] = []  # (geometry, name, kind, walkable)
    rings, radials = _rings_and_radials(rng, radius)
    for g in radials:
        rows.append((g, f"{words.pop()} Road", "arterial", True))
    rows.append((rings[0], "Brindle Ring", "collector", True))
    rows.append((rings[1], "Outer Moor Way", "arterial", False))
    a, b = _grid(rng, 1.45 * core_r, 130.0, 130.0, 0.0)  # turned: reaches the disc's edge
    for m, g in enumerate(a):
        rows.append((shapely.intersection(g, core), f"{_ordinal(m + 1)} Street",
                     "collector" if m % 4 == 2 else "local", True))
    for g in b:
        rows.append((shapely.intersection(g, core), f"{words.pop()} Avenue", "local", True))
    outer = outline.difference(core)
    a, b = _grid(rng, 1.25 * radius, 240.0, 60.0, 45.0)
    for kind_word, family in (("Lane", a), ("Drive", b)):
        for g in family:
            rows.append((shapely.intersection(g, outer), f"{words.pop()} {kind_word}",
                         "local", True))
    frame = gpd.GeoDataFrame(rows, columns=["geometry", "name", "kind", "walkable"],
                             geometry="geometry")
    frame["geometry"] = shapely.intersection(frame.geometry.to_numpy(), outline)
    return frame


def _explode_lines(frame: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    parts, idx = shapely.get_parts(frame.geometry.to_numpy(), return_index=True)
    keep = (shapely.get_type_id(parts) == 1) & (shapely.length(parts) > 1.0)
    out = frame.iloc[idx[keep]].reset_index(drop=True)
    out["geometry"] = parts[keep]
    return gpd.GeoDataFrame(out, geometry="geometry")


def _overshoot(line, metres: float = OVERSHOOT):
    """``line`` (two points) carried on past its end, so that noding meets the street it
    reaches (the end of a shortest line lies on that street only up to rounding)."""
    a, b = shapely.get_coordinates(line)[[0, -1]]
    step = b - a
    size = np.hypot(*step)
    return shapely.LineString([a, b + step / size * metres]) if size > 0 else None


def _link(frm, network, face, barrier_union):
    """Shortest line from ``frm`` to the streets of ``network`` in ``face``, or None when
    there is none there or it would cross a barrier."""
    there = shapely.intersection(network, face)
    if there.is_empty:
        return None
    line = shapely.shortest_line(frm, there)
    if line is None or line.is_empty:
        return None
    line = _overshoot(line)
    if line is None or shapely.intersects(line, barrier_union):
        return None
    return line


def _bridge_streets(bridges: gpd.GeoDataFrame, barriers: gpd.GeoDataFrame, streets,
                    faces, barrier_union) -> list[tuple]:
    """A street over each crossing: BRIDGE_HALF metres each side across its line, joined
    on each side to the nearest street of that side."""
    lines = barriers.set_index("name").geometry
    line = lines.loc[bridges["barrier"]].to_numpy()
    pts = bridges.geometry.to_numpy()
    at = shapely.line_locate_point(line, pts)
    ahead = shapely.get_coordinates(shapely.line_interpolate_point(line, at + 2.0))
    back = shapely.get_coordinates(shapely.line_interpolate_point(line, at - 2.0))
    tangent = ahead - back
    normal = np.column_stack([-tangent[:, 1], tangent[:, 0]])
    normal /= np.hypot(*normal.T)[:, None]
    xy = shapely.get_coordinates(pts)
    ends = np.stack([xy - BRIDGE_HALF * normal, xy + BRIDGE_HALF * normal], axis=1)
    crossing = shapely.linestrings(np.stack([ends[:, 0], xy, ends[:, 1]], axis=1))
    network = shapely.union_all(streets)
    rows = []
    for k, name in enumerate(bridges["name"]):
        rows.append((crossing[k], name, "collector", True))
        for end in ends[k]:
            p = shapely.Point(end)
            face = faces[np.argmax(shapely.contains(faces, p))]
            link = _link(p, network, face, barrier_union)
            if link is None:
                raise ValueError(f"the crossing {name} cannot be joined to a street")
            rows.append((link, name, "collector", True))
    return rows


def _noded(frame: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """Split every line where it meets another; each piece keeps the attributes of the
    highest-ranked line it lies on (``KINDS`` order)."""
    rank = frame["kind"].map({k: r for r, k in enumerate(KINDS)}).to_numpy()
    frame = frame.iloc[np.argsort(rank, kind="stable")].reset_index(drop=True)
    # a union of lines at a fixed precision nodes them (snap-rounded to the 1 cm grid)
    pieces = shapely.get_parts(shapely.union_all(frame.geometry.to_numpy(), grid_size=GRID))
    pieces = pieces[~shapely.is_empty(pieces) & (shapely.length(pieces) > 0)]
    mid = shapely.line_interpolate_point(pieces, 0.5, normalized=True)
    ip, isrc = shapely.STRtree(frame.geometry.to_numpy()).query(
        mid, predicate="dwithin", distance=0.05)
    first = np.full(len(pieces), len(frame))
    np.minimum.at(first, ip, isrc)
    keep = first < len(frame)
    out = frame.iloc[first[keep]].reset_index(drop=True)
    out["geometry"] = pieces[keep]
    return _trim_stubs(gpd.GeoDataFrame(out, geometry="geometry"))


def _trim_stubs(frame: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """Drop the dead-end pieces no longer than an overshoot (what links leave past a
    street)."""
    _, e = street_graph(frame.geometry.to_numpy())
    degree = np.bincount(e.ravel())
    stub = (degree[e].min(axis=1) == 1) & (shapely.length(frame.geometry.to_numpy())
                                           <= 2 * OVERSHOOT)
    return frame[~stub].reset_index(drop=True)


def street_graph(geoms: np.ndarray):
    """(vertex coordinates, piece -> (start vertex, end vertex)) of noded street lines."""
    ends = np.stack([shapely.get_coordinates(shapely.get_point(geoms, 0)),
                     shapely.get_coordinates(shapely.get_point(geoms, -1))], axis=1)
    keys = np.round(ends.reshape(-1, 2) / GRID).astype(np.int64)
    uniq, inv = np.unique(keys, axis=0, return_inverse=True)
    return uniq * GRID, inv.reshape(-1, 2)


def _components(geoms: np.ndarray) -> np.ndarray:
    """Component label of each street piece."""
    vertices, e = street_graph(geoms)
    n = len(vertices)
    graph = coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(n, n))
    _, lab = connected_components(graph, directed=False)
    return lab[e[:, 0]]


def _join_loose_pieces(frame, faces, barrier_union, words):
    """Link every piece not joined to the main network to it inside its face, or drop it."""
    for _ in range(50):
        lab = _components(frame.geometry.to_numpy())
        main = np.bincount(lab, weights=shapely.length(frame.geometry.to_numpy())).argmax()
        if (lab == main).all():
            return frame
        network = shapely.union_all(frame.geometry.to_numpy()[lab == main])
        rows, drop = [], []
        for c in np.unique(lab[lab != main]):
            piece = shapely.union_all(frame.geometry.to_numpy()[lab == c])
            face = faces[np.argmax(shapely.intersects(faces, shapely.point_on_surface(piece)))]
            line = shapely.shortest_line(piece, shapely.intersection(network, face))
            if line is not None and not line.is_empty and line.length > 0:
                # carried past both ends: it must meet the loose piece and the network
                line = _overshoot(_overshoot(line).reverse())
            if (line is None or line.length > LINK_MAX
                    or shapely.intersects(line, barrier_union)):
                drop.append(c)
            else:
                rows.append((line, f"{words.pop()} Close", "local", True))
        frame = frame[~np.isin(lab, drop)]
        added = gpd.GeoDataFrame(rows, columns=["geometry", "name", "kind", "walkable"],
                                 geometry="geometry")
        frame = _noded(gpd.GeoDataFrame(
            pd.concat([frame, added], ignore_index=True), geometry="geometry"))
    raise ValueError("the street pieces could not be joined into one network")


def street_reach(xy: np.ndarray, streets: gpd.GeoDataFrame, walkable: bool = True):
    """Distance (m) from each point (``xy``: (n, 2)) to the nearest (walkable) street."""
    points = shapely.points(xy)
    geoms = streets.geometry.to_numpy()
    if walkable:
        geoms = geoms[streets["walkable"].to_numpy(bool)]
    tree = shapely.STRtree(geoms)
    _, dist = tree.query_nearest(points, return_distance=True, all_matches=False)
    return dist


def nearest_leg_crosses(xy: np.ndarray, streets: np.ndarray, barriers) -> np.ndarray:
    """Per point: does the straight line to its nearest street meet a barrier?"""
    points = shapely.points(xy)
    nearest = shapely.STRtree(streets).query_nearest(points, all_matches=False)[1]
    return shapely.intersects(shapely.shortest_line(points, streets[nearest]), barriers)


def street_network(seed: int, outline, barriers: gpd.GeoDataFrame, bridges: gpd.GeoDataFrame,
                   unit_points: np.ndarray, radius: float) -> gpd.GeoDataFrame:
    """The streets layer: ``name``, ``kind`` (arterial / collector / local), ``walkable``,
    ``geometry`` (LineString pieces meeting at shared vertices); see the module docstring."""
    rng = np.random.default_rng([seed, STREET_STREAM])
    words = _words(rng)
    barrier_geoms = barriers.geometry.to_numpy()
    barrier_union = shapely.union_all(barrier_geoms)
    faces = split_pieces(outline, list(barrier_geoms))
    frame = _raw_streets(rng, outline, radius, words)
    frame["geometry"] = shapely.difference(frame.geometry.to_numpy(),
                                           shapely.buffer(barrier_union, CUT))
    frame = _explode_lines(frame)
    rows = _bridge_streets(bridges, barriers, frame.geometry.to_numpy(), faces, barrier_union)
    # cul-de-sacs to the unit points far from a walkable street, or whose nearest street
    # lies across a barrier (a travel measure joins a point to its nearest street)
    walkable = frame.geometry.to_numpy()[frame["walkable"].to_numpy(bool)]
    far = street_reach(unit_points, frame) > SPUR_FROM
    across = nearest_leg_crosses(unit_points, walkable, barrier_union)
    walk = shapely.union_all(walkable)
    for k in np.flatnonzero(far | across):
        p = shapely.Point(unit_points[k])
        face = faces[np.argmax(shapely.intersects(faces, p))]
        link = _link(p, walk, face, barrier_union)
        if link is not None:
            rows.append((link, f"{words.pop()} Close", "local", True))
    added = gpd.GeoDataFrame(rows, columns=["geometry", "name", "kind", "walkable"],
                             geometry="geometry")
    frame = _noded(gpd.GeoDataFrame(pd.concat([frame, added], ignore_index=True),
                                    geometry="geometry"))
    frame = _join_loose_pieces(frame, faces, barrier_union, words)
    return _merged(frame).set_crs(barriers.crs)


def _merged(frame: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """The pieces of each street joined into as few LineStrings as it has stretches; a
    junction stays a vertex shared by the streets that meet there."""
    keys = ["name", "kind", "walkable"]
    groups = frame.groupby(keys, sort=True).geometry.agg(
        lambda g: shapely.line_merge(shapely.union_all(g.to_numpy())))
    parts, idx = shapely.get_parts(groups.to_numpy(), return_index=True)
    out = groups.index.to_frame(index=False).iloc[idx].reset_index(drop=True)
    out["walkable"] = out["walkable"].astype(bool)
    return gpd.GeoDataFrame(out, geometry=parts)

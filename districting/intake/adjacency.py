"""The planning-unit adjacency graph: who may share a zone with whom, edge by edge.

:class:`Adjacency` is an immutable undirected graph over the planning units (unit index
``0..n-1``, ids in ``.ids``). It is built once per project and read by the solver
(contiguity), the checks and the maps. Named constructors:

- :meth:`Adjacency.from_polygons` builds contiguity from the unit polygons, then applies
  barrier cuts, bridges and manual links;
- :meth:`Adjacency.from_edges` wraps a known edge list (tests, stored projects).

Method (``from_polygons``):

1. Contiguity by shared vertices with ``libpysal.graph.Graph.build_contiguity``
   (libpysal, Rey and Anselin, "PySAL: A Python Library of Spatial Analytical Methods",
   Review of Regional Studies 37(1), 2007; the ``graph`` module of libpysal 4.10+). Rook:
   two units share at least one boundary segment; queen: they share at least one vertex.
2. Gap repair (``tolerance > 0``): units whose polygons come within ``tolerance`` of each
   other but share no vertex (digitising gaps, T-junctions where one unit's vertex falls
   in the middle of a neighbour's edge) are added when, for rook, the stretch of each
   unit's boundary lying within ``tolerance`` of the other is longer than
   ``4 * tolerance`` (a corner contact gives about ``2 * tolerance``); for queen any such
   pair is added.
3. Barrier cuts: the shared border of each adjacent pair is the part of unit i's boundary
   within ``tolerance`` of unit j (one vectorised shapely intersection over all pairs). A
   pair is cut when more than half of its shared border lies within ``barrier_tolerance``
   of a barrier line (a river, highway or rail line drawn along the border). A corner
   contact through which a barrier runs is cut by the same rule. A barrier that only
   crosses a shared border (a road running from one unit into the next) does not cut the
   pair: the two units still meet on both sides of the line. A barrier that must separate
   such units needs the units split along it (or a manual ``remove`` link).
4. Bridges: a cut pair whose shared border comes within ``barrier_tolerance`` of a bridge
   (a point or short line: a bridge, underpass, level crossing) stays adjacent.
5. Manual links (``unit_a, unit_b, action`` with action ``add`` or ``remove``) are applied
   last and win over everything above.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.sparse as sp
import shapely
from scipy.sparse.csgraph import connected_components

__all__ = ["Adjacency", "read_links", "default_tolerance", "LINK_ACTIONS"]

LINK_ACTIONS = ("add", "remove")
_LINK_COLUMNS = ("unit_a", "unit_b", "action")
_EMPTY = np.zeros((0, 2), dtype=np.int64)


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.ascontiguousarray(a)
    a.setflags(write=False)
    return a


def _canonical(pairs, n: int) -> np.ndarray:
    """(k, 2) int64 pairs with i < j, no self pairs, sorted, unique."""
    e = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    if len(e) and (e.min() < 0 or e.max() >= n):
        raise ValueError(f"edges must name unit indices 0..{n - 1}")
    e = np.sort(e, axis=1)
    e = e[e[:, 0] != e[:, 1]]
    return np.unique(e, axis=0) if len(e) else _EMPTY.copy()


def _pair_keys(e: np.ndarray, n: int) -> np.ndarray:
    return e[:, 0] * np.int64(n) + e[:, 1]


def _difference(a: np.ndarray, b: np.ndarray, n: int) -> np.ndarray:
    """Rows of canonical ``a`` not in canonical ``b``."""
    if not len(a) or not len(b):
        return a
    return a[~np.isin(_pair_keys(a, n), _pair_keys(b, n))]


def _union(a: np.ndarray, b: np.ndarray, n: int) -> np.ndarray:
    return _canonical(np.vstack([a, b]), n)


def default_tolerance(geoms) -> float:
    """A snapping distance scaled to the data: 1e-5 of the larger side of the extent.

    About 0.15 m for a 15 km town in metres, about 10 m for a state in degrees. A choice
    of ours (digitising gaps are far smaller than units), not a published value.
    """
    arr = np.asarray(geoms, dtype=object)
    if not len(arr):
        return 0.0
    x0, y0, x1, y1 = shapely.total_bounds(arr)
    side = max(x1 - x0, y1 - y0)
    return float(side * 1e-5) if np.isfinite(side) and side > 0 else 0.0


def _geometry_array(geoms, ids: Sequence[str]) -> np.ndarray:
    arr = np.asarray(getattr(geoms, "geometry", geoms), dtype=object)
    if arr.ndim != 1 or len(arr) != len(ids):
        raise ValueError(f"{len(ids)} unit ids but {arr.size} geometries")
    missing = shapely.is_missing(arr) | shapely.is_empty(arr)
    if missing.any():
        bad = ", ".join(ids[i] for i in np.flatnonzero(missing)[:5])
        raise ValueError(f"unit(s) {bad} have no geometry; give every planning unit a polygon")
    kind = shapely.get_type_id(arr)
    not_poly = ~np.isin(kind, [3, 6])  # Polygon, MultiPolygon
    if not_poly.any():
        bad = ", ".join(ids[i] for i in np.flatnonzero(not_poly)[:5])
        raise ValueError(
            f"unit(s) {bad} are not polygons; planning units must be Polygon or MultiPolygon"
        )
    return arr


def _line_union(geoms, what: str):
    """One (multi)line geometry of barrier or bridge input; polygons count by their outline."""
    if geoms is None:
        return None
    arr = np.asarray(getattr(geoms, "geometry", geoms), dtype=object).ravel()
    arr = arr[~(shapely.is_missing(arr) | shapely.is_empty(arr))] if len(arr) else arr
    if not len(arr):
        return None
    kind = shapely.get_type_id(arr)
    poly = np.isin(kind, [3, 6])
    arr = np.where(poly, shapely.boundary(arr), arr)
    if what == "barrier" and np.isin(kind, [0, 4]).any():
        raise ValueError("barriers must be lines (or polygons); points cannot cut adjacency")
    return shapely.union_all(arr)


def _shared_borders(geoms: np.ndarray, edges: np.ndarray, tol: float) -> np.ndarray:
    """Per edge (i, j): the part of unit i's boundary within ``tol`` of unit j."""
    i, j = edges[:, 0], edges[:, 1]
    used = np.unique(edges)
    bnd = np.empty(len(geoms), dtype=object)
    reach = np.empty(len(geoms), dtype=object)
    bnd[used] = shapely.boundary(geoms[used])
    reach[used] = shapely.buffer(geoms[used], tol) if tol > 0 else geoms[used]
    return shapely.intersection(bnd[i], reach[j])


def _gap_pairs(geoms: np.ndarray, known: np.ndarray, rook: bool, tol: float) -> np.ndarray:
    """Pairs within ``tol`` that share no vertex (step 2 of the module docstring)."""
    n = len(geoms)
    a, b = shapely.STRtree(geoms).query(geoms, predicate="dwithin", distance=tol)
    cand = _difference(_canonical(np.column_stack([a, b]), n), known, n)
    if not len(cand) or not rook:
        return cand
    fwd = shapely.length(_shared_borders(geoms, cand, tol))
    back = shapely.length(_shared_borders(geoms, cand[:, ::-1], tol))
    return cand[np.minimum(fwd, back) > 4.0 * tol]


def read_links(path: str | Path) -> pd.DataFrame:
    """Read a manual-links CSV (columns unit_a, unit_b, action); errors name the file."""
    path = Path(path)
    try:
        df = pd.read_csv(path, dtype=str, keep_default_na=False)
    except FileNotFoundError:
        raise ValueError(f"links file {path} does not exist; fix [adjacency] links") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise ValueError(f"links file {path} is not a readable CSV ({exc})") from None
    df.columns = [str(c).strip().lower() for c in df.columns]
    missing = [c for c in _LINK_COLUMNS if c not in df.columns]
    if missing:
        raise ValueError(
            f"links file {path} lacks column(s) {', '.join(missing)}; "
            "expected columns unit_a, unit_b, action (add | remove)"
        )
    df.attrs["source"] = str(path)
    return df


@dataclass(frozen=True, eq=False)
class Adjacency:
    """Immutable undirected unit graph; see the module docstring for how it is built.

    ``edges`` is (k, 2) int64 with i < j, sorted and unique; ``cut_edges`` the pairs that
    barriers removed (for display); ``bridged_edges`` the pairs a barrier would have cut
    but a bridge kept. Arrays are read-only.
    """

    ids: tuple[str, ...]
    edges: np.ndarray
    cut_edges: np.ndarray = field(default_factory=lambda: _frozen(_EMPTY.copy()))
    bridged_edges: np.ndarray = field(default_factory=lambda: _frozen(_EMPTY.copy()))
    contiguity: str = "given"
    tolerance: float = 0.0

    def __post_init__(self) -> None:
        ids = tuple(str(u) for u in self.ids)
        if len(set(ids)) != len(ids):
            seen: set[str] = set()
            dup = next(u for u in ids if u in seen or seen.add(u))
            raise ValueError(f"unit id {dup!r} appears more than once; unit ids must be unique")
        n = len(ids)
        object.__setattr__(self, "ids", ids)
        for name in ("edges", "cut_edges", "bridged_edges"):
            object.__setattr__(self, name, _frozen(_canonical(getattr(self, name), n)))

    # ------------------------------------------------------------------ constructors
    @classmethod
    def from_edges(cls, ids: Iterable, edges, **kw) -> Adjacency:
        """A graph over ``ids`` from pairs of unit indices, or of unit ids (strings)."""
        ids = tuple(str(u) for u in ids)
        e = list(edges) if not isinstance(edges, np.ndarray) else edges
        arr = np.asarray(e, dtype=object).reshape(-1, 2) if len(e) else _EMPTY
        if len(arr) and isinstance(arr[0, 0], str):
            pos = {u: k for k, u in enumerate(ids)}
            unknown = sorted({u for u in arr.ravel() if u not in pos})
            if unknown:
                raise ValueError(f"edges name unknown unit id(s): {', '.join(unknown[:5])}")
            arr = np.vectorize(pos.__getitem__, otypes=[np.int64])(arr)
        return cls(ids, np.asarray(arr, dtype=np.int64).reshape(-1, 2), **kw)

    @classmethod
    def from_polygons(
        cls,
        geoms,
        ids: Iterable,
        contiguity: str = "rook",
        barriers=None,
        bridges=None,
        links: pd.DataFrame | None = None,
        tolerance: float | None = None,
        barrier_tolerance: float | None = None,
    ) -> Adjacency:
        """Contiguity of unit polygons, after barrier cuts, bridges and manual links.

        ``geoms``: GeoSeries / array of (Multi)Polygons in a projected CRS, one per id.
        ``tolerance``: gap-repair and border distance (CRS units); ``None`` scales it to the
        data (:func:`default_tolerance`), ``0`` trusts the topology exactly.
        ``barrier_tolerance``: how far from a barrier a border may lie and still count as
        running along it, and how far a bridge may be; default ``10 * tolerance``.
        """
        import geopandas as gpd
        from libpysal.graph import Graph  # heavy import, only when polygons are given

        ids = tuple(str(u) for u in ids)
        if contiguity not in ("rook", "queen"):
            raise ValueError(f"contiguity must be 'rook' or 'queen', not {contiguity!r}")
        arr = _geometry_array(geoms, ids)
        n = len(arr)
        tol = default_tolerance(arr) if tolerance is None else float(tolerance)
        btol = 10.0 * tol if barrier_tolerance is None else float(barrier_tolerance)
        rook = contiguity == "rook"
        if n == 0:
            return cls(ids, _EMPTY, contiguity=contiguity, tolerance=tol)

        series = gpd.GeoSeries(arr, index=pd.RangeIndex(n))  # graph ids = positions
        graph = Graph.build_contiguity(series, rook=rook, strict=False)
        adj = graph.adjacency.reset_index()
        pairs = adj.iloc[:, :2].to_numpy(dtype=np.int64)  # positions (RangeIndex ids)
        edges = _canonical(pairs, n)
        if tol > 0:
            edges = _union(edges, _gap_pairs(arr, edges, rook, tol), n)

        cut = bridged = _EMPTY
        barrier = _line_union(barriers, "barrier")
        if barrier is not None and len(edges):
            valid = shapely.is_valid(arr)
            fixed = np.where(valid, arr, shapely.make_valid(arr)) if not valid.all() else arr
            border = _shared_borders(fixed, edges, max(tol, 1e-12))
            length = shapely.length(border)
            along = shapely.length(shapely.intersection(border, shapely.buffer(barrier, btol)))
            is_cut = (along > 0.5 * length) & (length > 0)
            bridge = _line_union(bridges, "bridge")
            if bridge is not None and is_cut.any():
                keep = is_cut & shapely.dwithin(border, bridge, max(btol, 1e-12))
                bridged, is_cut = edges[keep], is_cut & ~keep
            cut, edges = edges[is_cut], edges[~is_cut]

        out = cls(ids, edges, cut, bridged, contiguity=contiguity, tolerance=tol)
        if links is not None and len(links):
            out = out.with_links(links)
        return out

    def with_links(self, links: pd.DataFrame) -> Adjacency:
        """A copy with manual links applied (columns unit_a, unit_b, action add|remove).

        Unknown unit ids, self links and unknown actions raise a ValueError naming the row
        (row 1 = first data row; with :func:`read_links` the file is named too).
        """
        source = links.attrs.get("source", "links")
        cols = {str(c).strip().lower(): c for c in links.columns}
        missing = [c for c in _LINK_COLUMNS if c not in cols]
        if missing:
            raise ValueError(f"{source}: missing column(s) {', '.join(missing)}")
        pos = {u: k for k, u in enumerate(self.ids)}
        add, remove = [], []
        a_col, b_col, act_col = (links[cols[c]].astype(str).str.strip() for c in _LINK_COLUMNS)
        for row, (a, b, act) in enumerate(zip(a_col, b_col, act_col, strict=True), start=1):
            where = f"{source} row {row} ({a}, {b}, {act})"
            for u in (a, b):
                if u not in pos:
                    raise ValueError(f"{where}: unit {u!r} is not a planning unit; fix the id")
            if a == b:
                raise ValueError(f"{where}: a unit cannot be linked to itself")
            action = act.lower()
            if action not in LINK_ACTIONS:
                raise ValueError(f"{where}: action must be 'add' or 'remove'")
            (add if action == "add" else remove).append((pos[a], pos[b]))
        n = self.n
        add_e, rem_e = _canonical(add, n), _canonical(remove, n)
        edges = _difference(_union(self.edges, add_e, n), rem_e, n)
        cut = _difference(self.cut_edges, add_e, n)
        return Adjacency(self.ids, edges, cut, self.bridged_edges, self.contiguity,
                         self.tolerance)

    # ------------------------------------------------------------------ queries
    @property
    def n(self) -> int:
        return len(self.ids)

    @property
    def n_edges(self) -> int:
        return len(self.edges)

    def index(self, unit_id: str) -> int:
        """Position of a unit id."""
        try:
            return self._positions[str(unit_id)]
        except KeyError:
            raise KeyError(f"unit {unit_id!r} is not in the adjacency graph") from None

    @cached_property
    def _positions(self) -> dict[str, int]:
        return {u: k for k, u in enumerate(self.ids)}

    @cached_property
    def _csr(self) -> sp.csr_array:
        n, e = self.n, self.edges
        rows = np.concatenate([e[:, 0], e[:, 1]])
        cols = np.concatenate([e[:, 1], e[:, 0]])
        m = sp.csr_array((np.ones(len(rows), dtype=np.int8), (rows, cols)), shape=(n, n))
        m.sort_indices()
        for a in (m.data, m.indices, m.indptr):
            a.setflags(write=False)
        return m

    def to_csr(self) -> sp.csr_array:
        """Symmetric 0/1 adjacency matrix (scipy sparse CSR, a fresh copy)."""
        return self._csr.copy()

    def neighbors(self, i: int) -> np.ndarray:
        """Sorted indices of unit i's neighbours."""
        m = self._csr
        return m.indices[m.indptr[i]:m.indptr[i + 1]].astype(np.int64)

    @cached_property
    def degree(self) -> np.ndarray:
        return _frozen(np.diff(self._csr.indptr).astype(np.int64))

    def islands(self) -> np.ndarray:
        """Indices of units with no neighbour."""
        return np.flatnonzero(self.degree == 0)

    @cached_property
    def _components(self) -> tuple[int, np.ndarray]:
        k, labels = connected_components(self._csr, directed=False)
        return int(k), _frozen(labels.astype(np.int64))

    def components(self) -> np.ndarray:
        """Connected-component label per unit (scipy.sparse.csgraph.connected_components)."""
        return self._components[1]

    @property
    def n_components(self) -> int:
        return self._components[0]

    def subgraph_components(self, mask) -> np.ndarray:
        """Component labels of the subgraph induced by bool ``mask``; -1 outside the mask.

        Labels run 0..k-1 over the masked units; a zone is connected when its mask gives
        a single label.
        """
        mask = np.asarray(mask, dtype=bool)
        if mask.shape != (self.n,):
            raise ValueError(f"mask has shape {mask.shape}; expected ({self.n},)")
        idx = np.flatnonzero(mask)
        out = np.full(self.n, -1, dtype=np.int64)
        if len(idx):
            sub = self._csr[idx][:, idx]
            _, labels = connected_components(sub, directed=False)
            out[idx] = labels
        return out

    def to_networkx(self):
        """networkx.Graph with nodes 0..n-1 (attribute ``unit_id``) and the edges."""
        import networkx as nx

        g = nx.Graph()
        g.add_nodes_from((k, {"unit_id": u}) for k, u in enumerate(self.ids))
        g.add_edges_from(map(tuple, self.edges.tolist()))
        return g

    def edge_ids(self) -> pd.DataFrame:
        """The edges as unit ids (columns unit_a, unit_b), e.g. for a table or a CSV."""
        ids = np.asarray(self.ids, dtype=object)
        return pd.DataFrame({"unit_a": ids[self.edges[:, 0]], "unit_b": ids[self.edges[:, 1]]})

    def __repr__(self) -> str:
        return (f"Adjacency(n={self.n}, edges={self.n_edges}, cut={len(self.cut_edges)}, "
                f"components={self.n_components}, contiguity={self.contiguity!r})")

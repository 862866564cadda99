"""A street network as plain arrays: nodes, segments and connected pieces.

:class:`StreetNetwork` is built once from street centrelines (shapely lines, vectorised:
no Python loop per geometry). Its nodes are the lines' vertices, merged where two
vertices coincide after rounding to :data:`NODE_PRECISION` (1 cm); its segments join
consecutive vertices of a line and are weighted by their length in metres.

Streets meet only where the data give them a shared vertex. Two lines that cross
without one are not joined: that is how an overpass, a bridge over a road or a rail line
under a street is drawn, and a path may not turn there. A river or a rail line without a
street across it therefore splits the network, which is what barrier-aware travel needs.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import shapely
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components, dijkstra

__all__ = ["StreetNetwork", "NODE_PRECISION", "undirected_graph"]

#: Vertices closer than this (metres, after rounding) are one node. 1 cm is our choice:
#: far below any street's width, far above the noise of a GIS export.
NODE_PRECISION = 0.01


def undirected_graph(a: np.ndarray, b: np.ndarray, w: np.ndarray, n_nodes: int) -> csr_matrix:
    """A sparse undirected graph with one entry per node pair: the shortest of parallel edges.

    ``scipy.sparse`` sums repeated entries, which would lengthen a street drawn twice; so
    each pair is stored once (smaller index first) with the least weight. Zero weights
    stay edges (a point snapped onto a vertex).
    """
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    keep = lo != hi
    lo, hi, w = lo[keep], hi[keep], np.asarray(w, float)[keep]
    order = np.lexsort((w, hi, lo))
    lo, hi, w = lo[order], hi[order], w[order]
    first = np.ones(len(lo), bool)
    first[1:] = (lo[1:] != lo[:-1]) | (hi[1:] != hi[:-1])
    return csr_matrix((w[first], (lo[first], hi[first])), shape=(n_nodes, n_nodes))


@dataclass(frozen=True, eq=False)
class StreetNetwork:
    """Street centrelines as a graph; build with :meth:`from_lines`.

    - ``nodes``: (k, 2) node coordinates (metres, the project's CRS).
    - ``seg_a``, ``seg_b``: (s,) node index at each end of each segment.
    - ``seg_line``: (s,) index of the input line each segment comes from.
    - ``piece``: (k,) label of each node's connected piece (0..n_pieces-1).

    For shortest paths the segments are gathered into chains: runs of segments through
    nodes where only two segments meet (the vertices of a curve), from one junction (a
    node where one, three or more meet) to the next. Paths turn only at junctions, so the
    search runs over chains, several times fewer than segments on curving streets.

    - ``seg_chain``: (s,) chain of each segment; ``seg_start``: (s,) metres along the
      chain where the segment's ``seg_a`` end lies; ``seg_reversed``: (s,) True when the
      chain runs from ``seg_b`` to ``seg_a``.
    - ``chain_a``, ``chain_b``: (c,) the junction node at each end; ``chain_length``: (c,).
    """

    nodes: np.ndarray
    seg_a: np.ndarray
    seg_b: np.ndarray
    seg_line: np.ndarray
    piece: np.ndarray
    seg_chain: np.ndarray
    seg_start: np.ndarray
    seg_reversed: np.ndarray
    chain_a: np.ndarray
    chain_b: np.ndarray
    chain_length: np.ndarray

    @classmethod
    def from_lines(cls, geoms) -> StreetNetwork:
        """The network of street lines (LineStrings or MultiLineStrings; others refused).

        Empty and missing geometries are skipped. Raises ValueError when there is no line
        or a geometry is not a line.
        """
        geoms = np.asarray(geoms, dtype=object)
        present = ~(shapely.is_missing(geoms) | shapely.is_empty(geoms))
        kinds = shapely.get_type_id(geoms[present])
        bad = ~np.isin(kinds, [1, 5])  # LineString, MultiLineString
        if bad.any():
            first = int(np.flatnonzero(present)[np.flatnonzero(bad)[0]])
            raise ValueError(f"feature {first + 1} is a {geoms[first].geom_type}, not a "
                             "line: streets must be lines")
        line_of = np.flatnonzero(present)
        parts, part_of = shapely.get_parts(geoms[present], return_index=True)
        xy, vertex_of = shapely.get_coordinates(parts, return_index=True)
        if not len(xy):
            raise ValueError("the streets hold no line")
        keys = np.round(xy / NODE_PRECISION).astype(np.int64)
        uniq, node_of = np.unique(keys, axis=0, return_inverse=True)
        node_of = node_of.ravel()
        same_part = vertex_of[1:] == vertex_of[:-1]
        a, b = node_of[:-1][same_part], node_of[1:][same_part]
        line = line_of[part_of[vertex_of[:-1][same_part]]]
        keep = a != b  # a repeated vertex is no segment
        nodes = uniq * NODE_PRECISION
        a, b, line = a[keep], b[keep], line[keep]
        graph = undirected_graph(a, b, np.ones(len(a)), len(nodes))
        _, piece = connected_components(graph, directed=False)
        d = nodes[b] - nodes[a]
        return cls(nodes, a, b, line, piece, *_chains(a, b, np.hypot(d[:, 0], d[:, 1]),
                                                      len(nodes)))

    @property
    def n_nodes(self) -> int:
        return len(self.nodes)

    @property
    def n_pieces(self) -> int:
        return int(self.piece.max()) + 1 if len(self.piece) else 0

    @cached_property
    def seg_length(self) -> np.ndarray:
        """Length of each segment in metres."""
        d = self.nodes[self.seg_b] - self.nodes[self.seg_a]
        return np.hypot(d[:, 0], d[:, 1])

    @cached_property
    def segments(self) -> np.ndarray:
        """Each segment as a two-point shapely LineString (for nearest-street queries)."""
        pairs = np.stack([self.nodes[self.seg_a], self.nodes[self.seg_b]], axis=1)
        return shapely.linestrings(pairs)

    @cached_property
    def tree(self) -> shapely.STRtree:
        return shapely.STRtree(self.segments)

    def graph(self) -> csr_matrix:
        """The segments as an undirected sparse graph weighted by length."""
        return undirected_graph(self.seg_a, self.seg_b, self.seg_length, self.n_nodes)


def _chain_labels(a: np.ndarray, b: np.ndarray, junction: np.ndarray) -> np.ndarray:
    """Chain label of each segment: segments meeting at a non-junction node share one."""
    n_seg = len(a)
    inc_node = np.concatenate([a, b])
    inc_seg = np.concatenate([np.arange(n_seg), np.arange(n_seg)])
    inner = ~junction[inc_node]
    order = np.argsort(inc_node[inner], kind="stable")
    pairs = inc_seg[inner][order].reshape(-1, 2)  # a non-junction node has two segments
    links = csr_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n_seg, n_seg))
    return connected_components(links, directed=False)[1]


def _chains(a: np.ndarray, b: np.ndarray, length: np.ndarray, n_nodes: int):
    """(seg_chain, seg_start, seg_reversed, chain_a, chain_b, chain_length).

    A closed ring with no junction gets its lowest node as one. Positions along each chain
    come from one multi-source Dijkstra over the chains kept apart: each chain's end at a
    junction gets its own copy of the junction node, so a chain is a simple path.
    """
    n_seg = len(a)
    degree = np.bincount(a, minlength=n_nodes) + np.bincount(b, minlength=n_nodes)
    junction = degree != 2
    chain = _chain_labels(a, b, junction)
    ends = np.bincount(chain[junction[a]], minlength=chain.max() + 1) + np.bincount(
        chain[junction[b]], minlength=chain.max() + 1)
    if (ends == 0).any():  # rings: one node of each becomes a junction
        ring = ends[chain] == 0
        lowest = np.full(chain.max() + 1, n_nodes)
        np.minimum.at(lowest, chain[ring], np.minimum(a[ring], b[ring]))
        junction[lowest[lowest < n_nodes]] = True
        chain = _chain_labels(a, b, junction)
    # every segment end at a junction becomes its own copy node n_nodes + k
    end_a = np.where(junction[a], n_nodes + np.arange(n_seg), a)
    end_b = np.where(junction[b], n_nodes + n_seg + np.arange(n_seg), b)
    n_chains = chain.max() + 1
    copy_of = np.concatenate([a, b])  # junction node of copy k
    start = np.full(n_chains, -1)
    at_a = np.flatnonzero(junction[a])
    start[chain[at_a]] = end_a[at_a]
    missing = start < 0
    at_b = np.flatnonzero(junction[b] & missing[chain])
    start[chain[at_b]] = end_b[at_b]
    size = n_nodes + 2 * n_seg
    graph = undirected_graph(end_a, end_b, length, size)
    pos = dijkstra(graph, directed=False, indices=start, min_only=True)
    pa, pb = pos[end_a], pos[end_b]
    reversed_ = pa > pb
    seg_start = np.minimum(pa, pb)
    chain_length = np.zeros(n_chains)
    np.maximum.at(chain_length, chain, np.maximum(pa, pb))
    far_end = np.maximum(pa, pb) >= chain_length[chain]
    chain_a = copy_of[start - n_nodes]
    chain_b = np.empty(n_chains, np.int64)
    last = np.flatnonzero(far_end)
    far_node = np.where(reversed_, end_a, end_b)[last]
    chain_b[chain[last]] = copy_of[far_node - n_nodes]
    return chain, seg_start, reversed_, chain_a, chain_b, chain_length

"""Travel along streets: from each unit's point to each site over a :class:`StreetNetwork`.

Each point (units' and sites') joins the network at the nearest point of the nearest
street segment; that straight access leg is counted in the travel. The joining points
become nodes that split their chains (runs of segments between junctions, see
:class:`StreetNetwork`), so two points on one segment or chain are exactly the distance
between them along it, and shortest paths come from scipy's Dijkstra run from the sites'
nodes over the junctions and the points. Units on a piece of street that reaches no site
get ``inf``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from scipy.sparse.csgraph import dijkstra

from .network import StreetNetwork, undirected_graph

__all__ = ["StreetTravel", "street_travel", "snap"]


@dataclass(frozen=True, eq=False)
class StreetTravel:
    """Street travel from units to sites, and what it took to get onto the streets.

    - ``metres``: (n, m) travel in metres, access legs included; ``inf`` where no street
      path joins the two.
    - ``unit_access``, ``site_access``: (n,), (m,) straight metres from the point to the
      street it joins.
    - ``unit_piece``, ``site_piece``: the network piece each point joins.
    """

    metres: np.ndarray
    unit_access: np.ndarray
    site_access: np.ndarray
    unit_piece: np.ndarray
    site_piece: np.ndarray

    def main_piece(self) -> int:
        """The piece that most units and sites join (ties: the lowest label)."""
        counts = np.bincount(np.concatenate([self.unit_piece, self.site_piece]))
        return int(np.argmax(counts)) if len(counts) else 0

    def arrays(self) -> dict[str, np.ndarray]:
        """The fields as named arrays (what the disk cache stores)."""
        return {k: getattr(self, k) for k in ("metres", "unit_access", "site_access",
                                              "unit_piece", "site_piece")}


def snap(net: StreetNetwork, xy: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(segment, offset along it in metres, access leg in metres) for each point of ``xy``."""
    points = shapely.points(np.asarray(xy, float).reshape(-1, 2))
    idx = net.tree.query_nearest(points, all_matches=False)
    seg = np.empty(len(points), np.int64)
    seg[idx[0]] = idx[1]
    offset = shapely.line_locate_point(net.segments[seg], points)
    offset = np.clip(offset, 0.0, net.seg_length[seg])
    joined = shapely.line_interpolate_point(net.segments[seg], offset)
    access = shapely.distance(points, joined)
    return seg, offset, access


def _split_edges(net: StreetNetwork, chain: np.ndarray, pos: np.ndarray):
    """Edges (a, b, w) of the chains with point p inserted as node ``n_nodes + p``.

    Chains holding no point stay whole; a chain holding points becomes the path
    a -> points in order along it -> b.
    """
    k, length = net.n_nodes, net.chain_length
    whole = np.ones(len(length), bool)
    whole[chain] = False
    order = np.lexsort((pos, chain))
    c, t = chain[order], pos[order]
    node = k + order
    first = np.ones(len(c), bool)
    first[1:] = c[1:] != c[:-1]
    last = np.ones(len(c), bool)
    last[:-1] = c[:-1] != c[1:]
    prev_node = np.where(first, net.chain_a[c], np.roll(node, 1))
    prev_t = np.where(first, 0.0, np.roll(t, 1))
    a = np.concatenate([net.chain_a[whole], prev_node, node[last]])
    b = np.concatenate([net.chain_b[whole], node, net.chain_b[c[last]]])
    w = np.concatenate([length[whole], t - prev_t, length[c[last]] - t[last]])
    return a, b, np.maximum(w, 0.0)


def street_travel(net: StreetNetwork, unit_xy: np.ndarray, site_xy: np.ndarray) -> StreetTravel:
    """Travel in metres along ``net`` from each unit point to each site (access legs counted)."""
    unit_xy = np.asarray(unit_xy, float).reshape(-1, 2)
    site_xy = np.asarray(site_xy, float).reshape(-1, 2)
    n, m = len(unit_xy), len(site_xy)
    seg, offset, access = snap(net, np.vstack([unit_xy, site_xy]))
    along_seg = np.where(net.seg_reversed[seg], net.seg_length[seg] - offset, offset)
    a, b, w = _split_edges(net, net.seg_chain[seg], net.seg_start[seg] + along_seg)
    graph = undirected_graph(a, b, w, net.n_nodes + n + m)
    k = net.n_nodes
    along = dijkstra(graph, directed=False, indices=k + n + np.arange(m))  # (m, nodes)
    metres = along[:, k:k + n].T + access[:n, None] + access[None, n:]
    piece = net.piece[net.seg_a[seg]]
    return StreetTravel(metres, access[:n], access[n:], piece[:n], piece[n:])

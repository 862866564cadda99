"""Zone boundaries: dissolve units into one clean polygon per school, and changed areas.

:func:`dissolve_zones` unions each zone's planning units (shapely 2 ``union_all``) and
cleans the result so that digitising gaps between units leave no holes or cracks:

1. closing per zone: ``buffer(+tol).buffer(-tol)`` with mitred joins (corners stay
   sharp), which closes gaps narrower than ``2 * tol`` between units of the same zone;
2. gaps between zones: the closed union of all units, with holes smaller than
   ``sliver_area`` filled, minus the union of the closed zones leaves the cracks and small
   holes between zones; each zone takes the part of them within ``tol`` of it (a crack is
   split between its two sides), and each piece left over goes to the zone it shares the
   longest border with;
3. overlaps: zones are made disjoint in site order (a later zone gives up what an
   earlier one already covers), and leftover parts thinner than ``tol`` are dropped.

A real hole (an enclave of another zone, or a hole in the units themselves larger than
``sliver_area``) survives. Contiguous zones come out as one polygon each; ``n_parts``
counts the pieces and the GeoDataFrame's ``attrs["warnings"]`` lists every zone with more
than one. Closing by dilation then erosion is the morphological closing of J. Serra,
"Image Analysis and Mathematical Morphology", Academic Press, 1982.
"""

from __future__ import annotations

from collections.abc import Sequence

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from ..intake.adjacency import default_tolerance
from ..intake.checks import is_coverage

__all__ = ["dissolve_zones", "changed_areas"]

# ---------------------------------------------------------------- helpers
def _closing(geoms: np.ndarray, tol: float) -> np.ndarray:
    if tol <= 0:
        return shapely.make_valid(geoms)
    grown = shapely.buffer(geoms, tol, join_style="mitre", mitre_limit=10.0)
    closed = shapely.buffer(grown, -tol, join_style="mitre", mitre_limit=10.0)
    # the mitre limit bevels very sharp spikes; union with the input keeps them whole
    return shapely.make_valid(shapely.union(shapely.make_valid(geoms), closed))


def _polygonal(geoms: np.ndarray) -> np.ndarray:
    """Keep only the polygon parts (make_valid and overlays can leave lines or points)."""
    parts, idx = shapely.get_parts(geoms, return_index=True)
    keep = np.isin(shapely.get_type_id(parts), [3, 6])
    out = np.array([shapely.Polygon()] * len(geoms), dtype=object)
    if keep.any():
        grouped = pd.Series(parts[keep]).groupby(idx[keep]).agg(
            lambda s: shapely.union_all(s.to_numpy()))
        out[grouped.index.to_numpy()] = grouped.to_numpy()
    return out


def _fill_small_holes(geom, max_area: float):
    """``geom`` with interior rings smaller than ``max_area`` filled."""
    polys = shapely.get_parts(geom)
    if not len(polys):
        return geom
    shells = shapely.polygons(shapely.get_exterior_ring(polys))
    n_holes = shapely.get_num_interior_rings(polys)
    poly_idx = np.repeat(np.arange(len(polys)), n_holes)
    ring_idx = np.concatenate([np.arange(k) for k in n_holes]) if n_holes.sum() else []
    holes = shapely.polygons(shapely.get_interior_ring(polys[poly_idx], ring_idx))
    big = shapely.area(holes) >= max_area if len(poly_idx) else np.zeros(0, bool)
    if not big.any():
        return shapely.union_all(shells)
    cut = pd.Series(holes[big]).groupby(poly_idx[big]).agg(
        lambda s: shapely.union_all(s.to_numpy()))
    shells = shells.copy()
    rows = cut.index.to_numpy()
    shells[rows] = shapely.difference(shells[rows], cut.to_numpy())
    return shapely.union_all(shells)


def _group_union(geoms: np.ndarray, keys: np.ndarray, order: Sequence,
                 coverage: bool = False) -> np.ndarray:
    """The union of ``geoms`` per key, in ``order``.

    With ``coverage`` (the geometries form a valid coverage: no overlaps, shared borders
    with the same vertices, as ``shapely.coverage_is_valid`` says) each group is one too,
    and ``shapely.coverage_union_all`` gives the same union an order of magnitude faster.
    The two list a polygon's vertices from different starting points, so each union is
    normalised: the zones then come out identical either way.
    """
    union = shapely.coverage_union_all if coverage else shapely.union_all
    codes = pd.Categorical(keys, categories=list(order)).codes
    out = np.empty(len(order), dtype=object)
    sorter = np.argsort(codes, kind="stable")
    bounds = np.searchsorted(codes[sorter], np.arange(len(order) + 1))
    for k in range(len(order)):  # one union per zone, never per unit
        out[k] = union(geoms[sorter[bounds[k]:bounds[k + 1]]])
    return shapely.normalize(out)



def _assign_pieces(pieces: np.ndarray, zones: np.ndarray, tol: float) -> np.ndarray:
    """For each gap piece, the zone sharing its longest border (-1 if none touches)."""
    owner = np.full(len(pieces), -1, dtype=np.int64)
    if not len(pieces):
        return owner
    reach = shapely.buffer(zones, max(tol, 1e-12))
    p, z = shapely.STRtree(reach).query(pieces, predicate="intersects")
    if not len(p):
        return owner
    shared = shapely.length(shapely.intersection(shapely.boundary(pieces[p]), reach[z]))
    best = np.lexsort((-shared, p))  # per piece, longest shared border first
    first = np.r_[True, p[best][1:] != p[best][:-1]]
    owner[p[best][first]] = z[best][first]
    return owner


def _thin(geoms: np.ndarray, tol: float) -> np.ndarray:
    """True where a polygon is thinner than ``tol`` (twice area / perimeter)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        width = 2.0 * shapely.area(geoms) / shapely.length(geoms)
    return ~(width >= tol)


def _ids(values, n: int, what: str) -> np.ndarray:
    arr = np.asarray(pd.Series(values, dtype=object).fillna("").astype(str).str.strip())
    if arr.shape != (n,):
        raise ValueError(f"{what} has {arr.size} values; expected one per unit ({n})")
    return arr


# ---------------------------------------------------------------- public
def dissolve_zones(
    units_gdf: gpd.GeoDataFrame,
    assignment_ids,
    tolerance: float | None = None,
    *,
    site_ids: Sequence[str] | None = None,
    counts=None,
    sliver_area: float | None = None,
    coverage: bool | None = None,
) -> gpd.GeoDataFrame:
    """One boundary polygon per zone (see the module docstring for the cleaning).

    ``assignment_ids``: site id per unit ('' or None: unassigned, left out with a
    warning). ``site_ids`` orders the rows (and settles overlaps, earlier wins); default:
    sorted ids. ``counts`` (students per unit) adds a ``students`` column. ``tolerance``
    defaults to :func:`districting.intake.adjacency.default_tolerance`; ``sliver_area`` to
    ``(100 * tolerance) ** 2``. ``coverage``: whether the units form a valid coverage
    (:func:`districting.intake.checks.is_coverage`; checked when None), so that zones
    are unioned with ``shapely.coverage_union_all``. Columns: site_id, n_units, [students],
    area, n_parts, geometry; ``attrs["warnings"]`` lists problems in words.
    """
    geoms = np.asarray(units_gdf.geometry.to_numpy(), dtype=object)
    n = len(geoms)
    zone_of = _ids(assignment_ids, n, "assignment")
    tol = default_tolerance(geoms) if tolerance is None else float(tolerance)
    sliver = (100.0 * tol) ** 2 if sliver_area is None else float(sliver_area)
    warnings: list[str] = []
    assigned = zone_of != ""
    if not assigned.all():
        warnings.append(f"{int((~assigned).sum())} unit(s) have no zone and are left out")
    present = set(zone_of[assigned].tolist())
    order = [s for s in (site_ids if site_ids is not None else sorted(present)) if s in present]
    unknown = sorted(present - set(order))
    if unknown:
        raise ValueError(f"assignment names site(s) not in site_ids: {', '.join(unknown[:5])}")

    g, keys = shapely.make_valid(geoms[assigned]), zone_of[assigned]
    if coverage is None:
        coverage = is_coverage(geoms)
    raw = _group_union(g, keys, order, coverage)
    zones = _polygonal(_closing(raw, tol))

    # the cracks and small holes between zones; closing the union of the closed zones is
    # the same cover as closing the union of the units, at a fraction of the cost
    closed_all = shapely.union_all(zones)
    cover = _fill_small_holes(_polygonal(_closing(np.array([closed_all]), tol))[0], sliver)
    gap = shapely.difference(cover, closed_all)
    if not shapely.is_empty(gap):
        # each zone claims the gap within `tol` of it (a crack is split between its two
        # sides; overlapping claims are settled below, earlier zone first) ...
        claims = shapely.intersection(gap, shapely.buffer(zones, tol, join_style="mitre"))
        zones = shapely.make_valid(shapely.union(zones, claims))
        # ... and what is left (crack crossings, small holes) goes to the zone with the
        # longest border along it
        rest = shapely.get_parts(shapely.difference(gap, shapely.union_all(claims)))
        rest = rest[np.isin(shapely.get_type_id(rest), [3, 6]) & (shapely.area(rest) > 0)]
        owner = _assign_pieces(rest, zones, tol)
        if (owner >= 0).any():
            extra = _group_union(rest[owner >= 0], owner[owner >= 0], range(len(zones)))
            zones = shapely.make_valid(shapely.union(zones, extra))

    done = shapely.Polygon()
    for k in range(len(zones)):  # disjoint in site order; one overlay per zone
        own = _polygonal(np.array([shapely.difference(zones[k], done)]))[0]
        parts = shapely.get_parts(own)
        keep = ~_thin(parts, tol) | (shapely.area(parts) >= sliver)
        zones[k] = shapely.union_all(parts[keep]) if keep.any() else own
        done = shapely.union(done, zones[k])

    n_parts = shapely.get_num_geometries(zones).astype(np.int64)
    for sid, parts in zip(order, n_parts, strict=True):
        if parts > 1:
            warnings.append(f"zone {sid} has {parts} separate parts")
    data = {
        "site_id": order,
        "n_units": pd.Series(keys).value_counts().reindex(order).to_numpy(np.int64),
    }
    if counts is not None:
        c = np.asarray(counts, dtype=float)
        data["students"] = pd.Series(c[assigned]).groupby(keys).sum().reindex(order).to_numpy()
    data["area"] = shapely.area(zones)
    data["n_parts"] = n_parts
    out = gpd.GeoDataFrame(data, geometry=list(zones), crs=units_gdf.crs)
    out.attrs["warnings"] = warnings
    return out


def changed_areas(
    units_gdf: gpd.GeoDataFrame,
    from_ids,
    to_ids,
    counts=None,
    tolerance: float | None = None,
    coverage: bool | None = None,
) -> gpd.GeoDataFrame:
    """Units whose school changes, dissolved per (from_site, to_site) pair.

    ``from_ids`` / ``to_ids``: site id per unit today and in the option ('' = none). A unit
    counts as changed when its option site is set and differs from today's. Columns:
    from_site, to_site, n_units, [students], geometry (closed like :func:`dissolve_zones`,
    so the gaps between units of one pair leave no cracks); rows by students moved (when
    ``counts`` is given) then by the pair. ``coverage`` as in :func:`dissolve_zones`.
    """
    geoms = np.asarray(units_gdf.geometry.to_numpy(), dtype=object)
    n = len(geoms)
    a, b = _ids(from_ids, n, "from_ids"), _ids(to_ids, n, "to_ids")
    tol = default_tolerance(geoms) if tolerance is None else float(tolerance)
    moved = (b != "") & (a != b)
    pairs = pd.DataFrame({"from_site": a[moved], "to_site": b[moved]})
    pairs["key"] = pairs["from_site"] + "\x1f" + pairs["to_site"]
    columns = ["from_site", "to_site", "n_units"] + (["students"] if counts is not None else [])
    if not moved.any():
        return gpd.GeoDataFrame(columns=columns, geometry=[], crs=units_gdf.crs)
    table = pairs.groupby("key", sort=True).agg(
        from_site=("from_site", "first"), to_site=("to_site", "first"),
        n_units=("from_site", "size"))
    if counts is not None:
        c = np.asarray(counts, dtype=float)
        table["students"] = pd.Series(c[moved]).groupby(pairs["key"].to_numpy()).sum()
    order = table.index.tolist()
    if coverage is None:
        coverage = is_coverage(geoms)
    shapes = _polygonal(_closing(_group_union(shapely.make_valid(geoms[moved]),
                                              pairs["key"].to_numpy(), order, coverage), tol))
    out = gpd.GeoDataFrame(table.reset_index(drop=True)[columns], geometry=list(shapes),
                           crs=units_gdf.crs)
    if counts is not None:
        out = out.sort_values(["students", "from_site", "to_site"],
                              ascending=[False, True, True]).reset_index(drop=True)
    return out

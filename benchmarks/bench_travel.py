"""Street travel benchmark: 20,000 units x 50 sites on a synthetic street network.

The network is a perturbed grid of 100 m blocks large enough for the units (each block
side its own curved line of five vertices, a few sides missing), so about 45,000 lines
and 180,000 segments. Prints the time of each step: network build, snapping the points
to the streets, graph with the points inserted and scipy's Dijkstra from the sites, and
the disk cache (key, then a hit). Speed is measured here, never asserted in tests.

Usage: ``.venv/bin/python benchmarks/bench_travel.py [--units 20000] [--sites 50]``.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import shapely

from districting.travel import StreetNetwork, street_travel
from districting.travel.cache import cache_key, cached_arrays
from districting.travel.streets import snap

BLOCK = 100.0  # metres


def synthetic_streets(n_units: int, seed: int = 0) -> tuple[np.ndarray, float]:
    """Curved block sides of a perturbed grid with about one unit per block; (lines, side)."""
    rng = np.random.default_rng(seed)
    k = int(np.ceil(np.sqrt(n_units))) + 1
    xy = np.stack(np.meshgrid(np.arange(k) * BLOCK, np.arange(k) * BLOCK), -1)
    xy += rng.uniform(-20, 20, xy.shape)
    starts, ends = [], []
    for di, dj in ((1, 0), (0, 1)):
        a = xy[: k - di, : k - dj].reshape(-1, 2)
        b = xy[di:, dj:].reshape(-1, 2)
        starts.append(a)
        ends.append(b)
    a, b = np.vstack(starts), np.vstack(ends)
    keep = rng.random(len(a)) > 0.05  # a few missing block sides
    a, b = a[keep], b[keep]
    t = np.linspace(0, 1, 5)[None, :, None]
    normal = (b - a)[:, ::-1] * np.array([1, -1]) / BLOCK
    bend = rng.uniform(-12, 12, (len(a), 1, 1)) * np.sin(np.pi * t)
    coords = a[:, None, :] + (b - a)[:, None, :] * t + bend * normal[:, None, :]
    return shapely.linestrings(coords), (k - 1) * BLOCK


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--units", type=int, default=20_000)
    parser.add_argument("--sites", type=int, default=50)
    args = parser.parse_args()
    rng = np.random.default_rng(1)
    lines, side = synthetic_streets(args.units)
    unit_xy = rng.uniform(0, side, (args.units, 2))
    site_xy = rng.uniform(0, side, (args.sites, 2))

    t0 = time.perf_counter()
    net = StreetNetwork.from_lines(lines)
    t_build = time.perf_counter() - t0
    t0 = time.perf_counter()
    snap(net, np.vstack([unit_xy, site_xy]))
    t_snap = time.perf_counter() - t0
    t0 = time.perf_counter()
    travel = street_travel(net, unit_xy, site_xy)
    t_travel = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as folder:
        t0 = time.perf_counter()
        key = cache_key("streets", lines, unit_xy=unit_xy, site_xy=site_xy)
        t_key = time.perf_counter() - t0
        cached_arrays(Path(folder), key, travel.arrays)
        t0 = time.perf_counter()
        cache_key("streets", lines, unit_xy=unit_xy, site_xy=site_xy)
        hit = cached_arrays(Path(folder), key, lambda: {})
        t_hit = time.perf_counter() - t0
    assert np.array_equal(hit["metres"], travel.metres)

    print(f"street travel, {args.units:,} units x {args.sites} sites on "
          f"{len(lines):,} lines ({len(net.seg_a):,} segments, {net.n_nodes:,} nodes, "
          f"{side / 1000:.1f} km square)")
    rows = [
        ("network build", t_build),
        ("snapping units and sites", t_snap),
        ("graph + Dijkstra (incl. snapping again)", t_travel),
        ("  of which graph + Dijkstra", t_travel - t_snap),
        ("build total (build + travel)", t_build + t_travel),
        ("cache key (sha256 of lines and points)", t_key),
        ("cache hit (key + load)", t_hit),
    ]
    for name, seconds in rows:
        print(f"  {name:<42} {seconds:8.2f} s")
    finite = np.isfinite(travel.metres)
    ratio = travel.metres[finite] / np.hypot(*(unit_xy[:, None] - site_xy[None]).transpose(
        2, 0, 1))[finite]
    print(f"  street / straight-line ratio: median {np.median(ratio):.2f}, "
          f"unreachable pairs {int((~finite).sum())}")


if __name__ == "__main__":
    main()

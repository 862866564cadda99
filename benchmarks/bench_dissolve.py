"""Zone dissolve on the demo town: shapely.coverage_union_all against union_all.

Run: ``.venv/bin/python benchmarks/bench_dissolve.py`` (prints seconds, best of 3, per
level for today's zones; the coverage check runs once per project).
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from districting.intake import load_project
from districting.intake.checks import is_coverage
from districting.outputs.zones import dissolve_zones

DEMO = Path(__file__).resolve().parents[1] / "data" / "demo" / "project.toml"


def best_of(k: int, run) -> float:
    times = []
    for _ in range(k):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    inputs = load_project(DEMO)
    units = inputs.units[["unit_id", "geometry"]]
    geoms = units.geometry.to_numpy()
    print(f"coverage check (once per project): {best_of(3, lambda: is_coverage(geoms)):.3f} s")
    ids = np.array([*inputs.sites["site_id"], ""], dtype=object)
    for level in inputs.settings.levels:
        cur = inputs.current[level]
        zone_of = ids[np.where(cur >= 0, cur, len(ids) - 1)]
        for coverage in (False, True):
            seconds = best_of(3, lambda: dissolve_zones(units, zone_of, coverage=coverage))  # noqa: B023
            print(f"{level:<11} coverage_union={coverage!s:<5} dissolve {seconds:.3f} s")


if __name__ == "__main__":
    main()

"""Students per unit and year, school sites, today's zones, capacities and school names."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from .constants import (
    CAPACITY_RATIO,
    CURRENT_YEAR,
    LEVELS,
    MIN_SEATS,
    N_OVER,
    N_SITES,
    N_UNDER,
    OVER_UTIL,
    SEAT_STEP,
    TOTALS,
    UNDER_UTIL,
    YEARS,
)
from .geometry import (
    graph_voronoi,
    reading_order,
    snap,
    weighted_kmeans,
)


def student_counts(rng, n, land_use, hood, n_hood) -> dict[str, np.ndarray]:
    """Students per unit, level and year (int arrays keyed ``{level}_{year}``).

    Households per residential unit are lognormal; each neighbourhood has its own mix of
    ages and its own yearly trend (older neighbourhoods lose students). The subdivision's
    units are built in phases: a unit counts fully from a year after its build year, with
    middle and high school students arriving a few years after the young children.
    """
    res = land_use == "residential"
    sub = res & (hood == 1)
    homes = np.where(res, rng.lognormal(0.0, 0.45, n), 0.0)
    trend = rng.uniform(-0.025, 0.008, n_hood)
    trend[0] = -0.035  # the old town loses families
    years = np.arange(CURRENT_YEAR, YEARS[-1] + 1)
    build = rng.integers(CURRENT_YEAR - 5, YEARS[-1], n)  # phases 2021-2030
    lag = {"elementary": 0, "middle": 2, "high": 3}
    sub_share = {"elementary": 0.023, "middle": 0.02, "high": 0.015}  # x4: the build-out
    out: dict[str, np.ndarray] = {}
    for level in LEVELS:
        mix = rng.uniform(0.75, 1.25, n_hood)
        p = homes * mix[hood] * rng.lognormal(0.0, 0.15, n)
        p[sub] = 0.0
        # full build-out of a subdivision unit: well above a typical unit (young families)
        full = np.zeros(n)
        full[sub] = rng.poisson(sub_share[level] * TOTALS[level] * 4 / max(sub.sum(), 1), sub.sum())
        built = [
            np.floor(full * np.clip((year - build - lag[level]) / 2.0, 0.0, 1.0) + 0.5)
            for year in years
        ]
        # the rest of the town holds the current-year total less the subdivision's share
        rest = max(TOTALS[level] - int(built[0].sum()), 0)
        base = rng.multinomial(rest, p / p.sum()).astype(float)
        unit_trend = trend[hood] + rng.normal(0.0, 0.01, n)
        for t, year in enumerate(years):
            grown = np.floor(base * (1.0 + unit_trend) ** t + 0.5)
            out[f"{level}_{year}"] = np.where(sub, built[t], grown).astype(np.int64)
    return out


def sites_and_zones(rng, n, gi, gj, gw, xy, point, land_use, hood, hood_names, centres, counts):
    """Sites per level at weighted k-means centres, today's zones by graph Voronoi, and
    capacities that crowd a few schools and leave a few far under capacity today."""
    res = land_use == "residential"
    rows, zones = [], {}
    cur, years = str(CURRENT_YEAR), YEARS
    taken: dict[str, set] = {}
    for level in LEVELS:
        now = counts[f"{level}_{cur}"].astype(float)
        late = counts[f"{level}_{years[-1]}"].astype(float)
        w = np.where(res, 0.5 * now + 0.5 * late + 0.5, 0.0)
        k = N_SITES[level]
        c = weighted_kmeans(rng, xy, w, k)
        allowed = res & (hood != 1)  # today's schools stand in the built town
        roots = snap(c, xy, allowed)
        roots = roots[reading_order(shapely.points(xy[roots]), band=1500.0)]
        spacing = np.sqrt(((xy[roots][:, None] - xy[roots][None]) ** 2).sum(-1))
        np.fill_diagonal(spacing, np.inf)
        nearest = spacing.min(1)
        offsets = rng.uniform(0.0, 0.15, k) * nearest
        status = np.array(["open"] * k, dtype=object)
        zone = graph_voronoi(n, gi, gj, gw, roots, offsets)
        zone_now = np.bincount(zone, weights=now, minlength=k)
        new_root = relief = closing = None
        if level == "elementary":
            # the largest of the three schools nearest the subdivision is crowded today; of
            # the others, the one with the fewest students times the distance to its
            # nearest neighbour (small, close to another school) is under-used and closes
            near_sub = np.argsort(np.hypot(*(xy[roots] - centres[1]).T))[:3]
            relief = int(near_sub[np.argmax(zone_now[near_sub])])
            score = zone_now * nearest
            score[relief] = np.inf
            closing = int(np.argmin(score))
            status[closing] = "closing"
            in_sub = np.flatnonzero(res & (hood == 1))
            new_root = int(in_sub[np.argmin(np.hypot(*(xy[in_sub] - centres[1]).T))])
        plan_open = status != "closing"
        demand = np.array([counts[f"{level}_{y}"].sum() for y in years], float)
        sub_late = float(late[hood == 1].sum())
        cap = _capacities(
            rng, level, zone_now, relief, closing, plan_open, demand, new_root, sub_late
        )
        ids = [f"{level[0].upper()}{m + 1:02d}" for m in range(k + (new_root is not None))]
        zones[f"zone_{level}"] = np.array(ids)[zone]
        all_roots = np.r_[roots, [new_root] if new_root is not None else []].astype(int)
        all_status = list(status) + (["new"] if new_root is not None else [])
        names = _school_names(level, all_roots, hood, hood_names, xy, centres, taken)
        for m, root in enumerate(all_roots):
            rows.append(
                {
                    "site_id": ids[m],
                    "name": names[m],
                    "level": level,
                    "capacity": int(cap[m]),
                    "status": all_status[m],
                    "geometry": point[root],
                }
            )
    sites = gpd.GeoDataFrame(rows, geometry="geometry")
    return sites, zones


def _capacities(rng, level, zone_now, relief, closing, plan_open, demand, new_root, sub_late):
    """Seats per site: over-capacity and under-used schools today at set utilizations,
    the others sharing what is left so that the plan-year capacity (open and new sites)
    is CAPACITY_RATIO times the largest projected enrolment. The new site (last) is sized
    for the built-out subdivision (``sub_late`` students), at least an average school."""
    k = len(zone_now)
    order = np.argsort(-zone_now, kind="stable")
    over = [relief] if relief is not None else []
    over += [int(m) for m in order if m not in over and m != closing][: N_OVER[level] - len(over)]
    rest = [int(m) for m in rng.permutation(k) if m not in over and m != closing]
    under = rest[: N_UNDER[level]]
    normal = [m for m in range(k) if m not in over and m not in under and m != closing]
    util = np.zeros(k)
    util[over] = rng.uniform(*OVER_UTIL, len(over))
    util[under] = rng.uniform(*UNDER_UTIL, len(under))
    if closing is not None:
        util[closing] = rng.uniform(*UNDER_UTIL)
    cap = np.zeros(k)
    fixed = [*over, *under] + ([closing] if closing is not None else [])
    cap[fixed] = zone_now[fixed] / util[fixed]
    new_cap = 0.0
    if new_root is not None:
        new_cap = max(float(demand.max()) / (k - 1), 1.1 * sub_late)
    target = CAPACITY_RATIO * demand.max()
    left = target - cap[[m for m in fixed if plan_open[m]]].sum() - new_cap
    share = zone_now[normal] * rng.uniform(0.92, 1.08, len(normal))
    if normal:
        cap[normal] = left * share / share.sum()
    elif under:  # no school in between: the under-used ones take what is left
        cap[under] = (left + cap[under].sum()) * zone_now[under] / zone_now[under].sum()
    cap = np.r_[cap, [new_cap] if new_root is not None else []]
    return np.maximum(MIN_SEATS[level], np.round(cap / SEAT_STEP) * SEAT_STEP)


def _school_names(level, roots, hood, hood_names, xy, centres, taken) -> list[str]:
    """'<neighbourhood> Elementary School' etc.; a compass word tells apart two schools of
    one level in the same neighbourhood."""
    suffix = {"elementary": "Elementary School", "middle": "Middle School", "high": "High School"}[
        level
    ]
    names = []
    used = taken.setdefault(level, set())
    for r in roots:
        h = hood[r]
        name = f"{hood_names[h]} {suffix}"
        if name in used:
            dx, dy = xy[r] - centres[h]
            word = (
                ("East" if dx > 0 else "West")
                if abs(dx) > abs(dy)
                else ("North" if dy > 0 else "South")
            )
            name = f"{hood_names[h]} {word} {suffix}"
            extra = 2
            while name in used:
                name = f"{hood_names[h]} {word} {suffix} {extra}"
                extra += 1
        used.add(name)
        names.append(name)
    return names

"""Engine benchmark: prints tables of timings (speed is measured here, never asserted in tests).

Sections:

1. synthetic towns (``benchmarks/towns.py``): build s, solve s, rounds, cuts, objective,
   bound, gap, fragments before repair in round 1 (``plan.history``), peak memory;
2. the exact flow formulation of contiguity (Shirabe 2005, ``districting.engine.flow``) on
   the 500-unit, 25-school town against the default cut loop, with the time ratio;
3. re-solve after locking 5 units at 2,000 units (``districting.engine.Session``);
4. published capacitated p-median instances: Osman & Christofides (1994) 1-20 and
   Lorena & Senne (2004) SJC1-SJC3, time to proven optimum against the published optimum.

Each town runs in a fresh process (spawned), so its peak resident memory is its own.

Usage: ``.venv/bin/python benchmarks/bench_engine.py [--quick | --full] [--data DIR]
[--charge METRES]`` (``--charge``: the towns with a charge per student moved away from
today's zones, as in a "fewer moves" option).
"""

from __future__ import annotations

import argparse
import concurrent.futures as cf
import multiprocessing as mp
import resource
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path[:0] = [str(HERE), str(ROOT)]

#: Published optima of the Lorena & Senne (2004) SJC instances (unrounded Euclidean), as
#: listed in /work/shared/data/benchmarks/SOURCES.md. The Osman & Christofides optima are
#: read from line 1 of each instance file.
SJC_OPTIMA = {"SJC1": 17288.99, "SJC2": 33270.94, "SJC3a": 45335.16, "SJC3b": 40635.90,
              "SJC4a": 61925.51, "SJC4b": 52458.02}


# ---------------------------------------------------------------------------- helpers
def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux: KiB


def _in_child(fn, *args):
    """Run fn(*args) in a freshly spawned process (own memory peak); returns its dict."""
    ctx = mp.get_context("spawn")
    with cf.ProcessPoolExecutor(max_workers=1, mp_context=ctx) as pool:
        return pool.submit(fn, *args).result()


def _guarded(fn, *args) -> dict:
    """_in_child, with a failure reported as the row's status so the run carries on."""
    try:
        return _in_child(fn, *args)
    except Exception as exc:
        return {"status": f"error: {type(exc).__name__}: {exc}"}


def _table(rows: list[dict], cols: list[tuple[str, str, str]]) -> str:
    """cols: (key, header, format)."""
    cells = [[h for _, h, _ in cols]]
    for r in rows:
        line = []
        for key, _, fmt in cols:
            v = r.get(key, "")
            line.append(format(v, fmt) if isinstance(v, int | float | np.floating) and fmt else
                        str(v))
        cells.append(line)
    widths = [max(len(c[k]) for c in cells) for k in range(len(cols))]
    out = ["  ".join(c.rjust(w) for c, w in zip(cells[0], widths, strict=True))]
    out.append("  ".join("-" * w for w in widths))
    out += ["  ".join(c.rjust(w) for c, w in zip(row, widths, strict=True)) for row in cells[1:]]
    return "\n".join(out)


# ---------------------------------------------------------------------------- towns
class _FirstPlan:
    """Progress callback: seconds until the first valid plan was known."""

    def __init__(self) -> None:
        self.seconds = float("nan")

    def __call__(self, rnd) -> None:
        if self.seconds != self.seconds and np.isfinite(rnd.objective):
            self.seconds = rnd.seconds


def run_town(n_units: int, n_sites: int, seed: int, empty: float, gap: float,
             time_limit: float, charge: float = 0.0) -> dict:
    """One synthetic town solved; ``charge``: metres of travel per student moved away from
    today's zones (the stability weight of a "fewer moves" option)."""
    from towns import synthetic_town

    import districting

    problem, info = synthetic_town(n_units, n_sites, seed, empty, stability_weight=charge)
    first = _FirstPlan()
    t0 = time.perf_counter()
    plan = districting.solve(problem, gap=gap, time_limit=time_limit, progress=first)
    wall = time.perf_counter() - t0
    frag = plan.history[0].fragments if plan.history else 0
    return {
        "units": n_units, "sites": n_sites, "seed": seed, "empty": info["empty_share"],
        "status": plan.status, "build": plan.build_seconds, "first": first.seconds,
        "solve": plan.solve_seconds,
        "wall": wall, "rounds": plan.rounds, "cuts": plan.cuts, "objective": plan.objective,
        "bound": plan.bound, "gap": plan.gap * 100, "fragments": frag, "peak": _peak_mb(),
    }


TOWN_COLS = [("units", "units", "d"), ("sites", "sites", "d"), ("seed", "seed", "d"),
             ("empty", "empty", ".2f"), ("status", "status", ""), ("build", "build s", ".2f"),
             ("first", "1st plan s", ".2f"), ("solve", "solve s", ".2f"),
             ("rounds", "rounds", "d"), ("cuts", "cuts", "d"),
             ("objective", "objective", ",.0f"), ("bound", "bound", ",.0f"),
             ("gap", "gap %", ".4f"), ("fragments", "frag r1", "d"),
             ("peak", "peak MB", ".0f")]


# ---------------------------------------------------------------------------- flow
def run_flow(n_units: int, n_sites: int, seed: int, empty: float, gap: float,
             time_limit: float) -> dict:
    from towns import synthetic_town

    import districting
    from districting.engine.pyomo_route import build_model, solve_model

    problem, _ = synthetic_town(n_units, n_sites, seed, empty)
    t0 = time.perf_counter()
    plan = districting.solve(problem, gap=gap, time_limit=time_limit)
    cut_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    model = build_model(problem, contiguity="flow")
    build_s = time.perf_counter() - t0
    res = solve_model(model, gap=gap, time_limit=time_limit)
    flow_s = build_s + res.seconds
    flow_gap = ((res.objective - res.bound) / abs(res.objective) * 100
                if np.isfinite(res.objective) else float("inf"))
    return {"units": n_units, "sites": n_sites, "cut_status": plan.status, "cut_s": cut_s,
            "cut_obj": plan.objective, "flow_status": res.status, "flow_build": build_s,
            "flow_s": flow_s, "flow_obj": res.objective, "flow_bound": res.bound,
            "flow_gap": flow_gap, "ratio": flow_s / max(cut_s, 1e-9), "peak": _peak_mb()}


FLOW_COLS = [("units", "units", "d"), ("sites", "sites", "d"), ("cut_status", "cuts", ""),
             ("cut_s", "cuts s", ".2f"), ("cut_obj", "cuts objective", ",.0f"),
             ("flow_status", "flow", ""), ("flow_build", "flow build s", ".2f"),
             ("flow_s", "flow total s", ".2f"), ("flow_obj", "flow objective", ",.0f"),
             ("flow_bound", "flow bound", ",.0f"), ("flow_gap", "flow gap %", ".4f"),
             ("ratio", "flow/cuts time", ".1f"), ("peak", "peak MB", ".0f")]


# ---------------------------------------------------------------------------- re-solve
def run_resolve(n_units: int, n_sites: int, seed: int, empty: float, gap: float,
                time_limit: float, keep_weight: float = 0.0) -> dict:
    """Lock 5 student units on zone borders to the neighbouring zone, then re-solve;
    ``keep_weight``: metres charged per student moved against the first plan (the
    workbench's rerun charge, ``[solve] keep_option_weight``), 0 for a plain re-solve."""
    from towns import synthetic_town

    from districting.engine import Session

    problem, _ = synthetic_town(n_units, n_sites, seed, empty)
    session = Session(problem)
    first = session.solve(gap=gap, time_limit=time_limit)
    base = {"units": n_units, "sites": n_sites, "locked": 0,
            "first_s": first.build_seconds + first.solve_seconds}
    if not first.feasible:
        return {**base, "status": f"no first plan ({first.status})"}
    a = first.assignment
    e = problem.edges
    border = e[(a[e[:, 0]] != a[e[:, 1]])]
    rng = np.random.default_rng(seed)
    rng.shuffle(border)
    roots = set(problem.roots.tolist())
    locks = np.full(problem.n_units, -1, np.int64)
    for u, v in border.tolist():
        if (locks >= 0).sum() == 5:
            break
        if u in roots or locks[u] >= 0 or problem.demand[0, u] <= 0:
            continue
        if problem.allowed[u, a[v]]:
            locks[u] = a[v]
    changed = problem.replace(locks=locks)
    if keep_weight:
        changed = changed.replace(anchor=np.asarray(a, np.int64), anchor_weight=keep_weight)
    session.update(changed)
    seen = _FirstPlan()
    t0 = time.perf_counter()
    second = session.solve(gap=gap, time_limit=time_limit, progress=seen)
    wall = time.perf_counter() - t0
    return {**base, "charge": keep_weight, "status": second.status, "resolve_s": wall,
            "plan_s": seen.seconds,
            "rounds": second.rounds, "objective": second.objective,
            "change": (second.objective - first.objective) / first.objective * 100,
            "gap": second.gap * 100, "locked": int((locks >= 0).sum())}


RESOLVE_COLS = [("units", "units", "d"), ("sites", "sites", "d"), ("locked", "locked", "d"),
                ("charge", "charge m/student", ",.0f"),
                ("first_s", "first solve s", ".2f"), ("status", "status", ""),
                ("plan_s", "valid plan after lock s", ".3f"), ("resolve_s", "re-solve s", ".3f"),
                ("rounds", "rounds", "d"),
                ("objective", "objective", ",.0f"), ("change", "cost change %", ".3f"),
                ("gap", "gap %", ".4f")]


# ---------------------------------------------------------------------------- literature
def read_osman_christofides(path: Path):
    """pmedcap1 format: 'number optimum', 'n p Q', then n lines 'id x y demand'.

    Distances are Euclidean rounded down (the instances' convention).
    """
    lines = path.read_text().split("\n")
    optimum = float(lines[0].split()[1])
    n, p, q = (int(float(v)) for v in lines[1].split()[:3])
    rows = np.array([[float(v) for v in ln.split()] for ln in lines[2:2 + n]])
    xy, demand = rows[:, 1:3], rows[:, 3]
    dist = np.floor(np.linalg.norm(xy[:, None] - xy[None], axis=2))
    return dist, demand, np.full(n, float(q)), p, optimum


def read_lorena_senne(path: Path):
    """SJC format: 'n p', then n lines 'x y capacity demand'; unrounded Euclidean."""
    tokens = path.read_text().split()
    n, p = int(tokens[0]), int(tokens[1])
    rows = np.array(tokens[2:2 + 4 * n], dtype=float).reshape(n, 4)
    xy, cap, demand = rows[:, :2], rows[:, 2], rows[:, 3]
    dist = np.linalg.norm(xy[:, None] - xy[None], axis=2)
    return dist, demand, cap, p, SJC_OPTIMA[path.stem]


def run_literature(kind: str, path: str, time_limit: float) -> dict:
    import districting
    from districting import Problem

    reader = read_osman_christofides if kind == "oc" else read_lorena_senne
    dist, demand, cap, p, optimum = reader(Path(path))
    # cost per student = distance / demand, so the objective counts plain distance.
    with np.errstate(divide="ignore", invalid="ignore"):
        cost = np.where(demand[:, None] > 0, dist / demand[:, None], dist)
    problem = Problem.from_arrays(cost, demand, cap, p=p, distance=dist)
    t0 = time.perf_counter()
    plan = districting.solve(problem, gap=1e-6, time_limit=time_limit)
    wall = time.perf_counter() - t0
    found = plan.objective
    tol = 0.5 if kind == "oc" else 0.01  # integer optima; SJC printed to 2 decimals
    return {"instance": Path(path).stem, "n": len(demand), "p": p, "status": plan.status,
            "seconds": wall, "objective": found, "published": optimum,
            "match": "yes" if abs(found - optimum) <= tol else "NO", "gap": plan.gap * 100}


LIT_COLS = [("instance", "instance", ""), ("n", "n", "d"), ("p", "p", "d"),
            ("status", "status", ""), ("seconds", "seconds", ".2f"),
            ("objective", "objective", ",.2f"), ("published", "published", ",.2f"),
            ("match", "match", ""), ("gap", "gap %", ".4f")]


def literature_files(data: Path, quick: bool) -> list[tuple[str, Path]]:
    oc_dir, sjc_dir = data / "orlib_pmedcap", data / "lorena_senne_sjc"
    oc = [oc_dir / f"pmedcap1_{k:02d}.txt" for k in range(1, 21)]
    sjc = [sjc_dir / f"{name}.dat" for name in ("SJC1", "SJC2", "SJC3a", "SJC3b")]
    if quick:
        oc, sjc = oc[:3], sjc[:1]
    return [("oc", f) for f in oc if f.exists()] + [("sjc", f) for f in sjc if f.exists()]


def default_data() -> Path:
    for cand in (ROOT / "tests" / "data", Path("/work/shared/data/benchmarks")):
        if (cand / "orlib_pmedcap").is_dir() and len(list((cand / "orlib_pmedcap").glob(
                "pmedcap1_*.txt"))) >= 20:
            return cand
    return ROOT / "tests" / "data"


# ---------------------------------------------------------------------------- main
def town_grid(args) -> list[tuple[int, int, int, float]]:
    if args.quick:
        return [(500, 10, 1, 0.3), (2000, 25, 1, 0.3)]
    if args.full:
        return [(n, m, s, e) for n in (500, 2000, 5000, 10000) for m in (10, 25, 50)
                for s in (1, 2, 3) for e in (0.3, 0.68)]
    return [(500, 10, 1, 0.3), (500, 25, 1, 0.3), (2000, 25, 1, 0.3), (2000, 25, 2, 0.68),
            (5000, 25, 1, 0.3), (5000, 50, 1, 0.68), (10000, 50, 1, 0.3),
            (10000, 50, 2, 0.68)]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    size = ap.add_mutually_exclusive_group()
    size.add_argument("--quick", action="store_true", help="a few small cases only")
    size.add_argument("--full", action="store_true",
                      help="every size x schools x 3 seeds x 2 empty shares")
    ap.add_argument("--data", type=Path, default=None,
                    help="folder with orlib_pmedcap/ and lorena_senne_sjc/")
    ap.add_argument("--gap", type=float, default=1e-4, help="relative gap for the towns")
    ap.add_argument("--time-limit", type=float, default=120.0, help="per town solve, s")
    ap.add_argument("--charge", type=float, default=0.0,
                    help="metres per student moved away from today's zones, for the towns")
    ap.add_argument("--flow-time", type=float, default=120.0, help="flow formulation limit")
    ap.add_argument("--lit-time", type=float, default=60.0, help="per published instance")
    ap.add_argument("--skip", nargs="*", default=[],
                    choices=["towns", "flow", "resolve", "literature"])
    args = ap.parse_args(argv)
    if args.quick:
        args.flow_time = min(args.flow_time, 30.0)
        args.lit_time = min(args.lit_time, 30.0)
    print("Engine benchmark (times are wall-clock on this machine; other work on it slows "
          "them)\n", flush=True)

    if "towns" not in args.skip:
        rows = []
        for n, m, s, e in town_grid(args):
            row = _guarded(run_town, n, m, s, e, args.gap, args.time_limit, args.charge)
            rows.append({"units": n, "sites": m, "seed": s, "empty": e, **row})
            print(_table(rows[-1:], TOWN_COLS).split("\n")[-1], flush=True)
        print("\nSynthetic towns (gap requested "
              f"{args.gap:g}; charge {args.charge:,.0f} m per student moved; "
              "frag r1 = disconnected pieces in round 1 before repair)")
        print(_table(rows, TOWN_COLS), "\n", flush=True)

    if "flow" not in args.skip:
        row = _guarded(run_flow, 500, 25, 1, 0.3, args.gap, args.flow_time)
        print(f"Flow formulation (Shirabe 2005) vs cut loop, limit {args.flow_time:g} s")
        print(_table([row], FLOW_COLS), "\n", flush=True)

    if "resolve" not in args.skip:
        rows = [_guarded(run_resolve, 2000, 25, 1, 0.3, args.gap, args.time_limit, w)
                for w in (0.0, 3000.0)]
        print("Re-solve after locking 5 border units (Session keeps model, cuts and, when it "
              "holds, the bound); charge: per student moved against the plan before the lock")
        print(_table(rows, RESOLVE_COLS), "\n", flush=True)

    if "literature" not in args.skip:
        data = args.data or default_data()
        files = literature_files(data, args.quick)
        if not files:
            print(f"No published instances found under {data} (use --data DIR).")
        else:
            rows = []
            for kind, f in files:
                row = _guarded(run_literature, kind, str(f), args.lit_time)
                rows.append({"instance": f.stem, **row})
                print(_table(rows[-1:], LIT_COLS).split("\n")[-1], flush=True)
            print("\nCapacitated p-median: Osman & Christofides (1994), ITOR 1(3) 317-336; "
                  "Lorena & Senne (2004), C&OR 31(6) 863-876")
            print(f"(data from {data}; limit {args.lit_time:g} s each)")
            print(_table(rows, LIT_COLS), flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

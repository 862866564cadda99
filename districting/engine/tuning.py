"""Tuning constants of the engine, named and explained in one place.

None of them changes what is proven (every bound, cut and fixing stays valid); they decide
where the time goes. The measurements behind them are in ``benchmarks/bench_engine.py``.
"""

from __future__ import annotations

#: Tolerance on loads, costs and bounds (students, cost units).
TOL = 1e-6

# ---- threads
#: Threads HiGHS may use in one solve. A sweep's workers (one per core) set 1 through
#: :func:`use_threads` before their first solve: two solves of two threads each on two cores
#: ran 2-5 times slower each than alone (benchmarks/bench_sweep.py, 2026-12-03).
HIGHS_THREADS = 2


def use_threads(n: int) -> None:
    """Threads for the HiGHS solves of this process from now on (at least 1). HiGHS keeps
    one thread pool per process: call this before the first solve."""
    global HIGHS_THREADS
    HIGHS_THREADS = max(1, int(n))


# ---- building the model (districting.engine.formulation, highs_route)
#: Up to this many candidate pairs the x <= y linking rows are written one per pair (the
#: strong form); above it the capacity rows link them in aggregate (a smaller model).
LINK_LIMIT = 300_000
#: Columns above which HiGHS's presolve skips probing: probing grows with the binaries and
#: overran the time limit on large models (seen: 90 s expected for 5,000 units x 25
#: schools). Above it, too, fix-and-resolve runs only when nothing else found a plan (its
#: restricted MIPs can stall HiGHS there).
PROBE_LIMIT = 60_000

#: Share of the time left, at most, for the first LP relaxation (its bound, the LP's own
#: plan, reduced costs). On Lorena & Senne's SJC4a (402 x 402 pairs) it took over 100 s
#: (HiGHS's presolve checks the clock rarely there: the limit is a request, not a promise);
#: the integer rounds solve their own root LP and need none of it.
LP_SHARE = 0.5
#: Columns (of an LP) or rows (of a MIP) above which a time-limited run goes without HiGHS's
#: presolve: at 162,006 columns (SJC4a) the LP's presolve ran 90-277 s against limits of
#: 3-20 s; at 90,000 (SJC3a) it finished the LP in 18 s, where without it the LP did not
#: finish in 14 s. A town's MIP has few rows (10,374 at 10,000 units x 50 schools), and its
#: presolve there shortens HiGHS's set-up.
LP_PRESOLVE_LIMIT = 150_000
#: Seconds per row a MIP's presolve may take before it looks at the clock; a time-limited
#: MIP whose rows times this exceed its limit runs without presolve. Lorena & Senne's
#: SJC4b (149,400 rows, below LP_PRESOLVE_LIMIT): an exact round given 7.0 s took 13.8 s
#: (9.2e-5 s per row); SJC4a's MIP 11.5 s at 162,410 rows (7.1e-5).
MIP_PRESOLVE_PER_ROW = 1e-4

# ---- root cutting planes (highs_route.HighsRoute.strengthen)
#: Share of the time left, at most, for root cutting planes on the LP.
ROOT_SHARE = 0.15
#: Seconds, at most, for them.
ROOT_MAX = 10.0
#: Rounds of root cuts, at most.
ROOT_ROUNDS = 200
#: A round "stalls" when it closes less than this share of the gap to the best plan;
#: three stalls running end the cutting.
ROOT_MIN_GAIN = 0.005
#: Root cuts that together close less than this share of the gap are taken out again (they
#: slowed the integer rounds more than they helped on the demo town's elementary level).
ROOT_KEEP_SHARE = 0.1

# ---- large-neighbourhood search (districting.engine.neighbourhood)
#: Fewer sites than this: the exact rounds alone (neighbourhoods hold 3-8 zones).
LNS_MIN_SITES = 8
#: Share of the time left, at most, for the large-neighbourhood search.
LNS_SHARE = 0.35
#: Columns above which one exact round takes most of a minute (HiGHS presolve alone: 45 s
#: at 350,000 columns), so the search runs at once and gets ``LNS_SHARE_BIG`` of the time.
LNS_BIG = 150_000
LNS_SHARE_BIG = 0.9
#: Zones per neighbourhood, grown in turn when a pass over every seed finds nothing.
LNS_SIZES = (3, 5, 8)
#: Seconds, at most, for one neighbourhood's exact solve, per zone in it.
LNS_SECONDS_PER_ZONE = 0.4

# ---- exact rounds and heuristics (districting.engine.session, heuristics)
#: A repaired plan is "far" from the bound when its gap exceeds this many times the gap
#: asked, and at least ``FAR_GAP_MIN`` (0.1%): then the heuristics get another turn.
FAR_GAP_FACTOR = 10
FAR_GAP_MIN = 1e-3
#: Until a valid plan exists, each exact round gets at most this share of the time left
#: (and at least ``FIRST_ROUND_MIN`` seconds), so repair and heuristics get their turn.
FIRST_ROUND_SHARE = 0.25
FIRST_ROUND_MIN = 2.0
#: Seconds per column HiGHS's MIP spends before it first checks the clock (set-up and a
#: presolve that does not look at it). With a plan in hand, an exact round starts only when
#: at least this times the model's columns is left: on a town of 10,000 units and 50
#: schools (350,850 columns) a round started with 1.1 s left ran 6.3 s.
ROUND_SETUP_PER_COLUMN = 2e-5
#: Fix-and-resolve: reduced-cost thresholds (relative to the LP bound) of the columns kept,
#: widened in turn when the restricted MIP is infeasible.
FIX_LEVELS = (2e-4, 2e-3, 2e-2, float("inf"))
#: Gap asked of the restricted MIPs of fix-and-resolve, at least: with contiguity, and
#: without (one answer ends the heuristic there, the exact rounds prove the rest).
FIX_GAP = 2e-3
FIX_GAP_FLAT = 1e-2
#: Each restricted MIP gets at most this share of the time left, at least ``SUB_MIN`` s.
SUB_SHARE = 0.3
SUB_MIN = 0.05
#: Share of the time left, at most, for fix-and-resolve and its polish together: its
#: restricted MIPs ran on until half a second before the limit, leaving the exact rounds no
#: turn (demo elementary, fewer moves, along streets: 60 s with no exact round).
FIX_SHARE = 0.4
#: Rounds, at most, of fix-and-resolve and of the polish around the best plan.
FIX_ROUNDS = 60
POLISH_ROUNDS = 40
#: Gap asked of the polish MIPs, at most.
POLISH_GAP = 1e-4
#: The polish stops when fewer seconds than this are left.
POLISH_RESERVE = 0.5

# ---- the first plan without contiguity (districting.engine.greedy)
#: Seconds, at most, and share of the time left for its moves and swaps.
START_MAX = 2.0
START_SHARE = 0.1

# ---- the exact flow formulation (districting.engine.flow_stage)
#: Sites, at most, for the flow stage. Measured on the demo town (benchmarks/bench_proof.py,
#: straight-line travel): two schools (high, fewer moves) the flow model proves the optimum
#: in about 25 s where the cut loop stays 11% above it; four (middle) it found no better
#: plan in 60 s, with a weaker bound than the cut loop's after 10 s.
FLOW_MAX_SITES = 2
#: Flow arcs, at most (the demo's high level: 17,168 arcs for 1,557 units, 2 schools).
FLOW_MAX_ARCS = 60_000
#: Share of the time left given to it; the exact rounds get the rest.
FLOW_SHARE = 0.8

#: The zones-without-contiguity restart (stage 2b): its solve gets this share of the time
#: left, at most FREE_MAX seconds (the demo's levels solve free in 0.5-10 s; measured).
FREE_SHARE = 0.2
FREE_MAX = 20.0

#: Each exact round's own MIP gap, as a share of the gap asked. The MIP's gap is measured
#: against its own best answer, which may be a cheaper disconnected one: stopped at the gap
#: asked, its bound stays below (that answer) x (1 - gap) and never proves the plan in
#: hand while such answers exist (2,000 x 25 rerun after a lock: bound flat for 45 s at
#: 0.055%). So a round goes on to this finer gap, and ends as soon as its bound proves the
#: plan in hand within the gap asked (the start's cost; HighsRoute.solve).
ROUND_GAP_SHARE = 0.1

#: The exact rounds "stall" when the last STALL_ROUNDS rounds lifted the bound by less than
#: STALL_SHARE of the gap still open; then the flow stage may race (few sites only). Demo
#: high "fewer moves": with straight-line travel a round lifts 3-8% of the open gap; along
#: streets a round closes a third of it and the cut loop proves it in 3-7 s (measured).
STALL_ROUNDS = 1
STALL_SHARE = 0.25

#: The race stage uses the SCIP branch-and-cut tree up to this many sites (with PySCIPOpt;
#: measured better than the flow route on the demo's two- and four-school levels, and the
#: cut loop's plans better above, where the neighbourhood search runs: LNS_MIN_SITES).
TREE_MAX_SITES = 8

#: Pair screening (engine.pair_screen): pairs per unit in the first LP, and at most this
#: many entering per unit in each pricing round (Lorena & Senne's SJC4a: 4 per round 9
#: rounds in 4.0 s, 16 per round 7 in 3.8 s, 64 per round 6 in 5.6 s).
SCREEN_NEAREST = 8
SCREEN_ADD = 16
#: ... and it runs when the model has at least this many pairs of candidate sites (each a
#: linking row). Below, the whole LP is quick (Osman & Christofides' 10,000 pairs: 0.2 s),
#: and on those instances the screen with its cores was mixed (screen_stage's docstring).
SCREEN_MIN_PAIRS = 30_000
#: Core plans after the screen: the pairs within these shares of the LP bound, narrowest
#: first, each core solved in this share of the time left.
CORE_GAPS = (0.002, 0.01)
CORE_SHARE = 0.3
#: A core's solve ends once its plan is within this share of its own bound: its plan is
#: what it is for, and the model of the whole problem proves the rest.
CORE_STOP_GAP = 2e-3

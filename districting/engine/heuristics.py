"""Heuristics of the solve: valid plans quickly, so the exact rounds have an upper bound.

- :func:`prepare_start`: a previous plan adapted to this problem and repaired;
- :func:`constructive` and :func:`rounded`: today's zones, or the LP's own choice per unit;
- :func:`fix_and_resolve`: MIP answers on a restricted copy of the model, with the units
  still cut off losing their pair each round; then :func:`polish` around the best plan.

Every plan found goes through :meth:`~districting.engine.run.Run.consider` (checked before
it is kept). Cuts found here are valid for the exact model and stay in it.
"""

from __future__ import annotations

import numpy as np

from ..problem import Problem
from ..rules import open_sites
from .connectivity import UnitGraph, fragments, plan_checks, site_trees
from .cuts import separator_cuts
from .improve import relocate
from .repair import make_valid, reassign_empty, repair
from .run import SolveState
from .tuning import (
    FIX_GAP,
    FIX_GAP_FLAT,
    FIX_LEVELS,
    FIX_ROUNDS,
    FIX_SHARE,
    POLISH_GAP,
    POLISH_RESERVE,
    POLISH_ROUNDS,
    SUB_MIN,
    SUB_SHARE,
    TOL,
)

__all__ = ["prepare_start", "constructive", "rounded", "fix_and_resolve", "polish",
           "cut_and_forbid", "claim_tree_paths"]


def prepare_start(problem: Problem, graph: UnitGraph | None, start) -> np.ndarray | None:
    """A previous plan adapted to this problem: locks applied, units on sites they may no
    longer use moved to their cheapest usable site, roots put back, then repaired."""
    if start is None:
        return None
    a = np.asarray(start, dtype=np.int64).copy()
    n, m = problem.n_units, problem.n_sites
    if a.shape != (n,):
        return None
    allowed = problem.allowed
    li = np.flatnonzero(problem.locks >= 0)
    a[li] = problem.locks[li]
    bad = (a < 0) | (a >= m)
    bad[~bad] = ~allowed[np.flatnonzero(~bad), a[~bad]]
    if bad.any():
        opened = problem.always_open | np.isin(np.arange(m), a[~bad])
        wc = np.where(allowed & opened[None, :], problem.weighted_cost, np.inf)
        for i in np.flatnonzero(bad).tolist():
            j = int(np.argmin(wc[i]))
            if not np.isfinite(wc[i, j]):
                return None
            a[i] = j
    if problem.roots is not None:
        opened = open_sites(problem, a)
        rj = np.flatnonzero(opened & (problem.roots >= 0))
        a[problem.roots[rj]] = rj
    if graph is not None:
        fixed = repair(problem, graph, a)
        if fixed is not None:
            a = fixed
        if plan_checks(problem, a, graph):  # e.g. a lock pushed a school over its cap
            valid = make_valid(problem, graph, a)
            if valid is not None:
                a = valid
    return a


def rounded(problem: Problem, backend) -> np.ndarray:
    """Each unit to the site its LP value is largest on; units the model leaves out (those
    without students) and units without a column keep the constructive site."""
    a = constructive(problem)
    lp = backend.relaxation()
    if lp is None:
        return a
    order = np.argsort(lp[1], kind="stable")  # the largest value is written last
    a[backend.xi[order]] = backend.xj[order]
    return a


def constructive(problem: Problem) -> np.ndarray:
    """Today's site for every unit that has a usable one, else the nearest usable site."""
    allowed = problem.allowed  # closed sites are not allowed
    near = np.argmin(np.where(allowed, problem.travel, np.inf), axis=1)
    cur = problem.current
    ok = cur >= 0
    ok[ok] = allowed[np.flatnonzero(ok), cur[ok]]
    return np.where(ok, cur, near)


def claim_tree_paths(a: np.ndarray, drop: np.ndarray, parents: np.ndarray) -> np.ndarray:
    """Units left out of the MIP (``drop``) on the tree path from a zone's units to its root
    join that zone (when one zone alone claims them), so tree-shaped zones stay connected."""
    a = np.asarray(a, np.int64).copy()
    m = parents.shape[0]
    claims = np.zeros(len(a), np.int64)
    owner = np.full(len(a), -1, np.int64)
    for j in range(m):
        par = parents[j]
        cur = np.flatnonzero((a == j) & ~drop)
        need = np.zeros(len(a), bool)
        while len(cur):
            q = par[cur]
            q = q[(q >= 0)]
            q = q[drop[q] & ~need[q]]
            need[q] = True
            cur = q
        claims += need
        owner[need] = j
    one = drop & (claims == 1)
    a[one] = owner[one]
    return a



def fix_and_resolve(st: SolveState, max_rounds: int = FIX_ROUNDS) -> None:
    """Heuristic: a valid plan from MIP answers on a restricted copy of the model.

    The model is restricted (temporary column bounds, undone at the end) to the pairs
    whose LP reduced cost is small (plus the pairs the LP or the best plan uses). After
    each answer the empty units are handed out again; every unit still cut from its
    zone's root loses that pair (its column is turned off) and the separator cuts of
    the answer are added (they are valid for the exact model too), then the MIP is
    solved again, warm-started. Each round removes pairs, so the loop ends; when the
    restriction makes the MIP infeasible the reduced-cost threshold widens, and at the
    widest the last batch of removals is halved (the units farthest from their site
    stay removed). Any contiguous answer is checked and becomes a candidate plan.
    """
    problem, graph, backend, run, cancel = st.problem, st.graph, st.backend, st.run, st.cancel
    lp = backend.relaxation()
    if lp is None:
        return
    end = _share_end(run, FIX_SHARE)
    z, xv, rc = lp
    k = len(xv)
    scale = max(abs(z), 1.0)
    levels = FIX_LEVELS
    level = 0
    must = (xv > 1e-6)
    if run.best is not None:
        c = backend.column(np.arange(problem.n_units), run.best)
        must[c[c >= 0]] = True
    tree_off = None
    if graph is not None and problem.roots is not None:
        if not backend.has_trees:
            st.parents = site_trees(problem, graph)
            backend.tree_rows(st.parents)
        parents = st.parents
        tree_off = np.zeros(k, bool)
        tree_off[backend.tree_off] = True
    backend.trees(tree_off is not None)
    forbid = np.zeros(k, bool)
    batch = np.zeros(0, np.int64)
    # without contiguity one answer ends the heuristic: a loose gap gets it quickly,
    # and the exact rounds prove the rest from it
    hgap = max(st.gap, FIX_GAP if graph is not None else FIX_GAP_FLAT)
    wc = problem.weighted_cost
    for _ in range(max_rounds):
        if cancel is not None and cancel():
            break
        left = _left_until(run, end)
        if left is not None and left <= 0:
            break
        keep = must | (rc <= levels[level] * scale)
        off = ~keep | forbid
        if tree_off is not None:
            off |= tree_off & ~must
        backend.restrict(np.flatnonzero(off))
        cap_s = None if left is None else max(SUB_MIN, SUB_SHARE * left)
        ans = backend.solve(hgap, cap_s, run.best, cancel)
        if ans.assignment is None:
            if ans.status not in ("infeasible", "time_limit"):
                break  # cancelled or an error: the exact side reports it
            if ans.status == "time_limit" and tree_off is None:
                break  # the exact rounds get the time that is left
            if level < len(levels) - 1:
                level += 1
            elif tree_off is not None:
                tree_off, level = None, 0  # zones need not follow the trees
                backend.trees(False)
            elif len(batch) > 1:
                forbid[batch] = False
                far = np.argsort(-wc[backend.xi[batch], backend.xj[batch]], kind="stable")
                batch = batch[far[: len(batch) // 2]]
                forbid[batch] = True
            else:
                break
            continue
        a = ans.assignment
        if graph is None:
            run.consider(a)
            break
        a = claim_tree_paths(a, backend.drop, parents) if tree_off is not None else a
        b, detached = reassign_empty(problem, graph, a)
        if not detached.any():
            if run.consider(b):
                run.consider(relocate(problem, graph, b))
            break
        fixed = repair(problem, graph, a)
        if fixed is not None and run.consider(fixed):
            run.consider(relocate(problem, graph, run.best))
            break
        n_frag = len(fragments(problem, graph, a))
        added, batch = cut_and_forbid(st, a, detached, forbid)
        run.record(added, n_frag)
        if not len(batch) and not added:
            break
    backend.trees(False)
    backend.unrestrict()
    if graph is not None and run.best is not None:
        polish(st, min(st.gap, POLISH_GAP), end=end)


def _share_end(run, share: float) -> float | None:
    """The moment (seconds into the solve) when ``share`` of the time left is used."""
    left = run.left()
    return None if left is None else run.elapsed() + share * max(left, 0.0)


def _left_until(run, end: float | None) -> float | None:
    """Seconds left before ``end`` (and before the solve's limit)."""
    return None if end is None else min(run.left(), end - run.elapsed())


def polish(st: SolveState, hgap: float, max_rounds: int = POLISH_ROUNDS,
           end: float | None = None) -> None:
    """Improve the best plan by MIPs over its neighbourhood (heuristic).

    Columns are restricted to each unit's own zone and the zones of its neighbours in
    the best plan; units left cut off lose that pair and the MIP is solved again
    (fix-and-resolve); each better contiguous plan recentres the neighbourhood. It stops
    at ``end`` (seconds into the solve), when given.
    """
    problem, graph, backend, run, cancel = st.problem, st.graph, st.backend, st.run, st.cancel
    n = problem.n_units
    k = len(backend.xi)
    forbid = np.zeros(k, bool)
    centre = seen = None
    for _ in range(max_rounds):
        if cancel is not None and cancel():
            break
        left = run.left()
        if left is not None and left <= POLISH_RESERVE:
            break
        if end is not None:
            left = _left_until(run, end)
            if left <= SUB_MIN:
                break
        if centre is None or not np.array_equal(centre, run.best):
            centre = run.best.copy()
            forbid[:] = False
            nb = np.zeros(k, bool)
            c = backend.column(np.arange(n), centre)
            nb[c[c >= 0]] = True
            c = backend.column(graph.u, centre[graph.v])
            nb[c[c >= 0]] = True
        backend.restrict(np.flatnonzero(~nb | forbid))
        cap_s = None if left is None else max(SUB_MIN, SUB_SHARE * left)
        before = run.best_obj
        ans = backend.solve(hgap, cap_s, run.best, cancel)
        if ans.assignment is None and ans.status == "infeasible" and forbid.any():
            forbid[:] = False  # the removals went too far; the cuts found stay
            continue
        if (ans.assignment is None or ans.objective >= before - TOL * max(1.0, before)
                or (seen is not None and np.array_equal(ans.assignment, seen))):
            break  # no better answer, or the same one again (its cuts cannot bite)
        a = seen = ans.assignment
        b, detached = reassign_empty(problem, graph, a)
        if not detached.any():
            if run.consider(b):
                run.consider(relocate(problem, graph, run.best))
                continue
            break
        fixed = repair(problem, graph, a)
        if fixed is not None:
            run.consider(relocate(problem, graph, fixed))
        if run.consider(make_valid(problem, graph, a)):
            continue  # a better plan: recentre on it
        added, cols = cut_and_forbid(st, a, detached, forbid)
        run.record(added, len(fragments(problem, graph, a)))
        if not len(cols):
            break
    backend.unrestrict()

def cut_and_forbid(st: SolveState, a: np.ndarray, detached: np.ndarray,
                   forbid: np.ndarray) -> tuple[int, np.ndarray]:
    """Heuristic step: add the answer's separator cuts (valid for the exact model too)
    and mark the columns of units still cut off; returns (cuts added, newly forbidden)."""
    backend = st.backend
    cuts = separator_cuts(st.problem, st.graph, a, only=detached, passable=st.passable,
                          dropped=st.dropped)
    added = backend.add_cuts(cuts)
    st.cuts.extend(cuts)
    units = np.flatnonzero(detached)
    cols = backend.column(units, a[units])
    batch = cols[(cols >= 0) & ~forbid[np.maximum(cols, 0)]]
    forbid[batch] = True
    return added, batch


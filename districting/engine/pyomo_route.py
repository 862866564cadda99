"""The Pyomo reference route: the formulation written as a Pyomo model, any solver Pyomo drives.

:func:`build_model` writes every column and row family of
:mod:`districting.engine.formulation` (the same rows the HiGHS array route passes to
highspy) as Pyomo components; :func:`solve_model` runs any solver Pyomo drives and reads the
answer back as a :class:`ModelResult`; :class:`PyomoRoute` is the route the solve session
drives.

Sets and variables:

- ``m.I`` units, ``m.J`` sites that may be open (not closed), ``m.J_cand`` candidate sites
  (opening decided by the solver), ``m.P`` the pairs with a column;
- ``m.x[i, j]`` binary on ``m.P``; ``m.y[j]`` binary on ``m.J``, fixed to 1 for the
  always-open sites.

Contiguity comes in two interchangeable forms: separator cuts added in rounds by the solve
loop (:func:`contiguity_cuts`, :func:`add_separator_cut`; Validi, Buchanan & Lykhovyd,
Operations Research 70(2) 2022, 867-892), or the single-commodity flow formulation of Shirabe
(2005) (:func:`contiguity_flow`), which is exact in one solve and the baseline the cut loop is
measured against in ``benchmarks/``.

``build_model(..., elastic=...)`` gives chosen families a non-negative slack per row
(``m.<family>_slack``, indexed by the row's key: (t, j) for capacity and floor, the unit for
locks, 0 for the move limit); :mod:`districting.engine.diagnose` uses it to explain an
infeasible problem in words.
"""

from __future__ import annotations

import inspect
import time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import pyomo.environ as pyo
from pyomo.opt import TerminationCondition

from ..problem import Problem
from .answer import Answer
from .connectivity import Cut
from .flow import contiguity_flow, set_start_flow
from .formulation import ELASTIC_FAMILIES, Formulation, RowBlock, formulate, separator_rows
from .precheck import unbuildable

__all__ = [
    "ModelResult",
    "PyomoRoute",
    "build_model",
    "solve_model",
    "add_separator_cut",
    "contiguity_cuts",
    "contiguity_flow",
]

#: Name of each solver's relative MIP gap option (Pyomo passes ``options`` through as is).
_GAP_OPTION = {
    "appsi_highs": "mip_rel_gap",
    "highs": "mip_rel_gap",
    "cbc": "ratioGap",
    "glpk": "mipgap",
    "gurobi": "MIPGap",
    "gurobi_direct": "MIPGap",
    "gurobi_persistent": "MIPGap",
    "appsi_gurobi": "MIPGap",
    "cplex": "mip_tolerances_mipgap",
    "cplex_direct": "mipgap",
    "appsi_cplex": "mip_tolerances_mipgap",
    "scip": "limits/gap",
    "xpress": "miprelstop",
}


@dataclass(frozen=True)
class ModelResult:
    """What a solver proved about a model built by :func:`build_model`.

    ``status`` is "optimal" | "feasible" | "time_limit" | "infeasible" | "error";
    ``assignment[i]`` the site of unit i (-1 without a solution); ``bound`` the best lower
    bound the solver proved (-inf when it reported none); ``message`` says in words what went
    wrong when the status is "error".
    """

    status: str
    assignment: np.ndarray
    open_sites: np.ndarray
    objective: float
    bound: float
    seconds: float
    message: str = ""

    @property
    def has_solution(self) -> bool:
        return bool(np.all(self.assignment >= 0))


# ---------------------------------------------------------------------------- building
def build_model(
    problem: Problem,
    contiguity: str = "cuts",
    *,
    elastic: Iterable[str] = (),
) -> pyo.ConcreteModel:
    """The Pyomo model of ``problem``: every family of :func:`formulate`, one component each.

    ``contiguity`` is "cuts" (an empty cut list the solve loop fills, see
    :func:`add_separator_cut`), "flow" (Shirabe's exact flow formulation) or "none".
    Contiguity applies only when the problem has edges. ``elastic`` names families from
    :data:`ELASTIC_FAMILIES` to build with a slack (for diagnosis).

    Raises ``ValueError`` with the reasons in words when the problem cannot even be written
    down (a unit with no allowed school, a lock to a closed school...).
    """
    if contiguity not in ("cuts", "flow", "none"):
        raise ValueError(f"contiguity must be 'cuts', 'flow' or 'none'; got {contiguity!r}")
    elastic = frozenset(elastic)
    unknown = elastic - set(ELASTIC_FAMILIES)
    if unknown:
        raise ValueError(f"elastic families must be among {ELASTIC_FAMILIES}; got {unknown}")
    reasons = unbuildable(problem)
    if reasons:
        raise ValueError("\n".join(map(str, reasons)))

    f = formulate(problem, elastic=elastic)
    m = pyo.ConcreteModel(name=f"districting {problem.level}".strip())
    m.problem = problem
    m.elastic = elastic
    m.formulation = f
    ii, jj = f.xi, f.xj
    m.pairs = np.column_stack([ii, jj])
    m.sites_of = [[] for _ in range(problem.n_units)]
    m.units_of = [[] for _ in range(problem.n_sites)]
    for i, j in zip(ii.tolist(), jj.tolist(), strict=True):
        m.sites_of[i].append(j)
        m.units_of[j].append(i)

    m.I = pyo.Set(initialize=range(problem.n_units), ordered=True)
    m.J = pyo.Set(initialize=np.flatnonzero(~problem.closed_sites).tolist(), ordered=True)
    m.J_cand = pyo.Set(initialize=np.flatnonzero(problem.candidates).tolist(), ordered=True)
    m.P = pyo.Set(dimen=2, initialize=list(zip(ii.tolist(), jj.tolist(), strict=True)),
                  ordered=True)
    m.x = pyo.Var(m.P, domain=pyo.Binary)
    m.y = pyo.Var(m.J, domain=pyo.Binary)
    for j in np.flatnonzero(problem.always_open).tolist():
        m.y[j].fix(1)
    m.columns = _columns(m, f)
    for k, var in enumerate(m.columns):  # fixings of the formulation (locks, roots)
        if f.lower[k] > 0.5:
            var.setlb(1)
        if f.upper[k] < 0.5:
            var.setub(0)
    m.objective = pyo.Objective(
        expr=_sum([float(f.cost[k]) * m.columns[k] for k in range(f.n_pairs)]),
        sense=pyo.minimize)
    for block in f.blocks:
        _add_block(m, block)
    f.blocks = []  # written as constraints; the columns stay for the cut rows
    if problem.contiguous and contiguity == "cuts":
        contiguity_cuts(m)
    elif problem.contiguous and contiguity == "flow":
        contiguity_flow(m)
    return m


def _columns(m: pyo.ConcreteModel, f: Formulation) -> list:
    """The Pyomo variable of each formulation column (x pairs, then y of candidates, then
    the feeder columns z[g, j] as ``m.z``)."""
    out = [m.x[i, j] for i, j in zip(f.xi.tolist(), f.xj.tolist(), strict=True)]
    cand = np.flatnonzero(f.ycol >= 0)
    ysite = np.empty(len(cand), np.int64)
    ysite[f.ycol[cand] - f.n_pairs] = cand
    m.z = pyo.Var(range(len(f.zcol)), domain=pyo.Binary)
    return out + [m.y[int(j)] for j in ysite] + [m.z[k] for k in range(len(f.zcol))]


def _sum(terms: Sequence) -> object:
    return pyo.quicksum(terms) if terms else 0.0


def _rows(m: pyo.ConcreteModel, block: RowBlock) -> list:
    """The body sum_k coef x_k of each row of ``block``."""
    order = np.argsort(block.row, kind="stable")
    ends = np.searchsorted(block.row[order], np.arange(block.n_rows + 1))
    cols, coefs = block.col[order].tolist(), block.coef[order].tolist()
    return [_sum([c * m.columns[k] for k, c in zip(cols[a:b], coefs[a:b], strict=True)])
            for a, b in zip(ends[:-1], ends[1:], strict=True)]


def _add_block(m: pyo.ConcreteModel, block: RowBlock) -> None:
    """``m.<family>`` with one constraint per row; with ``m.<family>_slack`` when elastic
    (+ slack on a row with a lower side, - slack on a row with an upper side only)."""
    if not block.n_rows:
        return
    family = block.family
    bodies = _rows(m, block)
    slack = None
    if family in m.elastic:
        slack = pyo.Var(list(block.keys), domain=pyo.NonNegativeReals)
        m.add_component(f"{family}_slack", slack)

    def rule(m, r):
        body, lo, hi = bodies[r], float(block.lo[r]), float(block.hi[r])
        if slack is not None:
            s = slack[block.keys[r]]
            body = body + s if np.isfinite(lo) else body - s
        if isinstance(body, float):  # no column left in the row
            ok = lo - 1e-9 <= body <= hi + 1e-9
            return pyo.Constraint.Feasible if ok else pyo.Constraint.Infeasible
        if lo == hi:
            return body == lo
        if not np.isfinite(lo):
            return body <= hi
        if not np.isfinite(hi):
            return body >= lo
        return pyo.inequality(lo, body, hi)

    m.add_component(family, pyo.Constraint(range(block.n_rows), rule=rule))


# ---------------------------------------------------------------------------- contiguity
def contiguity_cuts(m: pyo.ConcreteModel) -> None:
    """An empty list ``m.separator_cuts`` that the solve loop fills in rounds.

    Each cut, for unit i assigned to site j and a set S separating i from the root r_j in the
    unit graph, reads x[i, j] <= sum_{s in S} x[s, j] (Validi, Buchanan & Lykhovyd 2022;
    root-based form as in Oehrlein & Haunert 2017). See :func:`add_separator_cut`.
    """
    m.separator_cuts = pyo.ConstraintList()


def add_separator_cut(model: pyo.ConcreteModel, i: int, j: int, separator: Iterable[int]) -> None:
    """Add x[i, j] <= sum_{s in S} x[s, j] to ``model.separator_cuts``.

    Terms only for allowed pairs (a unit that may not go to j contributes 0). Nothing is
    added when (i, j) itself is not allowed.
    """
    if (int(i), int(j)) not in model.x:
        return
    if not hasattr(model, "separator_cuts"):
        contiguity_cuts(model)
    terms = [model.x[int(s), int(j)] for s in separator if (int(s), int(j)) in model.x]
    model.separator_cuts.add(model.x[int(i), int(j)] <= _sum(terms))


# ---------------------------------------------------------------------------- solving
def _set_start(m: pyo.ConcreteModel, start) -> None:
    """Give x, y, the feeder z (and flows) the values of the assignment ``start`` for a warm
    start."""
    prob = m.problem
    a = np.asarray(start, dtype=np.int64)
    if a.shape != (prob.n_units,):
        raise ValueError(f"start must have one site per unit ({prob.n_units}); got {a.shape}")
    for (i, j), var in m.x.items():
        var.set_value(1 if a[i] == j else 0)
    used = np.zeros(prob.n_sites, bool)
    used[a[a >= 0]] = True
    for j in m.J:
        if not m.y[j].fixed:
            m.y[j].set_value(1 if used[j] else 0)
    on = set(m.formulation.split_on(a).tolist())
    for k, c in enumerate(m.formulation.zcol.tolist()):
        m.z[k].set_value(1 if c in on else 0)
    if hasattr(m, "f"):
        set_start_flow(m, a)


def _solver(name: str):
    try:
        opt = pyo.SolverFactory(name)
    except Exception as exc:  # Pyomo raises its own errors for unknown plugins
        return None, f"Pyomo does not know a solver named {name!r} ({exc})."
    try:
        ok = opt is not None and opt.available(exception_flag=False)
    except Exception:
        ok = False
    if not ok:
        return None, (
            f"The solver {name!r} is not available on this machine (Pyomo could not find or "
            "start it). Install it, or use solver='appsi_highs' or the default 'highs' route."
        )
    return opt, ""


def solve_model(
    model: pyo.ConcreteModel,
    solver: str = "appsi_highs",
    gap: float = 1e-4,
    time_limit: float | None = None,
    start=None,
) -> ModelResult:
    """Solve ``model`` with the Pyomo solver ``solver`` (any name Pyomo's SolverFactory knows).

    ``gap`` is the relative MIP gap asked of the solver, ``time_limit`` seconds (None: no
    limit), ``start`` an assignment (site index per unit) passed as a warm start when the
    solver supports one. A solver that is missing returns status "error" with the reason.
    """
    prob: Problem = model.problem
    n, msites = prob.n_units, prob.n_sites
    none = np.full(n, -1, dtype=np.int64)
    t0 = time.perf_counter()
    opt, why = _solver(solver)
    if opt is None:
        return ModelResult("error", none, np.zeros(msites, bool), float("inf"),
                           -float("inf"), 0.0, why)
    kwargs: dict = {"load_solutions": False}
    gap_name = _GAP_OPTION.get(solver)
    if gap_name is not None:
        kwargs["options"] = {gap_name: float(gap)}
    if time_limit is not None:
        kwargs["timelimit"] = float(time_limit)
    if start is not None:
        _set_start(model, start)
        capable = getattr(opt, "warm_start_capable", None)
        accepts = "warmstart" in inspect.signature(opt.solve).parameters or bool(
            capable and capable()
        )
        if accepts:
            kwargs["warmstart"] = True
    try:
        results = opt.solve(model, **kwargs)
    except Exception as exc:
        return ModelResult("error", none, np.zeros(msites, bool), float("inf"),
                           -float("inf"), time.perf_counter() - t0,
                           f"The solver {solver!r} failed: {exc}")
    seconds = time.perf_counter() - t0
    tc = results.solver.termination_condition
    has_solution = len(results.solution) > 0
    bound = _number(getattr(results.problem, "lower_bound", None), -float("inf"))
    if tc in (TerminationCondition.infeasible, TerminationCondition.infeasibleOrUnbounded):
        return ModelResult("infeasible", none, np.zeros(msites, bool), float("inf"),
                           float("inf"), seconds, "")
    if not has_solution:
        status = "time_limit" if tc == TerminationCondition.maxTimeLimit else "error"
        msg = "" if status == "time_limit" else f"The solver {solver!r} stopped: {tc}."
        return ModelResult(status, none, np.zeros(msites, bool), float("inf"), bound,
                           seconds, msg)
    model.solutions.load_from(results)
    assign = none.copy()
    for (i, j), var in model.x.items():
        if var.value is not None and var.value > 0.5:
            assign[i] = j
    open_mask = np.zeros(msites, bool)
    for j in model.J:
        open_mask[j] = model.y[j].value is not None and model.y[j].value > 0.5
    obj = float(pyo.value(model.objective))
    if tc == TerminationCondition.optimal:
        status = "optimal"
        bound = obj if not np.isfinite(bound) else bound
    elif tc == TerminationCondition.maxTimeLimit:
        status = "time_limit"
    else:
        status = "feasible"
    return ModelResult(status, assign, open_mask, obj, min(bound, obj), seconds, "")


def _number(value, default: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return default
    return v if np.isfinite(v) else default


# ---------------------------------------------------------------------------- the route
class PyomoRoute:
    """The model of :func:`build_model`, solved by any solver Pyomo drives; cuts as rows."""

    def __init__(self, problem: Problem, solver: str) -> None:
        self.name = solver
        self.problem = problem
        self.model = build_model(problem, contiguity="cuts")
        self.fixed = 0

    def add_cuts(self, cuts: Sequence[Cut]) -> int:
        """Add the rows of ``cuts`` (:func:`~districting.engine.formulation.separator_rows`)."""
        block = separator_rows(self.model.formulation, cuts)
        if not hasattr(self.model, "separator_cuts"):
            contiguity_cuts(self.model)
        for body, hi in zip(_rows(self.model, block), block.hi.tolist(), strict=True):
            self.model.separator_cuts.add(body <= hi)
        return block.n_rows

    def solve(self, gap, time_left, start, cancel, prove_start: bool = False) -> Answer:
        """One solve through Pyomo. ``prove_start`` changes nothing here: this reference
        route has no callback to stop on the bound, so it keeps the gap asked."""
        r = solve_model(self.model, self.name, gap, time_left, start)
        a = None if r.assignment is None or np.any(np.asarray(r.assignment) < 0) else (
            np.asarray(r.assignment, np.int64))
        status = r.status
        if a is None and status in ("optimal", "feasible"):
            status = "error"
        obj = float(r.objective) if a is not None else np.inf
        bound = float(r.bound) if r.bound is not None and np.isfinite(r.bound) else -np.inf
        msg = getattr(r, "message", "") or ("" if status != "error" else f"{self.name}: error")
        return Answer(status, a, obj, bound, msg)

    def relaxation(self, time_limit: float | None = None) -> None:
        """No LP pass on this route: its bound comes from the solver's own answers."""
        return None

    def unrestrict(self) -> None:
        """Nothing to undo: this route never restricts columns for the heuristic."""

    def fix_by_reduced_cost(self, ub: float) -> int:
        return 0

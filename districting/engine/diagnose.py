"""Why a problem has no plan, in words staff can act on; never a bare solver status.

:func:`explain` is for the case the pre-checks (:mod:`districting.engine.precheck`) miss: the
solver proved infeasibility. It re-solves the problem with constraint families dropped in a
fixed order (floors, capacity, locks, move limit, then contiguity), finds which families are
needed for the conflict, and solves an elastic version (a non-negative slack on each row of
those families, minimising the total slack in students) to name the schools, years and
amounts involved. This is the elastic-programming idea of locating infeasibility by
minimising constraint violation (Chinneck, "Feasibility and Infeasibility in Optimization",
Springer 2008).
"""

from __future__ import annotations

import math

import numpy as np
import pyomo.environ as pyo

from ..problem import Problem
from .findings import Finding, no_plan_text, plural, students
from .precheck import precheck
from .precheck_practice import practice_finding
from .pyomo_route import build_model, solve_model

__all__ = ["explain", "diagnose"]

_FAMILY_ORDER = ("floor", "capacity", "locks", "max_moved", "transport", "groups")
#: family -> the rule it belongs to in the lead line (:data:`.findings.RULES`).
_FAMILY_RULE = {"floor": "band", "capacity": "band", "locks": "lock", "max_moved": "moves",
                "transport": "transport", "groups": "groups"}
_FAMILY_WORDS = {
    "floor": "the minimum utilization of schools",
    "capacity": "the capacity limits",
    "locks": "the locked units",
    "max_moved": "the limit on students moved",
    "transport": "the limit on students needing transport",
    "groups": "the group band",
    "contiguity": "connected zones",
}


# ---------------------------------------------------------------------------- explain
def _present(problem: Problem) -> list[str]:
    fams = []
    has_cap = problem.capacity is not None
    if has_cap and np.any(problem.min_util > 0):
        fams.append("floor")
    if has_cap:
        fams.append("capacity")
    if np.any(problem.locks >= 0):
        fams.append("locks")
    if problem.max_moved is not None:
        fams.append("max_moved")
    if problem.max_transported is not None and problem.walk is not None:
        fams.append("transport")
    if problem.groups is not None and problem.group_band > 0:
        fams.append("groups")
    return fams


def _feasible(problem: Problem, contiguity: str, drop: set[str], time_limit: float):
    """True / False / None (undecided within the time limit) with ``drop`` families removed."""
    m = build_model(problem, contiguity, elastic=drop)
    # A dropped family is an elastic one whose slack costs nothing.
    m.objective.deactivate()
    m.feasibility = pyo.Objective(expr=0.0)
    res = solve_model(m, gap=1.0, time_limit=time_limit)
    if res.status == "infeasible":
        return False
    if res.has_solution:
        return True
    return None


def _elastic_details(problem: Problem, contiguity: str, fams: list[str],
                     time_limit: float) -> list[Finding]:
    """Solve with slack on ``fams`` (min total slack) and describe the rows that give."""
    m = build_model(problem, contiguity, elastic=fams)
    d0 = problem.demand[0]
    terms = []
    for fam in fams:
        var = getattr(m, f"{fam}_slack", None)
        if var is None:
            continue
        for key, v in var.items():
            weight = max(float(d0[key]), 1.0) if fam == "locks" else 1.0
            terms.append(weight * v)
    m.objective.deactivate()
    m.violation = pyo.Objective(expr=pyo.quicksum(terms))
    res = solve_model(m, gap=1e-6, time_limit=time_limit)
    if not res.has_solution:
        return []
    out = []
    cap = problem.capacity
    for fam in fams:
        var = getattr(m, f"{fam}_slack", None)
        if var is None:
            continue
        for key, v in var.items():
            s = v.value or 0.0
            if s <= 1e-6:
                continue
            whole = math.ceil(s - 1e-6)
            if fam in ("capacity", "floor"):
                t, j = key
                school, year = problem.site_label(j), problem.year_label(t)
                if fam == "capacity":
                    lim = problem.max_util[j] * cap[j]
                    text = (f"{school} in {year} would need {students(s)} "
                            f"{plural(whole, 'seat')} over its limit of "
                            f"{students(lim, up=False)} (capacity x maximum utilization).")
                else:
                    fl = problem.min_util[j] * cap[j]
                    text = (f"{school} in {year} would be {students(s)} "
                            f"{plural(whole, 'student')} short of its floor of "
                            f"{students(fl)} (capacity x minimum utilization).")
                out.append(Finding("band", text, _FIXES[fam], school, year=year))
            elif fam == "locks":
                school, unit = problem.site_label(int(problem.locks[key])), problem.unit_label(key)
                out.append(Finding("lock", f"{unit} would have to leave its lock to {school}.",
                                   _FIXES[fam], school, unit))
            elif fam == "max_moved":
                out.append(Finding("moves", "The move limit of "
                                   f"{students(problem.max_moved, up=False)} would have to "
                                   f"rise to {students(problem.max_moved + s)}.", _FIXES[fam]))
            else:
                out += practice_finding(problem, fam, key, s, _FIXES[fam])
    return out


_FIXES = {
    "floor": "lower the minimum utilization of this school, or let a school close.",
    "capacity": "raise capacity or the maximum utilization here, or open another school.",
    "locks": "remove or change this lock.",
    "max_moved": "raise the move limit.",
    "transport": "raise the limit on students needing transport, or lengthen the walking "
                 "distance.",
    "groups": "widen the group band, or let the zones around this school change more.",
    "contiguity": "add adjacency links (bridges) or allow more units to go to those schools.",
}


def explain(problem: Problem, time_limit: float = 30.0) -> str:
    """Why ``problem`` has no plan, as :func:`.findings.no_plan_text` words it.

    Call it when the solver proved the problem infeasible. Pre-check findings, when there
    are any, are the answer. Otherwise families are dropped in the order floors, capacity,
    locks, move limit (each re-solve without contiguity, then with the exact flow form of
    contiguity when the zones must be connected); the families whose removal makes a plan
    possible are the conflict, and an elastic solve names the rows that must give.
    ``time_limit`` bounds each re-solve in seconds.
    """
    return no_plan_text(diagnose(problem, time_limit), problem.level)


def diagnose(problem: Problem, time_limit: float = 30.0) -> list[Finding]:
    """The causes :func:`explain` words: pre-check findings, or the conflicting rules."""
    found = precheck(problem)
    if found:
        return found
    fams = _present(problem)
    stages = ["none"] + (["flow"] if problem.contiguous else [])
    for contiguity in stages:
        base = _feasible(problem, contiguity, set(), time_limit)
        if base is None:
            return [Finding("undecided", f"No plan was found within {time_limit:.0f} s and "
                            "the conflict could not be located in that time.", "loosen the "
                            "utilization band, the move limit or the locks, or allow more "
                            "time.")]
        if base:
            continue
        needed = _needed(problem, contiguity, fams, time_limit)
        if needed is None and contiguity == "flow":
            return [Finding("contiguity", "Every other rule can be met, but some units cannot "
                            "join a school's zone through units that may go there.",
                            _FIXES["contiguity"])]
        if needed is None:
            return [Finding("pairs", "No plan exists even without the utilization band, the "
                            "locks and the move limit: the number of open schools, closures, "
                            "forbidden pairs and the maximum distance leave some units "
                            "without a school they can join.", "allow more pairs (maximum "
                            "distance, forbids) or open more schools.")]
        details = _elastic_details(problem, contiguity, needed, time_limit)
        words = " and ".join(_FAMILY_WORDS[f] for f in needed)
        if not details:
            details = [Finding(_FAMILY_RULE[f], f"No plan meets {words}.", _FIXES[f])
                       for f in needed]
        if len(needed) > 1:
            details.insert(0, Finding("together", f"No plan meets {words} together; the "
                                      "smallest change that allows a plan is listed below.",
                                      "; ".join(_FIXES[f] for f in needed),
                                      lead=f"{words} conflict"))
        if contiguity == "flow":
            details.append(Finding("contiguity", f"{words[0].upper()}{words[1:]} cannot be "
                                   "met together with connected zones.", _FIXES["contiguity"]))
        return details
    if problem.contiguous:
        return [Finding("solve", "The exact flow formulation finds a plan that meets every "
                        "rule, so the infeasible answer came from a limit of the solve loop.",
                        "re-run with more time or rounds.")]
    return [Finding("solve", "A plan that meets every rule exists.", "re-run the solve.")]


def _needed(problem: Problem, contiguity: str, fams: list[str], time_limit: float):
    """The families whose removal makes a plan possible, or None when dropping all fails."""
    drop: set[str] = set()
    for fam in fams:
        drop.add(fam)
        if _feasible(problem, contiguity, drop, time_limit):
            break
    else:
        return None
    # Keep only the families the conflict needs: put each back while a plan still exists.
    for fam in sorted(drop, key=_FAMILY_ORDER.index):
        trial = drop - {fam}
        if trial and _feasible(problem, contiguity, trial, time_limit):
            drop = trial
    return sorted(drop, key=_FAMILY_ORDER.index)

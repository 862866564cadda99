"""Plain words for people: plan statuses, numbers with their units, schools outside the band.

The one home of what a person reads about a plan: the exports, the hearing packet, the
command line's summary and the workbench call these, so a status or a figure reads the
same everywhere. Solver words (round, cut, bound, gap, time_limit) never appear here
except in :func:`solver_details`, meant only for a details view or the log.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from ..plan import Plan
from ..travel.measures import measure_words

__all__ = ["status_words", "status_words_of", "no_plan_error", "solver_details", "gap_words",
           "int_text", "students_text", "km_text", "student_km_text", "percent_text",
           "year_text", "dash", "DASH",
           "band_lines", "today_words", "plan_lines", "travel_words"]

#: What a cell shows when there is no number; :func:`dash` adds the reason.
DASH = "\u2013"


def _finite(x) -> bool:
    try:
        return x is not None and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def dash(reason: str) -> str:
    """A dash with its reason, for a cell without a number: '– (no students)'."""
    return f"{DASH} ({reason})" if reason else DASH


def int_text(x, reason: str = "") -> str:
    """A whole number with thousands separators ('1,234'); a dash when there is none."""
    return f"{float(x):,.0f}" if _finite(x) else dash(reason)


def students_text(x, reason: str = "") -> str:
    """Whole students: '1,234 students' ('1 student')."""
    if not _finite(x):
        return dash(reason)
    n = round(float(x))
    return f"{n:,} student{'' if n == 1 else 's'}"


def km_text(metres, unit: bool = False, reason: str = "") -> str:
    """Metres as km with two decimals ('1.23', or '1.23 km' with ``unit``)."""
    if not _finite(metres):
        return dash(reason)
    return f"{float(metres) / 1000:,.2f}" + (" km" if unit else "")


def student_km_text(student_metres, reason: str = "") -> str:
    """A sum of students x metres as whole student-km: '8,722 student-km'."""
    if not _finite(student_metres):
        return dash(reason)
    return f"{float(student_metres) / 1000:,.0f} student-km"


def percent_text(share, reason: str = "") -> str:
    """A share as a whole percent ('98%'); to 0.1% when rounding would reach a whole
    hundred it is not (0.996 -> '99.6%', so a school just over or under 100% never reads
    as exactly 100%)."""
    if not _finite(share):
        return dash(reason)
    pct = 100 * float(share)
    whole = round(pct)
    if whole % 100 == 0 and abs(pct - whole) >= 0.05:
        return f"{pct:.1f}%"
    return f"{whole:.0f}%"


def year_text(year) -> str:
    """A year as a plain number: '2027' (never '2,027' or '2027.0')."""
    return str(int(year))


def gap_words(gap: float) -> str:
    """How far from the best a plan may be, rounded up so the words never claim too much:
    0.003 -> '0.3%', 0.0328 -> '3.3%', 0.00004 -> 'less than 0.01%'."""
    pct = 100 * float(gap)
    if pct < 0.01:
        return "less than 0.01%"
    if pct < 0.1:
        return f"{math.ceil(pct * 100 - 1e-9) / 100:.2f}%"
    return f"{math.ceil(pct * 10 - 1e-9) / 10:.1f}%"


def _how_close(gap, bound_known: bool) -> str:
    # a gap of 100% or more is a bound at or below zero: it tells nothing (e.g. a solve
    # stopped before its first LP finished)
    if _finite(gap) and bound_known and float(gap) < 1.0:
        return f"within {gap_words(max(float(gap), 0.0))} of the best possible"
    return "a valid plan; how close to the best is not known"


def _reason(message: str) -> str:
    """The first line of an infeasibility explanation (already in words), or a default."""
    first = next((ln.strip() for ln in (message or "").splitlines() if ln.strip()), "")
    return first.rstrip(".") or "the rules cannot all be met at once"


def status_words_of(status: str, gap, message: str = "", *, bound_known: bool | None = None,
                    feasible: bool | None = None) -> str:
    """A status in plain words from its parts: the solver's status code, the gap and the
    no-plan message (a Plan, or a saved option's listing that has no full Plan).

    ``bound_known``: whether the plan has a finite lower bound (default: the gap is
    finite, as it is only computed from one); ``feasible``: whether there is a valid plan
    (default: the status is one a plan can have). See :func:`status_words` for the words.
    """
    status = str(status or "")
    if feasible is None:
        feasible = status in ("optimal", "feasible", "time_limit", "cancelled")
    if status == "infeasible" or not feasible:
        return f"no plan: {_reason(message)}"
    if status == "optimal":
        return "best possible plan"
    close = _how_close(gap, _finite(gap) if bound_known is None else bound_known)
    if status == "time_limit":
        return f"stopped at the time limit: {close}"
    if status == "cancelled":
        return f"stopped on request: {close}"
    return close


def status_words(plan: Plan) -> str:
    """A plan's status in plain words.

    'best possible plan'; 'within 0.3% of the best possible'; 'stopped at the time limit:
    within 3.3% of the best possible'; 'stopped at the time limit: a valid plan; how close
    to the best is not known'; 'stopped on request: ...'; 'no plan: <reason>'.
    """
    return status_words_of(plan.status, plan.gap, plan.message,
                           bound_known=_finite(plan.bound), feasible=plan.feasible)


def no_plan_error(subject: str, message: str, fix: str) -> str:
    """Why a thing without a valid plan is refused, on lines: '<subject> has no valid plan:
    <lead line>', then one cause per line (the no-plan message's own lines, as
    :func:`districting.engine.findings.no_plan_text` writes them), then ``fix``."""
    lines = [ln.strip() for ln in (message or "").splitlines() if ln.strip()]
    lead, causes = (lines[0].rstrip("."), lines[1:]) if lines else ("", [])
    head = f"{subject} has no valid plan" + (f": {lead}" if lead else "")
    bullets = [f"  {c}" if c.startswith("-") else f"  - {c}" for c in causes]
    return "\n".join([f"{head}.", *bullets, fix])


def solver_details(plan: Plan) -> str:
    """The solver's own account (status code, rounds, cuts, bound, gap, times): for a
    details view or the log only, never for a page people read."""
    gap = f"{100 * plan.gap:.4g}%" if _finite(plan.gap) else "not known"
    bound = f"{plan.bound:,.6g}" if _finite(plan.bound) else "none"
    objective = f"{plan.objective:,.6g}" if _finite(plan.objective) else "none"
    return (f"solver status {plan.status}; objective {objective}; lower bound {bound}; "
            f"gap {gap}; rounds {plan.rounds}; cuts {plan.cuts}; route {plan.route}; "
            f"build {plan.build_seconds:.2f} s; solve {plan.solve_seconds:.2f} s")


def travel_words(outcome) -> str:
    """How travel was measured for this option, in words ("along streets")."""
    return measure_words(outcome.settings.travel, table=outcome.inputs.travel is not None)


# ---------------------------------------------------------------------------- the band
def band_lines(problem, load: np.ndarray, open_sites, names: Sequence[str]) -> list[str]:
    """One line per open school outside its band, at its worst year (see
    :func:`_band_pairs`)."""
    return [line for _, line in _band_pairs(problem, load, open_sites, names)]


def _band_pairs(problem, load: np.ndarray, open_sites, names: Sequence[str]
                ) -> list[tuple[int, str]]:
    """(site index, line) per open school outside its band, at its worst year.

    'Alder Hill Elementary: 112% in 2029, 12 points over the 100% limit' (also over in
    2030); 'Fern Elementary: 48% in 2027, 12 points under the 60% floor'. ``load`` is
    (years, sites) in ``problem.years`` order.
    """
    cap = problem.capacity
    if cap is None:
        return []
    years = [int(y) for y in problem.years]
    lines = []
    for j in np.flatnonzero(np.asarray(open_sites, bool)):  # a handful of schools per level
        if cap[j] <= 0:
            continue
        share = load[:, j] / cap[j]
        top, floor = problem.max_util[j], problem.min_util[j]
        over = 100 * (share - top)
        under = 100 * (floor - share)
        tol = 1e-6 / cap[j] * 100
        for excess, limit, word in ((over, top, "over the {} limit"),
                                    (under, floor, "under the {} floor")):
            bad = np.flatnonzero(excess > tol)
            if not len(bad):
                continue
            worst = bad[np.argmax(excess[bad])]
            others = sorted(years[t] for t in bad if t != worst)
            if len(others) == len(years) - 1 and len(years) > 2:
                also = " (outside it in every projected year)"
            else:
                also = f" (also {', '.join(map(str, others))})" if others else ""
            points = excess[worst]
            pts = f"{points:.0f}" if points >= 0.5 else "less than 1"
            lines.append((int(j), f"{names[j]}: {percent_text(share[worst])} in "
                                  f"{years[worst]}, {pts} point{'' if pts == '1' else 's'} "
                                  f"{word.format(percent_text(limit))}{also}"))
    return lines


def today_words(outcome) -> str:
    """Today's zones against the band: which schools are outside it, and by how much."""
    met = outcome.current_metrics
    names = outcome.sites["name"].astype(str).tolist()
    opened = np.bincount(outcome.current[outcome.current >= 0],
                         minlength=outcome.problem.n_sites) > 0
    pairs = _band_pairs(outcome.problem, met.load, opened, names)
    if not pairs:
        return "Today's zones: every school is inside its band in every projected year."
    n = len({j for j, _ in pairs})
    head = (f"Today's zones: {n} school{'' if n == 1 else 's'} outside "
            f"{'its' if n == 1 else 'their'} band")
    return head + ":\n" + "\n".join(f"  {ln}" for _, ln in pairs)


def plan_lines(outcome) -> list[str]:
    """The few lines that sum a plan up for people (the command line's summary)."""
    plan, prob = outcome.plan, outcome.problem
    if not plan.feasible:
        return [f"{outcome.level}: {status_words(plan)}"]
    m = outcome.metrics
    names = outcome.sites["name"].astype(str).tolist()
    lines = [
        f"{outcome.level}: {status_words(plan)}; {int(plan.open_sites.sum())} schools open, "
        f"{students_text(prob.demand[0].sum())} in {year_text(prob.years[0])}",
        f"mean travel {km_text(m.overall_mean_distance, unit=True)}, longest "
        f"{km_text(m.overall_max_distance, unit=True)}; {students_text(m.students_moved)} "
        f"({m.units_moved} planning units) change school",
    ]
    outside = band_lines(prob, m.load, plan.open_sites, names)
    if outside:
        lines.append("outside the band: " + "; ".join(outside))
    return lines

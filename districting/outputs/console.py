"""What the command line prints about a plan: the progress line while solving, the summary
in words after it (solver detail only to the ``districting`` log: ``solve --details``), and
the record of ``solve --json`` for scripts."""

from __future__ import annotations

import logging
import math
import sys

from .feeders import feeder_words
from .option_edit import edit_figures, edit_lines
from .practice import practice_lines
from .wording import gap_words, plan_lines, solver_details

__all__ = ["Progress", "plan_summary", "solve_record"]

#: Solver detail (rounds, cuts, bound) goes to this log, never to the summary people read.
_log = logging.getLogger("districting")


class Progress:
    """One status line per round on a terminal; silent when output is not a terminal."""

    def __init__(self, label: str, stream=None):
        self.stream = stream or sys.stderr
        self.live = self.stream.isatty()
        self.label = label

    def __call__(self, rnd) -> None:
        if not self.live:
            return
        if rnd.objective == float("inf"):
            where = "looking for a first plan"
        elif not rnd.gap < 1.0:  # no bound yet, or one at or below zero (says nothing)
            where = "a plan found; how close to the best is not known yet"
        else:
            where = f"best plan so far within {gap_words(max(rnd.gap, 0.0))} of the best possible"
        self.stream.write(f"\r{self.label}: {where}, {rnd.seconds:.0f} s   ")
        self.stream.flush()

    def done(self) -> None:
        if self.live:
            self.stream.write("\n")
            self.stream.flush()


def plan_summary(outcome) -> str:
    """A few lines on a plan: status, travel, moves, schools out of band."""
    plan = outcome.plan
    if not plan.feasible:  # the lead line, then the causes (engine.findings.no_plan_text)
        why = {"time_limit": " before the time limit: raise --time-limit",
               "cancelled": ": the solve was stopped"}.get(plan.status, "")
        lead, *causes = (plan.message or f"No {outcome.level} plan was found{why}.").splitlines()
        return "\n".join([f"  {lead}", *(f"    {line}" for line in causes)])
    lines = [f"  {line}" if k == 0 else f"    {line}"
             for k, line in enumerate(plan_lines(outcome))]
    lines.append(f"    {outcome.travel_line}")
    lines += [f"    {line}" for line in feeder_words(outcome)]
    lines += [f"    {line}" for line in practice_lines(outcome)]
    lines += [f"    {line}" for line in edit_lines(outcome)]
    if plan.message:
        lines.append("    " + plan.message.replace("\n", "\n    "))
    _log.info("%s %s: %s", outcome.level, outcome.name or "(unsaved)", solver_details(plan))
    return "\n".join(lines)


def _finite(value: float) -> float | None:
    """A number for JSON: None for an infinite or missing one (strict JSON has no inf)."""
    return float(value) if value is not None and math.isfinite(value) else None


def solve_record(outcome) -> dict:
    """One level's result for scripts (`solve --json`): the engine's status code, the
    objective and the proven bound (cost units), the gap as a fraction, seconds, and
    students moved against today's zones and (a run editing a saved option, else None)
    against that option."""
    plan = outcome.plan
    edit = edit_figures(outcome)
    moved = plan.metrics.students_moved if plan.feasible and plan.metrics else None
    return {"level": outcome.level, "status": plan.status,
            "objective": _finite(plan.objective), "bound": _finite(plan.bound),
            "gap": _finite(plan.gap),
            "seconds": round(plan.build_seconds + plan.solve_seconds, 3),
            "students_moved_vs_today": _finite(moved),
            "students_moved_vs_option": None if edit is None else edit.moved_vs_option}

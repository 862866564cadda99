"""What a rerun that edits a saved option changed against that option.

A run with ``RunSettings.keep_option`` (the option being edited; ``Problem.anchor``) is
charged ``keep_option_weight`` metres per plan-year student moved away from it. These
figures tell the planner what the edit cost: students moved against the option and against
today's zones, and the edit's price, the objective and the students moved against today's
zones of the new plan compared with the option before the edit. The objective is compared
without the charge for keeping the option (the terms the option was made with), so the
price is the cost of the lock, forbid or cap itself.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .wording import int_text, students_text

__all__ = ["EditFigures", "edit_figures", "plan_edit_figures", "edit_lines"]


@dataclass(frozen=True)
class EditFigures:
    option_name: str
    weight: float  # metres charged per student moved against the option
    moved_vs_option: float  # plan-year students whose school differs from the option's
    moved_vs_today: float  # the new plan's students moved against today's zones
    option_moved_vs_today: float  # the option's, before the edit
    objective: float  # the new plan's objective without the keep charge
    option_objective: float  # the option's, same terms (inf: the option left units out)

    @property
    def objective_change(self) -> float:
        return self.objective - self.option_objective


def _moved(demand0: np.ndarray, reference: np.ndarray, a: np.ndarray) -> float:
    """Plan-year students whose unit's site differs from its reference site (-1: none)."""
    return float(demand0[(reference >= 0) & (reference != a)].sum())


def _cost(weighted: np.ndarray, a: np.ndarray) -> float:
    if (a < 0).any():
        return float("inf")
    return float(weighted[np.arange(len(a)), a].sum())


def edit_figures(outcome) -> EditFigures | None:
    """The figures of a run that edits a saved option (None for any other run)."""
    if not outcome.plan.feasible:
        return None
    return plan_edit_figures(outcome.problem, outcome.assignment,
                             outcome.settings.keep_option_name)


def plan_edit_figures(p, assignment, option_name: str = "") -> EditFigures | None:
    """The figures of ``assignment`` against ``p``'s anchor (None without one)."""
    if p.anchor is None:
        return None
    a = np.asarray(assignment, np.int64)
    d0 = p.demand[0]
    plain = p.replace(anchor_weight=0.0).weighted_cost
    return EditFigures(
        option_name=option_name,
        weight=p.anchor_weight,
        moved_vs_option=_moved(d0, p.anchor, a),
        moved_vs_today=_moved(d0, p.current, a),
        option_moved_vs_today=_moved(d0, p.current, p.anchor),
        objective=_cost(plain, a),
        option_objective=_cost(plain, p.anchor),
    )


def _signed(x: float) -> str:
    return ("+" if x >= 0 else "-") + int_text(abs(x))


def edit_lines(outcome) -> list[str]:
    """Lines for people: moves against the edited option and today's zones, and the price."""
    f = edit_figures(outcome)
    if f is None:
        return []
    name = f'"{f.option_name}"' if f.option_name else "the option being edited"
    charge = (f"each charged {int_text(f.weight)} m" if f.weight
              else "not charged: a free rerun")
    lines = [f"against {name}: {students_text(f.moved_vs_option)} change school ({charge}); "
             f"against today's zones: {students_text(f.moved_vs_today)} "
             f"({students_text(f.option_moved_vs_today)} in {name})"]
    if np.isfinite(f.option_objective):
        more = f.moved_vs_today - f.option_moved_vs_today
        lines.append(f"price of the edit: objective {int_text(f.objective)} against "
                     f"{int_text(f.option_objective)} in {name} ({_signed(f.objective_change)}, "
                     f"without the keep charge); {_signed(more)} students moved against "
                     "today's zones")
    return lines

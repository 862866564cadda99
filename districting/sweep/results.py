"""One sweep result: the figures the trade-off chart and table show for one combination."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..outputs.wording import km_text, status_words, students_text
from ..study import Outcome
from .grid import Setting, setting_words

__all__ = ["SweepResult", "result_of"]


@dataclass(frozen=True)
class SweepResult:
    """The figures of one combination (nan where there is no plan)."""

    name: str  # the saved option
    setting: Setting
    words: str  # the settings in plain words
    status: str  # in plain words
    feasible: bool
    gap: float  # share; nan without a proven bound
    students_moved: float  # plan-year students whose school changes
    mean_km: float  # student-weighted mean travel, km
    total_km: float  # students x km, summed (student-km), plan year
    spread: float  # highest minus lowest utilization of the open schools, percentage points
    highest_util: float  # percent, plan year
    lowest_util: float  # percent, plan year
    seconds: float
    resumed: bool = False  # saved by an earlier run with the same settings

    @property
    def brief(self) -> str:
        """'; 120 students move, mean travel 1.23 km' (empty without a plan)."""
        if not self.feasible:
            return ""
        return (f"; {students_text(self.students_moved)} change school, mean travel "
                f"{km_text(self.mean_km * 1000, unit=True)}")


def result_of(outcome: Outcome, setting: Setting, *, seconds: float | None = None,
              resumed: bool = False) -> SweepResult:
    """The figures of a solved (or reopened) option, in the plan year."""
    plan = outcome.plan
    nan = float("nan")
    if seconds is None:
        seconds = plan.build_seconds + plan.solve_seconds
    if not plan.feasible:
        return SweepResult(outcome.name, setting, setting_words(setting), status_words(plan),
                           False, nan, nan, nan, nan, nan, nan, nan, seconds, resumed)
    m = outcome.metrics
    students = float(outcome.problem.demand[0].sum())
    util = np.asarray(m.utilization, float)[0][np.asarray(plan.open_sites, bool)]
    util = util[np.isfinite(util)]
    hi, lo = (100 * float(util.max()), 100 * float(util.min())) if len(util) else (nan, nan)
    gap = float(plan.gap) if math.isfinite(plan.gap) else nan
    return SweepResult(
        name=outcome.name, setting=setting, words=setting_words(setting),
        status=status_words(plan), feasible=True, gap=gap,
        students_moved=float(m.students_moved),
        mean_km=float(m.overall_mean_distance) / 1000,
        total_km=float(m.overall_mean_distance) * students / 1000,
        spread=hi - lo, highest_util=hi, lowest_util=lo, seconds=float(seconds),
        resumed=resumed)

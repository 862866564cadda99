"""The demo's solve cases for the proof benchmarks: each travel measure, level and option."""

from __future__ import annotations

import sys
from collections.abc import Iterator
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from districting.intake import validate_project  # noqa: E402
from districting.problem import Problem  # noqa: E402
from districting.study import RunSettings, build_problem  # noqa: E402

#: The demo's two options: shortest travel, and fewer moves (stability weight 3000).
OPTIONS = (("shortest travel", 0.0), ("fewer moves", 3000.0))


def demo_cases(data: str, travels: list[str],
               levels: list[str]) -> Iterator[tuple[str, str, str, Problem]]:
    """(travel, level, option label, problem) for every travel measure, level and option."""
    inputs, report = validate_project(data, cache=True)
    if inputs is None:
        raise SystemExit(report.format())
    for travel in travels:
        for level in levels:
            for label, weight in OPTIONS:
                rs = RunSettings(level=level, travel=travel, stability_weight=weight)
                problem, _ = build_problem(inputs, rs)
                yield travel, level, label, problem

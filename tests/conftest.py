"""Every plan the engine returns in any test is checked independently (tests/plan_check.py)."""

from __future__ import annotations

import pytest
from plan_check import assert_plan_valid

from districting.engine import Session


@pytest.fixture(autouse=True)
def _every_plan_checked(monkeypatch):
    engine_solve = Session.solve

    def checked(self, *args, **kwargs):
        plan = engine_solve(self, *args, **kwargs)
        if plan.feasible:
            assert_plan_valid(self.problem, plan)
        return plan

    monkeypatch.setattr(Session, "solve", checked)

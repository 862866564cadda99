"""Status words of the workbench (ui/text.py): the wording the issue asks for, written out
by hand, and no solver word ("optimal", "time_limit", "gap", "bound") on the page."""

from __future__ import annotations

from types import SimpleNamespace

import pytest

from ui.text import share_text, status_text

NO_PLAN = "the middle level lacks 120 seats in 2029"


@pytest.mark.parametrize(("status", "gap", "words"), [
    ("optimal", 0.0, "best possible plan"),
    ("feasible", 0.003, "within 0.3% of the best possible"),
    ("time_limit", 0.033, "stopped at the time limit: within 3.3% of the best possible"),
    ("time_limit", float("inf"), "stopped at the time limit: a valid plan; how close to the "
                                 "best is not known"),
    ("cancelled", 0.0004, "stopped on request: within 0.04% of the best possible"),
    ("feasible", float("nan"), "a valid plan; how close to the best is not known"),
    ("infeasible", float("inf"), f"no plan: {NO_PLAN}"),
])
def test_status_words(status, gap, words):
    text = status_text(SimpleNamespace(status=status, gap=gap, message=NO_PLAN))
    assert text == words
    for solver_word in ("optimal", "time_limit", "gap", "bound", "inf", "nan"):
        assert solver_word not in text


def test_same_words_as_the_exports():
    """A Plan and a saved option's listing (status, gap, message; no Plan) read exactly as
    the exports and the packet put them (districting.outputs.wording.status_words)."""
    import numpy as np

    from districting.outputs.wording import status_words
    from districting.plan import Plan

    cases = [("optimal", 1e-5, 10.0, ""), ("time_limit", 0.0321, 10.0, ""),
             ("time_limit", float("inf"), -float("inf"), ""),
             ("cancelled", 0.0656, 10.0, ""),
             ("infeasible", float("inf"), float("inf"), f"{NO_PLAN}.\n- a cause")]
    for status, gap, bound, message in cases:
        a = np.full(2, -1 if status == "infeasible" else 0, dtype=np.int64)
        plan = Plan(status=status, objective=1.0, bound=bound, gap=gap, assignment=a,
                    open_sites=np.ones(1, bool), message=message)
        listing = SimpleNamespace(status=status, gap=gap, message=message)
        assert status_text(plan) == status_words(plan) == status_text(listing)


def test_share_text():
    assert share_text(0.0656) == "6.6%" and share_text(0.00012) == "0.01%"

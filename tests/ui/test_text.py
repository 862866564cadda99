"""Status words of the workbench (ui/text.py): the wording the issue asks for, written out
by hand, and no solver word ("optimal", "time_limit", "gap", "bound") on the page."""

from __future__ import annotations

from types import SimpleNamespace

import pytest

from ui.text import share_text, status_text

NO_PLAN = "the middle level lacks 120 seats in 2029"


@pytest.mark.parametrize(("status", "gap", "words"), [
    ("optimal", 0.0, "best possible plan"),
    ("optimal", 0.003, "within 0.3% of the best possible"),
    ("time_limit", 0.033, "stopped at the time limit: within 3.3% of the best possible"),
    ("time_limit", float("inf"), "stopped at the time limit: how close to the best is not "
                                 "known"),
    ("cancelled", 0.0004, "cancelled: within 0.04% of the best possible"),
    ("feasible", float("nan"), "a valid plan (not compared with the best)"),
    ("infeasible", float("inf"), f"no plan: {NO_PLAN}"),
])
def test_status_words(status, gap, words):
    text = status_text(SimpleNamespace(status=status, gap=gap, message=NO_PLAN))
    assert text == words
    for solver_word in ("optimal", "time_limit", "gap", "bound", "inf", "nan"):
        assert solver_word not in text


def test_share_text():
    assert share_text(0.0656) == "6.6%" and share_text(0.00012) == "0.01%"

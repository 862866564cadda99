"""Plain words (districting.outputs.wording): hand-worked cases, written apart from the code."""

from __future__ import annotations

import numpy as np
import pytest

from districting.outputs.wording import (
    band_lines,
    gap_words,
    int_text,
    km_text,
    no_plan_error,
    percent_text,
    solver_details,
    status_words,
    student_km_text,
    students_text,
    year_text,
)
from districting.plan import Plan
from districting.problem import Problem

#: Words a person must never read on a page or in an export (solver vocabulary).
SOLVER_WORDS = ("time_limit", "gap", "bound", "inf", "rounds", "cuts", "feasible", "nan")


def plan(status, gap=0.0, bound=100.0, message=""):
    a = np.zeros(3, dtype=np.int64) if status != "infeasible" else np.full(3, -1)
    return Plan(status=status, objective=100.0, bound=bound, gap=gap, assignment=a,
                open_sites=np.ones(1, bool), message=message, rounds=4, cuts=17)


@pytest.mark.parametrize(("p", "words"), [
    (plan("optimal", gap=1e-5), "best possible plan"),
    (plan("feasible", gap=0.003), "within 0.3% of the best possible"),
    # 3.28% rounds up to 3.3%, 3.21% also up to 3.3%: "within" never claims too much
    (plan("time_limit", gap=0.0321), "stopped at the time limit: within 3.3% of the best "
                                      "possible"),
    (plan("time_limit", gap=float("inf"), bound=-float("inf")),
     "stopped at the time limit: a valid plan; how close to the best is not known"),
    (plan("cancelled", gap=0.0656), "stopped on request: within 6.6% of the best possible"),
    # a bound of 0 (the solve stopped before its first LP finished): a gap of 100% says
    # nothing, so no "within 100%"
    (plan("time_limit", gap=1.0, bound=0.0),
     "stopped at the time limit: a valid plan; how close to the best is not known"),
    (plan("time_limit", gap=0.999, bound=0.1), "stopped at the time limit: within 99.9% of "
                                                "the best possible"),
    (plan("infeasible", gap=float("inf"), bound=float("inf"),
          message="The 2029 elementary students (4,210) exceed the capacity (3,900).\nmore"),
     "no plan: The 2029 elementary students (4,210) exceed the capacity (3,900)"),
    (plan("infeasible", gap=float("inf")), "no plan: the rules cannot all be met at once"),
])
def test_status_words(p, words):
    assert status_words(p) == words


def test_status_words_never_use_solver_words():
    for st in ("optimal", "feasible", "time_limit", "cancelled"):
        for gap, bound in ((0.0, 1.0), (0.05, 1.0), (float("inf"), -float("inf"))):
            text = status_words(plan(st, gap, bound)).lower()
            assert not [w for w in SOLVER_WORDS if w in text], text
    details = solver_details(plan("time_limit", 0.0656, 93.44))
    assert "rounds 4" in details and "cuts 17" in details and "6.56%" in details


def test_gap_words_round_up():
    assert gap_words(0.003) == "0.3%"
    assert gap_words(0.007) == "0.7%"  # 100 * 0.007 * 10 is 7.000000000000001 in floats
    assert gap_words(0.035) == "3.5%"
    assert gap_words(0.0301) == "3.1%"
    assert gap_words(0.00042) == "0.05%"
    assert gap_words(0.0) == "less than 0.01%"


def test_number_formats():
    assert int_text(1234.4) == "1,234" and int_text(float("nan"), "no students") == \
        "\u2013 (no students)"
    assert students_text(390.0) == "390 students" and students_text(1) == "1 student"
    assert km_text(1234.5) == "1.23" and km_text(987.0, unit=True) == "0.99 km"
    assert student_km_text(8_721_725) == "8,722 student-km"
    assert percent_text(0.9844444444444445) == "98%"
    assert percent_text(1.004) == "100.4%" and percent_text(0.996) == "99.6%"
    assert percent_text(1.12) == "112%"
    assert year_text(2027) == "2027" and year_text(np.int64(2027)) == "2027"
    assert year_text(2027.0) == "2027"


def test_band_lines_hand_worked():
    # two schools, capacity 100 and 200, band 60-100%; years 2027, 2029, 2030
    prob = Problem.from_arrays(np.zeros((2, 2)), np.ones((3, 2)), capacity=[100, 200],
                               min_util=0.6, max_util=1.0, years=(2027, 2029, 2030))
    load = np.array([[100.0, 150.0],   # 2027: 100% (on the edge), 75%
                     [112.0, 110.0],   # 2029: 112% (12 points over), 55% (5 under)
                     [105.0, 130.0]])  # 2030: 105%, 65%
    lines = band_lines(prob, load, [True, True], ["Alder Hill Elementary", "Fern Elementary"])
    assert lines == [
        "Alder Hill Elementary: 112% in 2029, 12 points over the 100% limit (also 2030)",
        "Fern Elementary: 55% in 2029, 5 points under the 60% floor",
    ]
    assert band_lines(prob, load, [False, False], ["a", "b"]) == []
    every = load.copy()
    every[0, 0] = 101.0  # 2027 over too: the first school is over in every year
    assert band_lines(prob, every, [True, False], ["Alder Hill Elementary", "b"]) == [
        "Alder Hill Elementary: 112% in 2029, 12 points over the 100% limit (outside it "
        "in every projected year)"]


def test_today_words_name_the_schools_outside_the_band(tmp_path):
    from exports_town import make_outcome, make_town

    from districting.outputs.wording import plan_lines, today_words

    town = make_town(tmp_path, nx=16, ny=12, n_sites=6, seed=3)  # two share a name
    o = make_outcome(town)
    # by hand: today's zone of each unit, students per school and year, against 60-100%
    counts = town.counts["elementary"]
    cur = town.current["elementary"]
    cap = town.sites["capacity"].to_numpy()
    outside = []
    for j, name in enumerate(town.sites["site_id"] + " " + town.sites["name"]):
        for year in (2027, 2028, 2029):
            share = counts[town.settings.all_years.index(year), cur == j].sum() / cap[j]
            if share > 1.0 + 1e-9 or share < 0.6 - 1e-9:
                outside.append(name)
                break
    text = today_words(o)
    assert outside  # the invented town has schools outside the band today
    assert text.startswith(f"Today's zones: {len(outside)} school")
    named = {ln.strip().split(":")[0] for ln in text.splitlines()[1:]}
    assert named == {n.split(" ", 1)[1] for n in outside}
    assert not [w for w in SOLVER_WORDS if w in text.lower()]
    lines = " ".join(plan_lines(o)).lower()
    assert "students" in lines and " km" in lines
    assert not [w for w in ("time_limit", "gap", "bound", "rounds", "cuts") if w in lines]


def test_no_plan_error_keeps_the_lead_and_the_causes_on_lines():
    # the message as districting.engine.findings.no_plan_text writes it
    message = "The middle level lacks 120 seats in 2029.\n- M01: 70 students over\n- M02: 50"
    text = no_plan_error("option 'A'", message, "Run it again.")
    assert text.splitlines() == ["option 'A' has no valid plan: The middle level lacks 120 "
                                 "seats in 2029.", "  - M01: 70 students over", "  - M02: 50",
                                 "Run it again."]
    assert no_plan_error("x", "", "Fix.") == "x has no valid plan.\nFix."

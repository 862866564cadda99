"""Repair: handing empty units out again connects zones at no cost; make_valid turns
fragments and overload into a plan the independent checker accepts."""

from __future__ import annotations

import numpy as np
from plan_check import assert_plan_valid
from test_connectivity import grid
from test_improve import loads, make, zones_connected

from districting import Problem
from districting.engine import connectivity as cg
from districting.engine import repair
from districting.engine.connectivity import UnitGraph


def test_reassign_empty_keeps_student_units_and_connects():
    # two students of zone 0 joined to their root only through empty units the MIP gave
    # to zone 1: handing the empty units out again connects zone 0 at no cost
    xy, edges = grid(5, 1)
    d = np.array([1, 0, 0, 1, 1], float)
    problem = Problem.from_arrays(np.zeros((5, 2)), d, edges=edges, roots=[0, 4])
    a = np.array([0, 1, 1, 0, 1])
    graph = cg.UnitGraph.of(problem)
    b, detached = repair.reassign_empty(problem, graph, a)
    assert not detached.any()
    assert b.tolist() == [0, 0, 0, 0, 1]
    assert cg.is_contiguous(problem, graph, b)


def test_make_valid_turns_fragments_and_overload_into_a_valid_plan():
    prob, edges = make(capacity=[60, 60, 60])
    g = UnitGraph.of(prob)
    # nearest school, then a scatter of units handed to the far school: fragments appear
    a = np.argmin(prob.cost, axis=1)
    a[[10, 13, 30]] = 2
    a[prob.roots] = np.arange(3)
    assert not zones_connected(a, prob, edges)
    b = repair.make_valid(prob, g, a)
    assert b is not None
    assert zones_connected(b, prob, edges)
    assert_plan_valid(prob, b)  # the independent checker
    load = loads(prob, b)
    assert (load <= 60 + 1e-9).all() and (load >= 0.3 * 60 - 1e-9).all()

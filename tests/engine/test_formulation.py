"""One formulation, two routes: the HiGHS arrays and the Pyomo model hold the same rows.

Both routes are built from districting.engine.formulation; this reads each route's model
back from the solver-facing object (highspy's own LP, Pyomo's own constraint expressions)
and compares them entry by entry, so a route that wrote a row of its own, dropped a family
or mapped a column wrongly fails here.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo
import pytest
from pyomo.repn import generate_standard_repn
from test_pyomo_route import grid, rich_problem

from districting import Problem
from districting.engine.formulation import formulate
from districting.engine.highs_route import HighsRoute
from districting.engine.pyomo_route import build_model


def rooted_problem() -> Problem:
    """A 3 x 4 grid, three sites standing in units 0, 5 and 11 (one always open, p = 2),
    two demand rows, a floor, a move limit: every row family appears."""
    xy, edges = grid(3, 4)
    sites = xy[[0, 5, 11]]
    cost = np.abs(xy[:, None] - sites[None]).sum(axis=2)
    d0 = np.array([3, 1, 2, 4, 1, 2, 3, 1, 2, 2, 1, 3], float)
    demand = np.vstack([d0, d0 + 1])
    current = np.argmin(cost, axis=1)
    return Problem.from_arrays(cost, demand, np.full(3, 22.0), p=2,
                               open_sites=[True, False, False], edges=edges, roots=[0, 5, 11],
                               min_util=0.2, max_util=0.9, current=current,
                               stability_weight=0.5, max_moved=12.0)


def whole_feeding_problem() -> Problem:
    """The rooted case with whole feeding from three lower zones (rows x[i, j] = x[r_g, j])."""
    groups = np.array([0, 0, 1, 1, 0, 2, 2, 1, 0, 2, 2, 1])
    return rooted_problem().replace(feeder_groups=groups, feeder_rule="whole")


def split_problem() -> Problem:
    """The rooted case where each of three lower zones may feed two sites (z columns)."""
    return whole_feeding_problem().replace(feeder_splits=1)


def practice_problem() -> Problem:
    """The rooted case with a walk zone, a cap on transported students and two group bands
    (the second group counted in the plan year only): the practice families appear."""
    base = rooted_problem()
    walk = base.cost <= 2.0
    d = base.demand
    groups = np.stack([np.floor(d / 2), np.vstack([np.minimum(d[0], 1), np.full(12, np.nan)])])
    return base.replace(walk=walk, max_transported=20.0, groups=groups, group_band=0.3)


def highs_rows(route: HighsRoute):
    """(dense A, row lower, row upper, cost, col lower, col upper) as highspy holds them."""
    lp = route.h.getLp()
    a = np.zeros((lp.num_row_, lp.num_col_))
    start, index, value = (np.asarray(lp.a_matrix_.start_), np.asarray(lp.a_matrix_.index_),
                           np.asarray(lp.a_matrix_.value_))
    for c in range(lp.num_col_):
        for k in range(start[c], start[c + 1]):
            a[index[k], c] = value[k]
    return (a, np.asarray(lp.row_lower_), np.asarray(lp.row_upper_), np.asarray(lp.col_cost_),
            np.asarray(lp.col_lower_), np.asarray(lp.col_upper_))


def pyomo_rows(model, route: HighsRoute):
    """The same six arrays read back from the Pyomo model's constraints and variables, each
    variable x[i, j] / y[j] put in the column the HiGHS route gave that pair / site."""
    col = {id(model.x[i, j]): int(route.colmap[i, j]) for i, j in model.P}
    col.update({id(model.y[j]): int(route.ycol[j]) for j in model.J if route.ycol[j] >= 0})
    col.update({id(model.z[k]): int(c) for k, c in enumerate(route.formulation.zcol)})
    ncol = route.ncol
    variables = [None] * ncol
    for v in list(model.x.values()) + list(model.y.values()) + list(model.z.values()):
        if id(v) in col:
            variables[col[id(v)]] = v
    rows, lo, hi = [], [], []
    for con in model.component_data_objects(ctype=pyo.Constraint, active=True):
        repn = generate_standard_repn(con.body)
        r = np.zeros(ncol)
        for v, c in zip(repn.linear_vars, repn.linear_coefs, strict=True):
            r[col[id(v)]] += c
        const = float(repn.constant)
        rows.append(r)
        lo.append(-np.inf if con.lower is None else float(con.lower.value if hasattr(
            con.lower, "value") else con.lower) - const)
        hi.append(np.inf if con.upper is None else float(con.upper.value if hasattr(
            con.upper, "value") else con.upper) - const)
    obj = generate_standard_repn(model.objective.expr)
    cost = np.zeros(ncol)
    for v, c in zip(obj.linear_vars, obj.linear_coefs, strict=True):
        cost[col[id(v)]] += c
    lb = np.array([v.lb for v in variables], float)
    ub = np.array([v.ub for v in variables], float)
    return np.array(rows), np.array(lo), np.array(hi), cost, lb, ub


@pytest.mark.parametrize("make", [rich_problem, rooted_problem, whole_feeding_problem,
                                  split_problem, practice_problem])
def test_highs_and_pyomo_routes_hold_the_same_matrix(make):
    problem = make()
    route = HighsRoute(problem)
    highs = highs_rows(route)
    pyomo = pyomo_rows(build_model(problem, "cuts"), route)
    for got, want, what in zip(pyomo, highs, ("A", "row lower", "row upper", "cost",
                                              "column lower", "column upper"), strict=True):
        assert got.shape == want.shape, what
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12, err_msg=what)


def test_every_family_is_written_on_the_rooted_case():
    # the families the routes used to disagree on (cover rows were HiGHS-only) are present
    f = formulate(rooted_problem())
    fams = {b.family for b in f.blocks if b.n_rows}
    assert fams == {"assignment", "linking", "count", "roots", "capacity", "floor", "cover",
                    "max_moved"}
    f = formulate(practice_problem())
    assert {b.family for b in f.blocks if b.n_rows} >= {"transport", "groups"}


def test_whole_feeding_rows_tie_each_unit_to_its_zone_representative():
    f = formulate(whole_feeding_problem())
    block = next(b for b in f.blocks if b.family == "feeder")
    # 12 units in 3 zones: 9 units besides the representatives, each with a row per site
    # either pair may use (all 3 here)
    assert block.n_rows == 27
    assert (block.lo == 0).all() and (block.hi == 0).all()


def test_split_limit_adds_a_column_per_zone_and_site_and_a_row_per_zone():
    f = formulate(split_problem())
    block = next(b for b in f.blocks if b.family == "splits")
    assert len(f.zcol) == 9  # 3 zones x 3 sites, after the x and y columns
    assert f.zcol.min() == f.n_pairs + int((f.ycol >= 0).sum())
    assert block.n_rows == f.n_pairs + 3  # x <= z per pair, then one limit per zone
    assert (block.hi[-3:] == 2).all()


def test_separator_rows_are_the_same_in_both_routes():
    from districting.engine.connectivity import Cut
    from districting.engine.pyomo_route import PyomoRoute

    problem = rooted_problem()
    # unit 3 (top-right corner) cut from site 1's root 5 by its neighbours 2 and 7
    cut = Cut(site=1, units=np.array([3]), separator=np.array([2, 7]), anchor=-1)
    highs, pyo_route = HighsRoute(problem), PyomoRoute(problem, "appsi_highs")
    assert highs.add_cuts([cut]) == pyo_route.add_cuts([cut]) == 1
    a = highs_rows(highs)
    b = pyomo_rows(pyo_route.model, highs)
    np.testing.assert_allclose(b[0], a[0])
    np.testing.assert_allclose(b[2], a[2])

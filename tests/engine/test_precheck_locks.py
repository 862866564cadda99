"""Locks checked before any solve: each hand-made town has one lock conflict, worked by hand,
and the finding must name the units, the schools and the lock standing in the way."""

from __future__ import annotations

import numpy as np
from grid_town import grid_town

from districting.engine.precheck import precheck
from tests.engine.test_diagnose import make, only, path_edges


def test_locked_units_overfill_their_school():
    # U0, U1, U2 (5, 4, 3 students) locked to Aspen, 12 seats at 90%: 10.8 seats, so
    # 12 - 10.8 = 1.2 students too many (rounded up: about 2). Birch takes U3.
    p = make([[1, 2]] * 4, [5, 4, 3, 1], capacity=[12, 12], max_util=0.9,
             locks={0: 0, 1: 0, 2: 0})
    msg = only(precheck(p), "locked to Aspen")
    assert msg.startswith("The 3 units locked to Aspen hold 12 students in 2027 "
                          "(U0 (5), U1 (4), U2 (3)), but Aspen may seat at most about 10 "
                          "(90% of 12 seats): about 2 students too many.")
    assert "remove a lock to Aspen" in msg


def test_locked_units_overfill_only_in_a_later_year():
    # 2027: 4 + 4 = 8 <= 10 seats; 2028: 6 + 6 = 12 > 10.
    p = make([[1, 2]] * 3, [[4, 4, 1], [6, 6, 1]], capacity=[10, 20], locks={0: 0, 1: 0})
    msg = only(precheck(p), "locked to Aspen")
    assert "hold 12 students in 2028" in msg and "2 students too many" in msg


def test_locks_that_fit_are_not_reported():
    p = make([[1, 2]] * 3, [[4, 4, 1], [5, 5, 1]], capacity=[10, 20], locks={0: 0, 1: 0})
    assert precheck(p) == []


def test_a_lock_between_a_locked_unit_and_its_school_is_named():
    # Path U0-U1-U2-U3, Aspen in U0, Birch in U3: U2 locked to Aspen cuts U1 (locked to
    # Birch) off from U3.
    p = make(np.ones((4, 2)), [1, 1, 1, 1], edges=path_edges(4), roots=[0, 3],
             locks={1: 1, 2: 0})
    msg = only(precheck(p), "U1 is locked to Birch")
    assert "the lock of U2 (locked to Aspen) cuts it off from Birch's unit U3" in msg
    assert "remove one of these locks, or the lock of U1" in msg


def test_a_forbid_in_the_way_is_not_blamed_on_a_lock():
    # Same path, U2 may not go to Birch (a forbid, no lock): no lock to name.
    forb = np.zeros((4, 2), bool)
    forb[2, 1] = True
    p = make(np.ones((4, 2)), [1, 1, 1, 1], edges=path_edges(4), roots=[0, 3],
             locks={1: 1}, forbidden=forb)
    msg = only(precheck(p), "U1 is locked to Birch")
    assert "forbidden or out of reach" in msg and "(locked to" not in msg


def test_a_unit_cut_off_by_a_lock_names_it():
    # Aspen in U0, Birch in U1; U2 touches U0, U1 and U3; U3 touches only U2 and may not go
    # to Birch (out of reach). Locking U2 to Birch leaves U3 no way to Aspen.
    cost = np.ones((4, 2))
    cost[3, 1] = np.inf
    p = make(cost, [1, 1, 1, 1], edges=[(0, 2), (1, 2), (2, 3)], roots=[0, 1], locks={2: 1})
    msg = only(precheck(p), "U3")
    assert ("cannot be joined to any school's zone: the lock of U2 (locked to Birch) cut it "
            "off from Aspen") in msg


def test_a_floor_lost_to_locks_names_them():
    # Aspen's floor is 50% of 20 = 10; it may take U0 and U2 (4 + 4 = 8) because U1 (4) is
    # locked to Birch; with U1 it would reach 12.
    p = make([[1, 2]] * 4, [4, 4, 4, 4], capacity=[20, 20], min_util=[0.5, 0.0],
             locks={1: 1, 3: 1})
    msg = only(precheck(p), "Aspen cannot reach its minimum utilization")
    assert "Without the locks of U1 (locked to Birch), U3 (locked to Birch) it could." in msg
    assert msg.endswith("To fix: remove some of those locks, or lower its minimum "
                        "utilization, allow it more units (maximum distance, forbids), or "
                        "close it.")


def test_no_false_alarm_on_a_large_town_with_scattered_locks():
    # 60 x 60 grid of units (3,600), 25 schools, 40 units locked to their nearest school,
    # seats to spare: every lock can be honoured, so the checks must find nothing.
    side, m = 60, 25
    rng, roots, cost, edges = grid_town(side, m, seed=5)
    n = side * side
    locks = {int(i): int(np.argmin(cost[i])) for i in rng.choice(n, 40, replace=False)}
    p = make(cost, np.full(n, 10.0), capacity=np.full(m, 3000.0), edges=edges, roots=roots,
             locks=locks, site_names=[f"S{j}" for j in range(m)])
    assert precheck(p) == []

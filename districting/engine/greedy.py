"""A first valid plan for zones without contiguity: medians from the LP, a regret-ordered
assignment within every cap, then moves and swaps that lower the cost.

Without contiguity rows the exact rounds are a capacitated p-median MIP, and on tight
published instances HiGHS can run a minute and a half without an incumbent (seen on Lorena
& Senne's SJC4a, 402 points, 40 medians). This module gives it one in well under a second:

1. Medians: the sites always open, then the candidates with the largest LP load (the LP
   relaxation's students per site), until ``p`` sites are open (LP-guided median choice;
   every site stays a candidate for the exact rounds).
2. Assignment: units in decreasing order of *regret* (the extra cost of their second-best
   open site over their best), each to its cheapest open site that still has room in every
   projected year -- the regret rule of Martello & Toth, "An algorithm for the generalized
   assignment problem", Operational Research '81 (1981). A unit that fits nowhere goes to
   the site it overloads least; the moves below then take the overload away.
3. Local search: single moves and pair swaps between two open sites (the relocate and
   exchange neighbourhoods of generalized-assignment local search), taken when they lower
   the students outside the band, or keep it and lower the cost. Locked units never move,
   and no move empties a site (the number of open sites stays ``p``).

The result is a candidate only: :meth:`~districting.engine.run.Run.consider` checks it
before it is kept, and it proves nothing.
"""

from __future__ import annotations

import time

import numpy as np

from ..problem import Problem
from ..rules import band_excess, seat_limits

__all__ = ["median_start"]

_TOL = 1e-6


def _usable(problem: Problem) -> np.ndarray:
    return ~problem.closed_sites & problem.allowed.any(axis=0)


def _forced(problem: Problem) -> np.ndarray:
    """(m,) bool: sites every plan opens (always open, or a locked unit's site)."""
    opened = problem.always_open & _usable(problem)
    opened[problem.locks[problem.locks >= 0]] = True
    return opened


def _medians_from_lp(problem: Problem, site_load: np.ndarray) -> np.ndarray:
    """(m,) bool: forced sites, then the candidates with the largest LP load."""
    opened = _forced(problem)
    usable = _usable(problem)
    for j in np.argsort(-np.asarray(site_load, float), kind="stable"):
        if opened.sum() >= problem.p:
            break
        opened[j] |= bool(usable[j])
    return opened


def _medians_greedy(problem: Problem, wc: np.ndarray) -> np.ndarray:
    """(m,) bool: forced sites, then one site at a time, the one that lowers the cost of
    every unit at its nearest open site most (the greedy-add rule of Kuehn & Hamburger,
    "A heuristic program for locating warehouses", Management Science 9, 1963)."""
    opened = _forced(problem)
    usable = _usable(problem)
    big = np.where(np.isfinite(wc), wc, 0.0).max(initial=0.0) * 10 + 1.0
    c = np.where(np.isfinite(wc), wc, big)
    cur = c[:, opened].min(axis=1) if opened.any() else np.full(problem.n_units, big)
    while opened.sum() < problem.p:
        total = np.minimum(cur[:, None], c).sum(axis=0)
        total[opened | ~usable] = np.inf
        j = int(np.argmin(total))
        if not np.isfinite(total[j]):
            break
        opened[j] = True
        cur = np.minimum(cur, c[:, j])
    return opened


def _relocate_medians(problem: Problem, a: np.ndarray, opened: np.ndarray,
                      wc: np.ndarray) -> np.ndarray:
    """Each zone's site moved to the unforced candidate that serves the zone's units at the
    least cost and holds them in every year (the alternating location-allocation step of
    Cooper, "Heuristic methods for location-allocation problems", SIAM Review 6, 1964)."""
    new = opened.copy()
    forced = _forced(problem)
    usable = _usable(problem)
    hi = seat_limits(problem)[1]
    for j in np.flatnonzero(opened & ~forced).tolist():
        z = np.flatnonzero(a == j)
        if len(z) == 0:
            continue
        load = problem.demand[:, z].sum(axis=1)
        fits = (np.broadcast_to(hi, (problem.n_sites,)) >= load.max() - _TOL) & usable
        cost = wc[z].sum(axis=0)
        cost[~fits | (new & (np.arange(problem.n_sites) != j))] = np.inf
        k = int(np.argmin(cost))
        if np.isfinite(cost[k]) and cost[k] < cost[j] - _TOL:
            new[j], new[k] = False, True
    return new


def _limits(problem: Problem, opened: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(T, m) upper and lower loads; closed-in-this-start sites take nobody."""
    t, m = problem.n_years, problem.n_sites
    floor, cap = seat_limits(problem)
    hi = np.broadcast_to(cap, (t, m)).copy()
    lo = np.broadcast_to(floor, (t, m)).copy()
    hi[:, ~opened] = 0.0
    lo[:, ~opened] = 0.0
    return hi, lo


def _assign(problem: Problem, opened: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Regret-ordered assignment within the caps (a unit that fits nowhere overloads least)."""
    n = problem.n_units
    d = problem.demand
    wc = np.where(problem.allowed & opened[None, :], problem.weighted_cost, np.inf)
    a = np.full(n, -1, np.int64)
    load = np.zeros_like(hi)
    locked = np.flatnonzero(problem.locks >= 0)
    a[locked] = problem.locks[locked]
    np.add.at(load.T, a[locked], d[:, locked].T)
    two = np.sort(wc, axis=1)[:, :2] if wc.shape[1] > 1 else np.c_[wc, np.full(n, np.inf)]
    # a unit with one open site it may use (or none) has no second choice: regret inf
    regret = np.subtract(two[:, 1], two[:, 0], out=np.full(n, np.inf),
                         where=np.isfinite(two[:, 1]))
    free = np.flatnonzero(a < 0)
    order = free[np.lexsort((-d[0, free], -regret[free]))]
    for i in order.tolist():
        room = (load + d[:, i:i + 1] <= hi + _TOL).all(axis=0)
        c = np.where(room, wc[i], np.inf)
        j = int(np.argmin(c))
        if not np.isfinite(c[j]):
            over = np.maximum(load + d[:, i:i + 1] - hi, 0.0).sum(axis=0)
            j = int(np.argmin(np.where(np.isfinite(wc[i]), over, np.inf)))
            if not np.isfinite(wc[i, j]):
                return np.full(n, -1, np.int64)  # a unit with no usable site at all
        a[i] = j
        load[:, j] += d[:, i]
    return a


def _moves(problem, a, load, hi, lo, wc, movable) -> bool:
    """Apply improving single moves; True when one was taken."""
    d = problem.demand
    count = np.bincount(a, minlength=problem.n_sites)
    units = np.flatnonzero(movable & (count[a] > 1))
    if len(units) == 0:
        return False
    src = a[units]
    du = d[:, units]  # (T, u)
    # loads after moving each unit to each site: (T, u, m) on the destination side
    dest = load[:, None, :] + du[:, :, None]
    gain_dest = (band_excess(load, hi, lo)[None, :]
                 - band_excess(dest, hi[:, None, :], lo[:, None, :]))
    left = load[:, src] - du  # (T, u) the source after the move
    ex_src = band_excess(load[:, src][:, :, None], hi[:, src][:, :, None],
                         lo[:, src][:, :, None])[:, 0]
    ex_left = band_excess(left[:, :, None], hi[:, src][:, :, None], lo[:, src][:, :, None])[:, 0]
    d_ex = -(gain_dest + (ex_src - ex_left)[:, None])  # change of total excess
    d_cost = wc[units] - wc[units, src][:, None]
    d_ex[np.arange(len(units)), src] = np.inf
    better = (d_ex < -_TOL) | ((np.abs(d_ex) <= _TOL) & (d_cost < -_TOL))
    better &= np.isfinite(d_cost)
    if not better.any():
        return False
    key = np.where(better, d_ex * 1e6 + d_cost, np.inf)
    best_site = np.argmin(key, axis=1)
    best_key = key[np.arange(len(units)), best_site]
    took = False
    for k in np.argsort(best_key, kind="stable").tolist():
        if not np.isfinite(best_key[k]):
            break
        i, j, s = int(units[k]), int(best_site[k]), int(a[units[k]])
        if s == j or count[s] <= 1:
            continue
        before = band_excess(load[:, [s, j]], hi[:, [s, j]], lo[:, [s, j]]).sum()
        trial = load[:, [s, j]] + np.stack([-d[:, i], d[:, i]], axis=1)
        after = band_excess(trial, hi[:, [s, j]], lo[:, [s, j]]).sum()
        dc = wc[i, j] - wc[i, s]
        if after < before - _TOL or (after <= before + _TOL and dc < -_TOL):
            load[:, [s, j]] = trial
            a[i] = j
            count[s] -= 1
            count[j] += 1
            took = True
    return took


def _swaps(problem, a, load, hi, lo, wc, movable, opened) -> bool:
    """Apply the best improving swap between each pair of open sites; True when one was."""
    d = problem.demand
    sites = np.flatnonzero(opened)
    took = False
    for x in range(len(sites)):
        for y in range(x + 1, len(sites)):
            s, t = int(sites[x]), int(sites[y])
            ua = np.flatnonzero((a == s) & movable & np.isfinite(wc[:, t]))
            ub = np.flatnonzero((a == t) & movable & np.isfinite(wc[:, s]))
            if len(ua) == 0 or len(ub) == 0:
                continue
            dc = ((wc[ua, t] - wc[ua, s])[:, None] + (wc[ub, s] - wc[ub, t])[None, :])
            shift = d[:, ua][:, :, None] - d[:, ub][:, None, :]  # (T, |ua|, |ub|) s -> t
            ls = load[:, s][:, None, None] - shift
            lt = load[:, t][:, None, None] + shift
            ex = (band_excess(ls, hi[:, s][:, None, None], lo[:, s][:, None, None])
                  + band_excess(lt, hi[:, t][:, None, None], lo[:, t][:, None, None]))
            ex0 = band_excess(load[:, [s, t]], hi[:, [s, t]], lo[:, [s, t]]).sum()
            d_ex = ex - ex0
            better = (d_ex < -_TOL) | ((np.abs(d_ex) <= _TOL) & (dc < -_TOL))
            if not better.any():
                continue
            key = np.where(better, d_ex * 1e6 + dc, np.inf)
            p, q = np.unravel_index(int(np.argmin(key)), key.shape)
            i, k = int(ua[p]), int(ub[q])
            load[:, s] += d[:, k] - d[:, i]
            load[:, t] += d[:, i] - d[:, k]
            a[i], a[k] = t, s
            took = True
    return took


def _polish(problem: Problem, a: np.ndarray, opened: np.ndarray, hi, lo,
            stop: float) -> np.ndarray:
    """Moves and swaps (module docstring, step 3) until none pays or the time is up."""
    wc = np.where(problem.allowed & opened[None, :], problem.weighted_cost, np.inf)
    load = np.stack([np.bincount(a, weights=row, minlength=problem.n_sites)
                     for row in problem.demand])
    movable = problem.locks < 0
    if problem.roots is not None:
        movable[problem.roots[problem.roots >= 0]] = False
    swaps = problem.n_units <= 5_000
    while time.monotonic() < stop:
        moved = _moves(problem, a, load, hi, lo, wc, movable)
        if time.monotonic() >= stop:
            break
        swapped = swaps and _swaps(problem, a, load, hi, lo, wc, movable, opened)
        if not (moved or swapped):
            break
    return a


def _cost(problem: Problem, a: np.ndarray) -> float:
    return float(problem.weighted_cost[np.arange(problem.n_units), a].sum())


def _from_medians(problem: Problem, opened: np.ndarray, stop: float) -> np.ndarray | None:
    """Assignment to ``opened`` and polish; Cooper's relocation while it pays."""
    best, best_cost = None, np.inf
    seen: set[bytes] = set()
    while opened.tobytes() not in seen and time.monotonic() < stop:
        seen.add(opened.tobytes())
        hi, lo = _limits(problem, opened)
        a = _assign(problem, opened, hi)
        if (a < 0).any():
            return best
        a = _polish(problem, a, opened, hi, lo, stop)
        cost = _cost(problem, a)
        if cost >= best_cost - _TOL:
            break
        best, best_cost = a.copy(), cost
        wc = np.where(problem.allowed, problem.weighted_cost, np.inf)
        opened = _relocate_medians(problem, a, opened, wc)
    return best


def median_start(problem: Problem, site_load: np.ndarray | None = None,
                 seconds: float = 2.0) -> np.ndarray | None:
    """A plan for ``problem`` without contiguity (module docstring), or None.

    ``site_load``: (m,) students per site in the LP relaxation (guides the medians; without
    it the greedy-add rule chooses them); ``seconds``: time for the local search. The plan
    may still break a rule (a floor, the cap on students moved): the caller checks it.
    """
    if problem.n_units == 0:
        return None
    stop = time.monotonic() + max(seconds, 0.0)
    if problem.p is None:
        opened = _usable(problem)
    elif site_load is not None:
        opened = _medians_from_lp(problem, site_load)
    else:
        opened = _medians_greedy(problem, np.where(problem.allowed, problem.weighted_cost,
                                                   np.inf))
    return _from_medians(problem, opened, stop)

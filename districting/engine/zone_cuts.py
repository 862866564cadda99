"""Cut units of a zone: the units whose leaving would split it (articulation points).

:func:`cut_units` finds them for one zone by one depth-first search; :class:`ZoneCuts`
answers :func:`~districting.engine.connectivity.stays_connected` from them for a local
search that asks about many moves per step (:func:`districting.engine.rebalance.rebalance`).
"""

from __future__ import annotations

import numpy as np

from .connectivity import stays_connected

__all__ = ["cut_units", "ZoneCuts"]

#: ZoneCuts: single searches per zone before its cut units are computed at once.
_SEARCHES_FIRST = 4
#: ZoneCuts: changes of a zone after which its cut units are computed again.
_STALE_CHANGES = 8


def cut_units(units, j: int, al: list[int], nbrs: list[list[int]]) -> set[int]:
    """The units of zone j (``units``: all of them) whose leaving would split the piece of
    the zone they lie in: the articulation points of the subgraph the zone induces
    (Hopcroft & Tarjan, "Algorithm 447: efficient algorithms for graph manipulation",
    Communications of the ACM 16(6), 1973), one iterative depth-first search per piece,
    O(units + edges inside the zone). ``i not in cut_units(...)`` is
    :func:`stays_connected` for every unit of the zone at once.
    """
    disc: dict[int, int] = {}
    low: dict[int, int] = {}
    cut: set[int] = set()
    for s in units:
        if s in disc:
            continue
        disc[s] = low[s] = len(disc)
        children = 0
        stack = [(s, -1, iter(nbrs[s]))]
        while stack:
            x, parent, it = stack[-1]
            for y in it:
                if al[y] != j or y == parent:
                    continue
                if y in disc:
                    low[x] = min(low[x], disc[y])
                else:
                    disc[y] = low[y] = len(disc)
                    stack.append((y, x, iter(nbrs[y])))
                    break
            else:
                stack.pop()
                if parent < 0:
                    continue
                low[parent] = min(low[parent], low[x])
                if parent == s:
                    children += 1
                elif low[x] >= disc[parent]:
                    cut.add(parent)
        if children >= 2:
            cut.add(s)
    return cut


class ZoneCuts:
    """:func:`stays_connected` for a local search that tries many moves per step, answered
    from each zone's :func:`cut_units`.

    While a zone's cut units are fresh the answer is theirs. After the zone changed, they
    are kept for up to ``_STALE_CHANGES`` changes as a filter: a unit that was a cut unit
    gets "no" at once, any other is checked by one search. So "yes" is always true; a "no"
    may miss a move that a few changes made possible (a branch hanging on the unit left).
    The demo's high level, two zones of about 780 units: the repair asked about 33 moves
    per step, one search each (61,802 in two repairs), then one depth-first search per step.
    """

    def __init__(self, al: list[int], nbrs: list[list[int]]) -> None:
        self.al, self.nbrs = al, nbrs
        self._cut: dict[int, set[int]] = {}
        self._age: dict[int, int] = {}  # changes of the zone since its cut units
        self._asked: dict[int, int] = {}  # searches per zone without cut units

    def keeps(self, i: int, j: int, av: np.ndarray) -> bool:
        """Zone j stays connected when unit i leaves it; ``av``: ``al`` as an array now.
        The first few questions about a zone without cut units are single searches (often
        cut short early)."""
        cut = self._cut.get(j)
        if cut is not None:
            if self._age[j] == 0 or i in cut:
                return i not in cut
            return stays_connected(i, j, self.al, self.nbrs)
        asked = self._asked.get(j, 0)
        if asked < _SEARCHES_FIRST:
            self._asked[j] = asked + 1
            return stays_connected(i, j, self.al, self.nbrs)
        cut = self._cut[j] = cut_units(np.flatnonzero(av == j).tolist(), j, self.al,
                                       self.nbrs)
        self._age[j] = 0
        return i not in cut

    def changed(self, *zones: int) -> None:
        """The units of ``zones`` changed (every zone when none is named)."""
        if not zones:
            self._cut.clear()
            self._asked.clear()
        for z in zones:
            self._asked.pop(z, None)
            if z in self._cut:
                self._age[z] += 1
                if self._age[z] > _STALE_CHANGES:
                    del self._cut[z]

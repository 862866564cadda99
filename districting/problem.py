"""The assignment problem as plain arrays.

A :class:`Problem` is what every solver route reads: per-student costs between planning
units and school sites, student counts per year, capacities and utilization bands, which
sites are open, candidates or closed, the unit adjacency (for contiguity), each site's root
unit, locks, forbidden pairs, today's assignment and the stability weight. It carries no
geometry and no names; :mod:`districting.study` builds one from a validated project.

Notation used across the engine (and in :mod:`districting.engine.formulation`):

- ``i`` a planning unit (``n`` of them), ``j`` a site (``m``), ``t`` a year (``T`` rows,
  row 0 the plan year);
- ``c[i, j]`` cost per student, ``d[t, i]`` students, ``Q[j]`` capacity,
  ``u_max[j]``, ``u_min[j]`` the utilization band;
- ``x[i, j]`` = 1 when unit i is assigned to site j, ``y[j]`` = 1 when site j is open;
- ``g[i]`` the zone of unit i at the neighbouring school level (a feeder group, held fixed).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Problem"]


def _as_float_array(name: str, value, shape: tuple[int, ...]) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        arr = np.full(shape, float(arr))
    if arr.shape != shape:
        raise ValueError(f"{name} has shape {arr.shape}; expected {shape}")
    return arr


def _same_array(a, b) -> bool:
    """Equal arrays (both None counts as equal)."""
    if a is None or b is None:
        return a is None and b is None
    return a.shape == b.shape and bool(np.array_equal(a, b))


def _feeder_groups(groups, rule: str, n: int, roots) -> np.ndarray | None:
    """The checked feeder groups (None without a rule)."""
    if rule not in ("", "whole", "nested"):
        raise ValueError(f"feeder_rule must be '', 'whole' or 'nested'; got {rule!r}")
    if groups is None or not rule:
        return None
    g = np.asarray(groups, np.int64)
    if g.shape != (n,):
        raise ValueError(f"feeder_groups must have shape ({n},)")
    if rule == "nested" and roots is None:
        raise ValueError("the nested feeder rule needs each site's root unit (roots)")
    return g


def _moved_pairs(reference: np.ndarray, m: int) -> np.ndarray:
    """(n, m) bool: pairs that move a unit away from its reference site (-1: never)."""
    return (reference[:, None] >= 0) & (np.arange(m)[None, :] != reference[:, None])


@dataclass(frozen=True, eq=False)
class Problem:
    """A capacitated, optionally contiguous, whole-unit assignment problem.

    Build one with :meth:`from_arrays`; change one for a re-solve with :meth:`replace`.
    All arrays are read-only views; a Problem never changes after it is made.
    """

    cost: np.ndarray  # (n, m) cost per student; inf where the pair is not allowed
    demand: np.ndarray  # (T, n) students; row 0 is the plan year
    capacity: np.ndarray | None  # (m,) or None: no capacity limit
    max_util: np.ndarray  # (m,) upper share of capacity, every year
    min_util: np.ndarray  # (m,) lower share of capacity, every year (open sites only)
    p: int | None  # total number of open sites (forced-open ones included); None: all open
    open_sites: np.ndarray  # (m,) bool: forced open
    closed_sites: np.ndarray  # (m,) bool: excluded, nobody is assigned there
    edges: np.ndarray | None  # (k, 2) int unit pairs; when given every zone is connected
    roots: np.ndarray | None  # (m,) unit index each site stands in, -1 for none
    locks: np.ndarray  # (n,) site index a unit is locked to, -1 for none
    forbidden: np.ndarray  # (n, m) bool: pair may not be used
    current: np.ndarray  # (n,) today's site per unit, -1 for none
    stability_weight: float = 0.0  # added cost per student moved away from today's site
    max_moved: float | None = None  # at most this many students (plan year) change site
    distance: np.ndarray | None = None  # (n, m) travel distance for reports; None: = cost
    years: tuple = field(default=())  # labels of the demand rows, for messages
    unit_names: tuple = field(default=())  # unit ids, for messages (empty: "unit <i>")
    site_names: tuple = field(default=())  # site names, for messages (empty: "site <j>")
    level: str = ""  # school level, for messages
    # feeder rule against the neighbouring level's zones (held fixed): "whole" (this level
    # is the upper one: all units of one lower zone go to one site) or "nested" (this level
    # is the lower one: each zone lies inside the upper zone of its site's root unit)
    feeder_groups: np.ndarray | None = None  # (n,) g[i]: the neighbouring zone, -1 none
    feeder_rule: str = ""  # "", "whole" or "nested"
    feeder_names: tuple = ()  # names of the groups, for messages
    feeder_splits: int = 0  # "whole" only: each lower zone may feed 1 + this many sites
    walk: np.ndarray | None = None  # (n, m) bool: within walking distance; None: no walk zone
    max_transported: float | None = None  # at most this many plan-year students beyond walk
    groups: np.ndarray | None = None  # (G, T, n) group students per demand row; NaN: no band
    group_band: float = 0.0  # each school's group share within the district's +- this; 0: none
    group_names: tuple = field(default=())  # names of the groups, for messages
    transport_weight: float = 0.0  # added cost per plan-year student beyond walking distance
    # the option being edited (a rerun keeps it unless the planner asks otherwise): its site
    # per unit (-1 none) and the cost charged per plan-year student moved away from it
    anchor: np.ndarray | None = None
    anchor_weight: float = 0.0

    # ------------------------------------------------------------------ constructors
    @classmethod
    def from_arrays(
        cls,
        cost,
        demand,
        capacity=None,
        p: int | None = None,
        open_sites=None,
        edges: Iterable[tuple[int, int]] | None = None,
        roots=None,
        locks: Mapping[int, int] | None = None,
        *,
        max_util=1.0,
        min_util=0.0,
        closed_sites=None,
        forbidden=None,
        current=None,
        stability_weight: float = 0.0,
        max_moved: float | None = None,
        distance=None,
        years: Iterable = (),
        unit_names: Iterable = (),
        site_names: Iterable = (),
        level: str = "",
        feeder_groups=None,
        feeder_rule: str = "",
        feeder_names: Iterable = (),
        feeder_splits: int = 0,
        walk=None,
        max_transported: float | None = None,
        groups=None,
        group_band: float = 0.0,
        group_names: Iterable = (),
        transport_weight: float = 0.0,
        anchor=None,
        anchor_weight: float = 0.0,
    ) -> Problem:
        """Make a problem from arrays.

        ``cost`` is (n_units, n_sites); ``demand`` is (n_units,) or (n_years, n_units) with
        the plan year first. The objective is ``sum_ij demand[0, i] * cost[i, j] * x[i, j]``
        (plus ``stability_weight * demand[0, i]`` for every unit moved away from
        ``current[i]``); capacity and the utilization band hold in every demand row.
        ``p`` is the number of open sites in total, those forced open by ``open_sites``
        included; ``None`` opens every site that is not closed. With ``edges`` every zone
        must be connected in that graph and hold its site's root unit; ``roots`` defaults
        to ``arange(n)`` when units and sites are the same points (n_units == n_sites).
        ``feeder_groups`` (n,) and ``feeder_rule`` ("whole" or "nested") state the feeder
        rule against the neighbouring level's zones (see the class fields); with
        ``feeder_splits`` N > 0, "whole" lets each lower zone feed at most N + 1 sites.
        ``walk`` marks the pairs within walking distance; ``max_transported`` caps the
        plan-year students assigned beyond it. ``groups`` (G, T, n) holds each group's
        students per demand row (NaN rows: no band that year); with ``group_band`` > 0
        every open school's share of each group stays within ``group_band`` of the
        district's share of that row. ``transport_weight`` is added to the objective per
        plan-year student assigned beyond walking distance. ``anchor`` (n,) is the site
        per unit of an option being edited (-1: none); ``anchor_weight`` is added per
        plan-year student moved away from it, so a rerun keeps the rest of that option.
        """
        cost = np.array(cost, dtype=float)
        if cost.ndim != 2:
            raise ValueError(f"cost must be 2-D (units x sites); got shape {cost.shape}")
        n, m = cost.shape
        cost = np.where(np.isnan(cost), np.inf, cost)
        demand = np.array(demand, dtype=float)
        if demand.ndim == 1:
            demand = demand[None, :]
        if demand.ndim != 2 or demand.shape[1] != n:
            raise ValueError(f"demand must be ({n},) or (years, {n}); got {demand.shape}")
        if np.any(~np.isfinite(demand)) or np.any(demand < 0):
            raise ValueError("demand must be finite and non-negative")
        cap = None if capacity is None else _as_float_array("capacity", capacity, (m,))
        if p is not None and not 1 <= int(p) <= m:
            raise ValueError(f"p={p} must be between 1 and the number of sites ({m})")
        opened = np.zeros(m, bool) if open_sites is None else np.asarray(open_sites, bool)
        closed = np.zeros(m, bool) if closed_sites is None else np.asarray(closed_sites, bool)
        if opened.shape != (m,) or closed.shape != (m,):
            raise ValueError(f"open_sites and closed_sites must have shape ({m},)")
        if np.any(opened & closed):
            raise ValueError("a site cannot be both forced open and closed")
        edge_arr = None
        if edges is not None:
            edge_arr = np.asarray(list(edges) if not isinstance(edges, np.ndarray) else edges,
                                  dtype=np.int64).reshape(-1, 2)
            if edge_arr.size and (edge_arr.min() < 0 or edge_arr.max() >= n):
                raise ValueError(f"edges must name unit indices 0..{n - 1}")
            edge_arr = edge_arr[edge_arr[:, 0] != edge_arr[:, 1]]
            edge_arr = np.unique(np.sort(edge_arr, axis=1), axis=0)
        root_arr = None
        if roots is not None:
            root_arr = np.asarray(roots, dtype=np.int64)
            if root_arr.shape != (m,) or root_arr.max(initial=-1) >= n:
                raise ValueError(f"roots must be ({m},) unit indices (or -1)")
        elif edge_arr is not None:
            if n != m:
                raise ValueError("roots are required with edges when units and sites differ")
            root_arr = np.arange(m, dtype=np.int64)
        lock_arr = np.full(n, -1, dtype=np.int64)
        for unit, site in (locks or {}).items():
            if not (0 <= int(unit) < n and 0 <= int(site) < m):
                raise ValueError(f"lock {unit}->{site} is outside 0..{n - 1} x 0..{m - 1}")
            lock_arr[int(unit)] = int(site)
        forb = np.zeros((n, m), bool) if forbidden is None else np.asarray(forbidden, bool)
        if forb.shape != (n, m):
            raise ValueError(f"forbidden must have shape ({n}, {m})")
        cur = np.full(n, -1, np.int64) if current is None else np.asarray(current, np.int64)
        if cur.shape != (n,):
            raise ValueError(f"current must have shape ({n},)")
        dist = None if distance is None else _as_float_array("distance", distance, (n, m))
        fgroups = _feeder_groups(feeder_groups, feeder_rule, n, root_arr)
        walk_arr = None if walk is None else np.asarray(walk, bool)
        if walk_arr is not None and walk_arr.shape != (n, m):
            raise ValueError(f"walk must have shape ({n}, {m})")
        if (max_transported is not None or transport_weight) and walk_arr is None:
            raise ValueError("max_transported needs walk (the pairs within walking distance)")
        grp = None if groups is None else np.asarray(groups, float)
        if grp is not None and (grp.ndim != 3 or grp.shape[1:] != demand.shape):
            raise ValueError(f"groups must have shape (groups, {demand.shape[0]}, {n})")
        anc = None if anchor is None else np.asarray(anchor, np.int64)
        if anc is not None and (anc.shape != (n,) or anc.max(initial=-1) >= m):
            raise ValueError(f"anchor must have shape ({n},) with site indices below {m}")
        if anchor_weight and anc is None:
            raise ValueError("anchor_weight needs anchor (the option being edited)")
        prob = cls(
            cost=cost,
            demand=demand,
            capacity=cap,
            max_util=_as_float_array("max_util", max_util, (m,)),
            min_util=_as_float_array("min_util", min_util, (m,)),
            p=None if p is None else int(p),
            open_sites=opened,
            closed_sites=closed,
            edges=edge_arr,
            roots=root_arr,
            locks=lock_arr,
            forbidden=forb,
            current=cur,
            stability_weight=float(stability_weight),
            max_moved=None if max_moved is None else float(max_moved),
            distance=dist,
            years=tuple(years),
            unit_names=tuple(unit_names),
            site_names=tuple(site_names),
            level=level,
            feeder_groups=fgroups,
            feeder_rule=feeder_rule if fgroups is not None else "",
            feeder_names=tuple(feeder_names),
            feeder_splits=max(int(feeder_splits), 0),
            walk=walk_arr,
            max_transported=None if max_transported is None else float(max_transported),
            groups=grp,
            group_band=float(group_band),
            group_names=tuple(group_names),
            transport_weight=float(transport_weight),
            anchor=anc,
            anchor_weight=float(anchor_weight),
        )
        prob._freeze()
        return prob

    def _freeze(self) -> None:
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                value.setflags(write=False)

    def replace(self, **changes) -> Problem:
        """A copy with some fields changed (for a re-solve after a lock, a cap, a closure)."""
        prob = dataclasses.replace(self, **changes)
        prob._freeze()
        return prob

    # ------------------------------------------------------------------ derived views
    @property
    def n_units(self) -> int:
        return self.cost.shape[0]

    @property
    def n_sites(self) -> int:
        return self.cost.shape[1]

    @property
    def n_years(self) -> int:
        return self.demand.shape[0]

    @property
    def contiguous(self) -> bool:
        return self.edges is not None

    @property
    def candidates(self) -> np.ndarray:
        """Sites whose opening the solver decides (none when p is None)."""
        if self.p is None:
            return np.zeros(self.n_sites, bool)
        return ~self.open_sites & ~self.closed_sites

    @property
    def always_open(self) -> np.ndarray:
        """Sites open in every plan: forced open, or every non-closed site when p is None."""
        if self.p is None:
            return ~self.closed_sites
        return self.open_sites.copy()

    @property
    def allowed(self) -> np.ndarray:
        """(n, m) bool: pairs a plan may use (finite cost, not forbidden, site not closed).

        A lock allows only its own site for that unit. Under the "nested" feeder rule a
        unit may join a site only when both lie in the same neighbouring zone (the site's
        root unit's zone), a lock included.
        """
        ok = np.isfinite(self.cost) & ~self.forbidden & ~self.closed_sites[None, :]
        locked = self.locks >= 0
        if locked.any():
            ok[locked] = False
            ok[np.flatnonzero(locked), self.locks[locked]] = True
        if self.feeder_rule == "nested":
            ok &= self.nested_pairs
        return ok

    @property
    def nested_pairs(self) -> np.ndarray:
        """(n, m) bool: pairs the "nested" feeder rule leaves (g[i] = g[root_j]; a unit or a
        root without a neighbouring zone is free)."""
        g = self.feeder_groups
        if g is None or self.roots is None:
            return np.ones((self.n_units, self.n_sites), bool)
        root_g = np.where(self.roots >= 0, g[np.maximum(self.roots, 0)], -1)
        return (g[:, None] < 0) | (root_g[None, :] < 0) | (g[:, None] == root_g[None, :])

    @property
    def weighted_cost(self) -> np.ndarray:
        """(n, m) objective coefficient of x[i, j]: d[0, i] * c[i, j] (+ stability term, +
        transport charge on pairs beyond walking distance, + the charge per student moved
        away from the anchor option)."""
        d0 = self.demand[0][:, None]
        with np.errstate(invalid="ignore"):
            w = np.where(np.isfinite(self.cost), d0 * self.cost, np.inf)
        if self.stability_weight:
            w = w + self.stability_weight * d0 * _moved_pairs(self.current, self.n_sites)
        if self.transport_weight and self.walk is not None:
            w = w + self.transport_weight * d0 * ~self.walk
        if self.anchor_weight and self.anchor is not None:
            w = w + self.anchor_weight * d0 * _moved_pairs(self.anchor, self.n_sites)
        return w

    def is_restriction_of(self, other: Problem) -> bool:
        """True when every plan valid here is valid for ``other`` at the same cost.

        Then a lower bound proven for ``other`` (and every cut found for it) holds here
        too: a lock, a forbid, a closure, a lower cap or a higher floor only remove plans.
        The check is conservative: any difference it does not recognise returns False.
        """
        return (self._plans_within(other)
                and _same_array(self.weighted_cost, other.weighted_cost))

    def bound_shift(self, other: Problem) -> float | None:
        """What to add to a lower bound proven for ``other`` so that it holds here, or None.

        When every plan valid here is valid for ``other`` (see :meth:`is_restriction_of`)
        but the costs differ (a rerun charged against the option being edited, a changed
        charge per student moved): for every plan x valid here
        ``f(x) - f_other(x) = sum_i (w - w_other)[i, x_i] >= sum_i min_j (w - w_other)[i, j]``
        over the pairs allowed here, so ``bound_other + shift`` is a bound here. With the
        same costs the shift is 0; moving the anchor to another option of weight W gives
        at least ``-W x`` (the students whose anchor school changed).
        """
        if not self._plans_within(other):
            return None
        ok = self.allowed
        with np.errstate(invalid="ignore"):
            diff = np.where(ok, self.weighted_cost - other.weighted_cost, np.inf)
        per_unit = diff.min(axis=1)
        if not np.isfinite(per_unit).all():
            return None
        return float(per_unit.sum())

    def _plans_within(self, other: Problem) -> bool:
        """Every plan valid here is valid for ``other`` (costs aside); conservative."""
        if (self.cost.shape != other.cost.shape or self.demand.shape != other.demand.shape
                or self.p != other.p or self.contiguous != other.contiguous
                or self.feeder_rule != other.feeder_rule
                or self.feeder_splits > other.feeder_splits):
            return False
        if not _same_array(self.feeder_groups, other.feeder_groups):
            return False
        if not (_same_array(self.demand, other.demand) and _same_array(self.edges, other.edges)
                and _same_array(self.roots, other.roots)):
            return False
        if (self.allowed & ~other.allowed).any() or (other.open_sites & ~self.open_sites).any():
            return False
        if other.capacity is not None:
            if self.capacity is None:
                return False
            tol = 1e-9
            if (self.max_util * self.capacity > other.max_util * other.capacity + tol).any():
                return False
            if (self.min_util * self.capacity < other.min_util * other.capacity - tol).any():
                return False
        elif self.capacity is not None and (self.min_util > 0).any():
            return False  # floors without a cap on the other side: compare nothing loosely
        if not (_same_array(self.walk, other.walk) and _same_array(self.groups, other.groups)
                and self.group_band == other.group_band):
            return False
        if other.max_transported is not None and (
                self.max_transported is None or self.max_transported > other.max_transported):
            return False
        if other.max_moved is not None:
            if self.max_moved is None or self.max_moved > other.max_moved:
                return False
            if not _same_array(self.current, other.current):
                return False
        return True

    def unit_label(self, i: int) -> str:
        return str(self.unit_names[i]) if self.unit_names else f"unit {i}"

    def site_label(self, j: int) -> str:
        return str(self.site_names[j]) if self.site_names else f"site {j}"

    def year_label(self, t: int) -> str:
        return str(self.years[t]) if self.years else ("plan year" if t == 0 else f"year row {t}")

    @property
    def travel(self) -> np.ndarray:
        """(n, m) distance used in reports (the cost when no separate distance is given)."""
        return self.cost if self.distance is None else self.distance

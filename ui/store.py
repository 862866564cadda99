"""One session's working copy of a project, with no UI code.

A :class:`Store` holds the edits a planner makes for each school level (a
:class:`~districting.study.RunSettings` of overrides: settings, site edits, locks, forbids),
the plan on screen and the one before it, and talks to the engine
(:func:`districting.study.run`), the options (:mod:`districting.outputs.store`) and the exports.
Every edit is written as it happens to the project's store GeoPackage
(:func:`districting.outputs.store.save_state`, atomic), so a new store on the same project starts
from the last state. Two stores never share memory: unsaved work cannot leak between
browser sessions. Each store is a draft: it remembers the revision of the record it
started from, and a save over a record another session changed since is refused and
flagged (:attr:`Store.conflict`), keeping this session's edits in memory until the
planner reloads the saved record or keeps the edits as a draft of a new name. Tables come
out as pandas DataFrames for any front end.
"""

from __future__ import annotations

import math
import tempfile
import threading
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from districting import rules
from districting.intake import Inputs
from districting.intake.schema import SCHEMA
from districting.names import BadName, check_name, path_inside, slug
from districting.outputs import store as _options
from districting.outputs import tables
from districting.rules import SITE_STATUSES
from districting.study import (
    Outcome,
    RunSettings,
    build_problem,
    outcome_from_assignment,
    resolved,
    run,
)

__all__ = ["Store", "StoreError", "LockRow", "STATE_KEY", "DRAFT_PREFIX", "EDITABLE_SETTINGS"]

#: Key of the workbench's row in the store's state table (drafts of other names: "workbench:NAME").
STATE_KEY = "workbench"
DRAFT_PREFIX = STATE_KEY + ":"
STATE_VERSION = 1
#: RunSettings fields the settings panel edits, with their allowed range.
EDITABLE_SETTINGS = {
    "plan_year": None,
    "stability_weight": (0.0, 1e6),
    "max_distance": (0.0, 1e6),
    "max_moved": (0.0, 1e9),
    "gap": (0.0, 0.5),
    "time_limit": (1.0, 3600.0),
    # Utilization ranges are the project file's ([solve] in districting.intake.schema): one home.
    "max_utilization": (0.05, SCHEMA["solve"].keys["max_utilization"].high),
    "min_utilization": (0.0, SCHEMA["solve"].keys["min_utilization"].high),
}
TODAY = "Today's zones"

# One writer at a time per store file in this process (sessions share the server process).
_WRITE_LOCKS: dict[Path, threading.Lock] = {}
_LOCKS_GUARD = threading.Lock()


def _write_lock(path: Path) -> threading.Lock:
    with _LOCKS_GUARD:
        return _WRITE_LOCKS.setdefault(Path(path).resolve(), threading.Lock())


class StoreError(ValueError):
    """An edit or a run that cannot be done, in words that say what to change."""


@dataclass(frozen=True)
class LockRow:
    unit: str
    site: str
    kind: str  # "lock" or "forbid"
    source: str  # "workbench" (removable) or "project file" (decided in project.toml)


class Store:
    """The planner's edits and plans for one project, one session.

    ``inputs`` are read-only and may be shared between stores; everything else is owned by
    this store. ``persist=False`` keeps the store in memory (nothing is written).
    """

    def __init__(self, inputs: Inputs, *, persist: bool = True, draft: str = "") -> None:
        self.inputs = inputs
        self.persist = persist
        self.draft = draft  # "" = the project's main workbench record
        self.revision = 0  # of the record this store last read or wrote
        self.conflict = False  # another session saved the record since: not written
        self.damaged = ""  # the store file cannot be read or written: the message
        self._reset()
        if persist:
            _options.tidy_store(self.store_path)
        self.restore()

    def _reset(self) -> None:
        inputs = self.inputs
        levels = tuple(inputs.settings.levels)
        self.level: str = levels[0]
        self.runs: dict[str, RunSettings] = {lv: RunSettings(level=lv) for lv in levels}
        self.outcomes: dict[str, Outcome | None] = dict.fromkeys(levels)
        self.previous: dict[str, Outcome | None] = dict.fromkeys(levels)
        self._today: dict[tuple, Outcome] = {}
        self._evaluated: tuple = (None, None)
        self.last_message = ""
        self._export_dir: Path | None = None
        self._exports: tuple = (None, {})
        self._sessions: dict = {}  # engine sessions per level: cuts and bounds carry over

    # ------------------------------------------------------------------ basics
    @property
    def store_path(self) -> Path:
        return Path(self.inputs.settings.store)

    @property
    def settings(self) -> RunSettings:
        """The current level's overrides (``None`` = project default)."""
        return self.runs[self.level]

    @property
    def effective(self) -> RunSettings:
        """The current level's settings with every default filled in."""
        return resolved(self.inputs, self.settings)

    @property
    def site_ids(self) -> list[str]:
        sites = self.inputs.sites
        return sites.loc[sites["level"] == self.level, "site_id"].astype(str).tolist()

    @property
    def unit_ids(self) -> list[str]:
        return self.inputs.units["unit_id"].astype(str).tolist()

    def site_names(self) -> dict[str, str]:
        sites = self.inputs.sites
        return dict(zip(sites["site_id"].astype(str), sites["name"].astype(str), strict=True))

    @property
    def outcome(self) -> Outcome | None:
        """The plan on screen for the current level (None before the first run)."""
        return self.outcomes[self.level]

    @property
    def pending_edits(self) -> bool:
        """True when settings, sites, locks or forbids changed since the plan on screen."""
        out = self.outcome
        return out is not None and out.settings != self.effective

    def on_screen(self) -> Outcome:
        """The plan on screen evaluated under the current edits (what the tables show).

        Right after a run this is the run's outcome; after an edit (a capacity, a lock) the
        same assignment is re-evaluated so the figures and flags show the edit's effect
        before the next run. The solver's status, objective, bound and gap are kept.
        """
        out = self.outcome
        if out is None:
            return self.today()
        rs = self.effective
        if out.settings == rs:
            return out
        key = (id(out), repr(sorted(rs.to_dict().items())))
        if self._evaluated[0] != key:
            plan = out.plan
            fields = {"status": plan.status, "objective": plan.objective, "bound": plan.bound,
                      "gap": plan.gap, "rounds": plan.rounds, "message": plan.message}
            self._evaluated = (key, outcome_from_assignment(
                self.inputs, rs, out.assignment, fields, name=out.name, created=out.created))
        return self._evaluated[1]

    def today(self) -> Outcome:
        """Today's zones as an outcome under the current settings (capacities, band...)."""
        rs = self.effective
        key = (self.level, repr(sorted(rs.to_dict().items())))
        if key not in self._today:
            problem, _ = build_problem(self.inputs, rs)
            cur = problem.current
            ok = cur >= 0
            w = problem.weighted_cost[np.flatnonzero(ok), cur[ok]]
            objective = float(w[np.isfinite(w)].sum())
            self._today = {key: outcome_from_assignment(
                self.inputs, rs, cur, {"status": "feasible", "objective": objective},
                name=TODAY)}
        return self._today[key]

    # ------------------------------------------------------------------ edits
    def set_level(self, level: str) -> None:
        if level not in self.runs:
            raise StoreError(f"level {level!r} is not in this project "
                             f"(levels: {', '.join(self.runs)})")
        self.level = level
        self._save()

    def update_settings(self, **changes) -> RunSettings:
        """Change run settings of the current level (``None`` restores the project default)."""
        clean = {}
        for name, value in changes.items():
            if name not in EDITABLE_SETTINGS:
                raise StoreError(f"{name!r} is not a setting the workbench edits "
                                 f"(settings: {', '.join(EDITABLE_SETTINGS)})")
            if value is None:
                clean[name] = None
                continue
            if name == "plan_year":
                years = self.inputs.settings.years
                if int(value) not in years:
                    raise StoreError(f"plan year {value} is not a projected year; pick one of "
                                     f"{', '.join(map(str, years))}")
                clean[name] = int(value)
                continue
            lo, hi = EDITABLE_SETTINGS[name]
            v = float(value)
            if not (math.isfinite(v) and lo <= v <= hi):
                raise StoreError(f"{name.replace('_', ' ')} must be between {lo:g} and {hi:g}; "
                                 f"got {value}")
            clean[name] = v
        new = self.settings.replace(**clean)
        try:  # the project file's rules hold for a run too (min below max utilization...)
            resolved(self.inputs, new)
        except ValueError as err:
            raise StoreError(str(err)) from None
        self.runs[self.level] = new
        self._save()
        return new

    def edit_site(self, site_id: str, *, capacity=None, max_util=None, min_util=None,
                  status=None) -> RunSettings:
        """Change one site of the current level; ``None`` leaves a field as it is."""
        if site_id not in self.site_ids:
            raise StoreError(f"site {site_id!r} is not a {self.level} site "
                             f"(sites: {', '.join(self.site_ids)})")
        rs = self.settings
        cap, smax, smin, stat = (dict(rs.capacity), dict(rs.site_max_util),
                                 dict(rs.site_min_util), dict(rs.status))
        if capacity is not None:
            c = float(capacity)
            if not (math.isfinite(c) and c >= 0):
                raise StoreError(f"capacity of {site_id} must be a number of seats (0 or "
                                 f"more); got {capacity}")
            cap[site_id] = c
        for value, target, what in ((max_util, smax, "maximum"), (min_util, smin, "minimum")):
            if value is None:
                continue
            u = float(value)
            if not (math.isfinite(u) and 0 <= u <= 3):
                raise StoreError(f"{what} utilization of {site_id} must be a share of capacity "
                                 f"between 0 and 3 (1.0 = 100%); got {value}")
            target[site_id] = u
        if status is not None:
            if status not in SITE_STATUSES:
                raise StoreError(f"status of {site_id} must be one of "
                                 f"{', '.join(SITE_STATUSES)}; got {status!r}")
            stat[site_id] = status
        new = rs.replace(capacity=cap, site_max_util=smax, site_min_util=smin, status=stat)
        row = self.sites_frame(resolved_settings=resolved(self.inputs, new)).set_index("site_id")
        if row.loc[site_id, "min_util"] > row.loc[site_id, "max_util"]:
            raise StoreError(f"{site_id}: the minimum utilization is above the maximum; "
                             "lower the minimum or raise the maximum")
        self.runs[self.level] = new
        self._save()
        return new

    def _check_units(self, unit_ids: Iterable[str]) -> list[str]:
        units = [str(u) for u in unit_ids]
        known = set(self.unit_ids)
        bad = [u for u in units if u not in known]
        if bad:
            raise StoreError(f"unknown planning unit(s): {', '.join(bad[:10])}")
        if not units:
            raise StoreError("select one or more planning units on the map first")
        return units

    def _check_site(self, site_id: str, what: str) -> str:
        if site_id not in self.site_ids:
            raise StoreError(f"{what}: pick a {self.level} school "
                             f"(sites: {', '.join(self.site_ids)})")
        return site_id

    def lock(self, unit_ids: Iterable[str], site_id: str) -> RunSettings:
        """Lock units to a school (and drop any forbid of that same pair)."""
        units = self._check_units(unit_ids)
        site = self._check_site(site_id, "lock")
        status = self.effective.status.get(site) or self._file_status(site)
        if rules.is_closed(status):
            raise StoreError(f"{site} is {status} in the plan year; change its status to open "
                             "before locking units to it")
        rs = self.settings
        locks = dict(rs.locks)
        forbids = {u: list(s) for u, s in rs.forbids.items()}
        for u in units:
            locks[u] = site
            if site in forbids.get(u, []):
                forbids[u] = [s for s in forbids[u] if s != site]
                if not forbids[u]:
                    del forbids[u]
        self.runs[self.level] = rs.replace(locks=locks, forbids=forbids)
        self._save()
        return self.settings

    def unlock(self, unit_ids: Iterable[str]) -> RunSettings:
        """Remove workbench locks of these units (locks written in project.toml stay)."""
        units = set(self._check_units(unit_ids))
        rs = self.settings
        self.runs[self.level] = rs.replace(
            locks={u: s for u, s in rs.locks.items() if u not in units})
        self._save()
        return self.settings

    def forbid(self, unit_ids: Iterable[str], site_id: str) -> RunSettings:
        """Forbid a school for units (and drop a workbench lock of that same pair)."""
        units = self._check_units(unit_ids)
        site = self._check_site(site_id, "forbid")
        rs = self.settings
        forbids = {u: list(s) for u, s in rs.forbids.items()}
        locks = dict(rs.locks)
        for u in units:
            forbids[u] = sorted(set(forbids.get(u, [])) | {site})
            if locks.get(u) == site:
                del locks[u]
        self.runs[self.level] = rs.replace(locks=locks, forbids=forbids)
        self._save()
        return self.settings

    def allow(self, unit_ids: Iterable[str], site_id: str | None = None) -> RunSettings:
        """Remove workbench forbids of these units (of one school, or all when None)."""
        units = set(self._check_units(unit_ids))
        rs = self.settings
        forbids = {}
        for u, sites in rs.forbids.items():
            keep = sites if u not in units else [s for s in sites
                                                  if site_id is not None and s != site_id]
            if keep:
                forbids[u] = list(keep)
        self.runs[self.level] = rs.replace(forbids=forbids)
        self._save()
        return self.settings

    def remove(self, rows: Iterable[LockRow]) -> RunSettings:
        """Remove locks and forbids listed in :meth:`lock_rows` (workbench ones only)."""
        rs = self.settings
        locks = dict(rs.locks)
        forbids = {u: list(s) for u, s in rs.forbids.items()}
        for row in rows:
            if row.kind == "lock" and locks.get(row.unit) == row.site:
                del locks[row.unit]
            elif row.kind == "forbid" and row.site in forbids.get(row.unit, []):
                forbids[row.unit].remove(row.site)
                if not forbids[row.unit]:
                    del forbids[row.unit]
        self.runs[self.level] = rs.replace(locks=locks, forbids=forbids)
        self._save()
        return self.settings

    def lock_rows(self) -> list[LockRow]:
        """Every lock and forbid in force for the current level, with where it comes from."""
        full = self.effective
        rs = self.settings
        rows = []
        for unit, site in sorted(full.locks.items()):
            src = "workbench" if rs.locks.get(unit) == site else "project file"
            rows.append(LockRow(unit, site, "lock", src))
        for unit, sites in sorted(full.forbids.items()):
            for site in sites:
                src = "workbench" if site in rs.forbids.get(unit, []) else "project file"
                rows.append(LockRow(unit, site, "forbid", src))
        return rows

    def _file_status(self, site_id: str) -> str:
        sites = self.inputs.sites
        return str(sites.loc[sites["site_id"].astype(str) == site_id, "status"].iloc[0])

    # ------------------------------------------------------------------ runs
    def rerun(
        self,
        *,
        progress: Callable | None = None,
        cancel: Callable[[], bool] | None = None,
        name: str = "",
        on_plan: Callable[[Outcome], None] | None = None,
    ) -> Outcome:
        """Solve the current level with the current edits; the new plan goes on screen.

        The plan on screen is the warm start. Each better valid plan the solver finds goes
        on screen at once (``on_plan`` is told), so the planner sees the result of an edit
        while the solver still works on the gap. A run that fails puts the plan on screen
        back as it was and raises :class:`StoreError` with the engine's explanation.
        """
        level = self.level
        rs = self.settings
        before = self.outcomes[level]
        start = before.plan if before is not None and before.name != TODAY else None

        def interim(out: Outcome) -> None:
            self.outcomes[level] = out
            if on_plan is not None:
                on_plan(out)

        try:
            out = run(self.inputs, rs, name=name, progress=progress, cancel=cancel,
                      previous=start, sessions=self._sessions, on_plan=interim)
        except ValueError as exc:  # a lock or forbid the problem cannot take, or a solver fault
            self.outcomes[level] = before
            raise StoreError(f"This run could not be done: {exc}. Your edits are kept; undo "
                             "the last edit or press Rerun again.") from exc
        except BaseException:
            self.outcomes[level] = before
            raise
        if not out.plan.feasible:
            self.outcomes[level] = before
            plan = out.plan
            if plan.status in ("time_limit", "cancelled"):
                why = (f"the time limit ({out.settings.time_limit:g} s)"
                       if plan.status == "time_limit" else "you cancelled")
                msg = (f"No valid plan was found before {why}; the plan on screen is "
                       "unchanged. Raise the time limit in Settings, or remove locks and relax "
                       "the utilization band, then press Rerun.")
            else:
                msg = ("No plan fits these settings. " + (
                    plan.message or "Relax the utilization band, remove locks or forbids, "
                    "or raise capacities, then press Rerun."))
            self.last_message = msg
            raise StoreError(msg)
        self.previous[level] = before
        self.outcomes[level] = out
        self.last_message = ""
        self._save()
        return out

    # ------------------------------------------------------------------ options
    def save_option(self, name: str, overwrite: bool = False) -> None:
        """Save the plan on screen as a named option in the project's store."""
        try:
            name = check_name(name)
        except BadName as exc:
            raise StoreError(str(exc)) from None
        out = self.outcome
        if out is None:
            raise StoreError("run a plan first (press Rerun); today's zones are not an option")
        if not self.persist:
            raise StoreError("this session does not write to the project store")
        try:
            with _write_lock(self.store_path):
                _options.save_option(self.inputs, out, name, overwrite=overwrite)
        except (ValueError, KeyError) as exc:
            raise StoreError(str(exc)) from exc
        self.outcomes[self.level] = out.renamed(name)
        self._save()

    def list_options(self) -> list:
        """Saved options of the project (every level), as ``options.list_options`` gives;
        none when the store is damaged (:attr:`problem` says so)."""
        if not self.store_path.exists():
            return []
        try:
            return list(_options.list_options(self.store_path))
        except _options.StoreDamaged as exc:
            self.damaged = str(exc)
            return []

    def option_names(self, level: str | None = None) -> list[str]:
        level = self.level if level is None else level
        return [o.name for o in self.list_options() if o.level == level]

    def load_option(self, name: str) -> Outcome:
        try:
            return _options.load_option(self.inputs, name)
        except (ValueError, KeyError) as exc:
            raise StoreError(str(exc)) from exc

    def open_option(self, name: str) -> Outcome:
        """Put a saved option on screen; its settings become the edits to continue from."""
        out = self.load_option(name)
        if out.level != self.level:
            self.level = out.level
        self.previous[out.level] = self.outcomes[out.level]
        self.outcomes[out.level] = out
        self.runs[out.level] = self._overrides_of(out.settings)
        self._save()
        return out

    def delete_option(self, name: str) -> None:
        with _write_lock(self.store_path):
            try:
                _options.delete_option(self.store_path, name)
            except (ValueError, KeyError) as exc:
                raise StoreError(str(exc)) from exc

    def _overrides_of(self, full: RunSettings) -> RunSettings:
        """Resolved settings -> overrides: locks/forbids of the project file are not copied."""
        file_locks = {lk.unit: lk.site for lk in self.inputs.settings.locks
                      if lk.level == full.level}
        locks = {u: s for u, s in full.locks.items() if file_locks.get(u) != s}
        file_forbids = {(fb.unit, fb.site) for fb in self.inputs.settings.forbids
                        if fb.level == full.level}
        forbids = {}
        for u, sites in full.forbids.items():
            keep = [s for s in sites if (u, s) not in file_forbids]
            if keep:
                forbids[u] = keep
        return full.replace(locks=locks, forbids=forbids)

    # ------------------------------------------------------------------ tables
    def units_frame(self, outcome: Outcome | None = None) -> pd.DataFrame:
        """One row per unit: students (plan year), today's and proposed school, distance."""
        out = self.on_screen() if outcome is None else outcome
        prob = out.problem
        a = out.assignment
        names = self.site_names()
        cur_ids = out.site_id_of(prob.current)
        new_ids = out.site_id_of(a)
        n = prob.n_units
        dist = np.full(n, np.nan)
        ok = a >= 0
        dist[ok] = prob.travel[np.flatnonzero(ok), a[ok]]
        full = out.settings
        locks = full.locks
        forbids = full.forbids
        uid = out.unit_ids
        return pd.DataFrame({
            "unit_id": uid,
            "students": prob.demand[0],
            "current": cur_ids,
            "current_name": [names.get(s, "none") for s in cur_ids],
            "proposed": new_ids,
            "proposed_name": [names.get(s, "none") for s in new_ids],
            "changed": (prob.current != a) & (prob.current >= 0),
            "distance_km": dist / 1000.0,
            "locked": [locks.get(u, "") for u in uid],
            "forbidden": [", ".join(forbids.get(u, [])) for u in uid],
        })

    def sites_frame(self, outcome: Outcome | None = None, *,
                    resolved_settings: RunSettings | None = None) -> pd.DataFrame:
        """One row per site of the level: edits in force and the plan's figures.

        Columns: site_id, name, status, capacity, min_util, max_util (shares), students_<year>
        and util_<year> (share) for each projected year, today (plan-year students under
        today's zones), moved_in, moved_out, mean_km, max_km, out_of_band, flag (words).
        """
        full = self.effective if resolved_settings is None else resolved_settings
        sites = self.inputs.sites
        sites = sites.loc[sites["level"] == self.level].reset_index(drop=True)
        ids = sites["site_id"].astype(str).to_numpy()
        df = pd.DataFrame({"site_id": ids, "name": sites["name"].astype(str).to_numpy()})
        def override(values: dict, column: str, default: float | None = None) -> list:
            base = sites[column].to_numpy()
            if default is not None:
                base = rules.site_band(base, default)
            return [values.get(s, v) for s, v in zip(ids, base, strict=True)]

        df["status"] = override(full.status, "status")
        df["capacity"] = np.asarray(override(full.capacity, "capacity"), dtype=float)
        df["min_util"] = np.asarray(override(full.site_min_util, "min_util",
                                             full.min_utilization), dtype=float)
        df["max_util"] = np.asarray(override(full.site_max_util, "max_util",
                                             full.max_utilization), dtype=float)
        if resolved_settings is not None:
            return df
        out = self.on_screen() if outcome is None else outcome
        met = out.metrics
        years = out.problem.years
        order = np.argsort([int(y) for y in years])
        for t in order:
            df[f"students_{years[t]}"] = met.load[t]
        for t in order:
            df[f"util_{years[t]}"] = met.utilization[t]
        df["today"] = self.today().metrics.load[0]
        df["moved_in"] = met.moved_in
        df["moved_out"] = met.moved_out
        df["mean_km"] = met.mean_distance / 1000.0
        df["max_km"] = met.max_distance / 1000.0
        df["out_of_band"] = met.out_of_band
        df["flag"] = tables.band_flags(met.load, out.problem, years, out.plan.open_sites)
        return df

    def summary(self, outcome: Outcome | None = None) -> dict:
        """Headline figures of a plan (what the results panel and comparisons show)."""
        return tables.headline(self.on_screen() if outcome is None else outcome)

    def changes_frame(self, outcome: Outcome | None = None,
                      reference: Outcome | None = None) -> pd.DataFrame:
        """Units whose school differs between ``reference`` (default: today) and the plan."""
        out = self.on_screen() if outcome is None else outcome
        ref = self.today() if reference is None else reference
        if ref.level != out.level:
            raise StoreError("compare plans of the same level")
        a = self.units_frame(out)
        b = self.units_frame(ref)
        diff = (a["proposed"] != b["proposed"]).to_numpy()
        frame = pd.DataFrame({
            "unit_id": a["unit_id"][diff],
            "students": a["students"][diff],
            "from": b["proposed"][diff],
            "from_name": b["proposed_name"][diff],
            "to": a["proposed"][diff],
            "to_name": a["proposed_name"][diff],
            "km_before": b["distance_km"][diff],
            "km_after": a["distance_km"][diff],
        })
        return frame.reset_index(drop=True)

    def flows_frame(self, outcome: Outcome | None = None,
                    reference: Outcome | None = None) -> pd.DataFrame:
        """Students per (from, to) school pair between ``reference`` and the plan."""
        ch = self.changes_frame(outcome, reference)
        g = ch.groupby(["from_name", "to_name"], as_index=False).agg(
            units=("unit_id", "size"), students=("students", "sum"))
        return g.sort_values("students", ascending=False).reset_index(drop=True)

    def compare_frame(self, outcomes: list[Outcome]) -> pd.DataFrame:
        """Headline figures side by side (one column per plan) and plan-year utilization."""
        cols = {}
        for out in outcomes:
            s = self.summary(out)
            col = {
                "status": s["status"],
                "gap": f"{s['gap']:.3%}" if np.isfinite(s["gap"]) else "",
                "students moved": f"{s['students_moved']:,.0f}",
                "units moved": f"{s['units_moved']:,}",
                "mean travel (km)": f"{s['mean_km']:.2f}",
                "longest travel (km)": f"{s['max_km']:.2f}",
                "schools out of band": str(s["schools_out_of_band"]),
            }
            met = out.metrics
            for sid, u in zip(out.site_ids, met.utilization[0], strict=True):
                col[f"{sid} utilization {s['plan_year']}"] = "" if np.isnan(u) else f"{u:.0%}"
            label = out.name or "unsaved result"
            while label in cols:
                label += " "
            cols[label] = col
        return pd.DataFrame(cols)

    # ------------------------------------------------------------------ exports
    def export_folder(self) -> Path:
        if self._export_dir is None:
            self._export_dir = Path(tempfile.mkdtemp(prefix="districting-exports-"))
        return self._export_dir

    def export(self, kind: str) -> Path:
        """Write one export of the plan on screen and return its path.

        ``kind``: gpkg, geojson, shapefile, units_csv, schools_csv (via
        :func:`districting.outputs.exports.export_all`) or packet (the PDF packet).
        """
        out = self.outcome
        if out is None:
            raise StoreError("run a plan first (press Rerun); there is no option to export yet")
        label = slug(f"{out.name or 'unsaved-result'}-{out.level}")
        folder = path_inside(self.export_folder(), label)
        if kind == "packet":
            from districting.outputs.packet import write_packet

            pdf = folder / f"{label}-packet.pdf"
            write_packet([out], pdf)
            return pdf
        from districting.outputs.exports import export_all

        if self._exports[0] is not out:  # one export_all per plan, however many buttons
            self._exports = (out, export_all(out, folder))
        files = self._exports[1]
        if kind not in files:
            raise StoreError(f"unknown export {kind!r} (exports: {', '.join(files)})")
        return Path(files[kind])

    # ------------------------------------------------------------------ persistence
    def state(self) -> dict:
        """The JSON-friendly state written to the store after every change."""
        plans = {}
        for lv, out in self.outcomes.items():
            if out is None:
                continue
            plans[lv] = {
                "name": out.name,
                "created": out.created,
                "sites": out.site_id_of(out.assignment).tolist(),
                "settings": out.settings.to_dict(),
                "units": len(out.unit_ids),
                "status": out.plan.status,
                "objective": float(out.plan.objective),
                "bound": float(out.plan.bound),
                "gap": float(out.plan.gap),
            }
        return {
            "version": STATE_VERSION,
            "level": self.level,
            "runs": {lv: rs.to_dict() for lv, rs in self.runs.items()},
            "plans": plans,
        }

    @property
    def record_key(self) -> str:
        """The store's key of this session's draft."""
        return DRAFT_PREFIX + self.draft if self.draft else STATE_KEY

    def _save(self) -> None:
        """Write the draft; a record changed by another session since is left alone and
        :attr:`conflict` set (the edits stay here until :meth:`reload` or
        :meth:`keep_as_draft`)."""
        if not self.persist or self.conflict or self.damaged:
            return
        try:
            with _write_lock(self.store_path):
                self.revision = _options.save_state(self.store_path, self.record_key,
                                                    self.state(), expected=self.revision)
        except _options.StateConflict:
            self.conflict = True
        except _options.StoreDamaged as exc:
            self.damaged = str(exc)

    @property
    def problem(self) -> str:
        """Words for the planner when edits are not being written ('' when all is well)."""
        if self.damaged:
            return (self.damaged + " Your edits in this page are kept while it stays open, "
                    "but nothing is written until the store is repaired.")
        if self.conflict:
            where = f"draft {self.draft!r}" if self.draft else "the workbench record"
            return (f"Another session saved {where} of this project after this page loaded it, "
                    "so your latest edits were not written over theirs. Reload to continue "
                    "from their saved work (your unsaved edits here are dropped), or keep your "
                    "edits as a draft of a new name.")
        return ""

    def reload(self) -> list[str]:
        """Drop this session's edits and continue from the record as saved now."""
        self._reset()
        self.conflict = False
        self.revision = 0
        return self.restore()

    def keep_as_draft(self, name: str) -> str:
        """Write this session's edits as a new draft ``name`` and continue on it."""
        try:
            name = check_name(name, "draft")
        except BadName as exc:
            raise StoreError(str(exc)) from None
        if name in self.drafts():
            raise StoreError(f"a draft named {name!r} exists; choose another name")
        self.draft, self.revision, self.conflict = name, 0, False
        self._save()
        if self.damaged:
            raise StoreError(self.problem)
        return name

    def drafts(self) -> list[str]:
        """Names of the drafts kept in the store besides the main workbench record."""
        try:
            keys = _options.state_keys(self.store_path)
        except _options.OptionError as exc:
            self.damaged = str(exc)
            return []
        return [k[len(DRAFT_PREFIX):] for k in keys if k.startswith(DRAFT_PREFIX)]

    def open_draft(self, name: str) -> list[str]:
        """Continue on another draft ('' = the main record), dropping unsaved edits here."""
        if name and name not in self.drafts():
            raise StoreError(f"there is no draft named {name!r}")
        self.draft = name
        return self.reload()

    def repair(self) -> Path | None:
        """Set a damaged store aside and start a new one; this session's edits are written."""
        try:
            with _write_lock(self.store_path):
                aside = _options.repair_store(self.store_path)
        except _options.OptionError as exc:
            raise StoreError(str(exc)) from exc
        self.damaged, self.revision, self.conflict = "", 0, False
        self._save()
        return aside

    def restore(self) -> list[str]:
        """Read the last state from the store; returns notes on what could not be restored."""
        notes: list[str] = []
        if not self.persist or not self.store_path.exists():
            return notes
        try:
            data, self.revision = _options.state_record(self.store_path, self.record_key)
        except _options.OptionError as exc:
            self.damaged = str(exc)
            self.last_message = self.problem
            return [self.problem]
        if not data or data.get("version") != STATE_VERSION:
            return notes
        units = set(self.unit_ids)
        for lv, rsd in data.get("runs", {}).items():
            if lv not in self.runs:
                continue
            rs = RunSettings.from_dict({**rsd, "level": lv})
            sites = set(self.inputs.sites.loc[self.inputs.sites["level"] == lv, "site_id"]
                        .astype(str))
            locks = {u: s for u, s in rs.locks.items() if u in units and s in sites}
            forbids = {u: [s for s in ss if s in sites] for u, ss in rs.forbids.items()
                       if u in units}
            if len(locks) < len(rs.locks) or sum(map(len, forbids.values())) < sum(
                    map(len, rs.forbids.values())):
                notes.append(f"{lv}: some saved locks name units or schools no longer in the "
                             "project and were dropped")
            self.runs[lv] = rs.replace(locks=locks, forbids={u: s for u, s in forbids.items()
                                                             if s})
        if data.get("level") in self.runs:
            self.level = data["level"]
        for lv, p in data.get("plans", {}).items():
            if lv not in self.runs:
                continue
            try:
                self.outcomes[lv] = self._plan_from_state(lv, p)
            except (ValueError, KeyError, IndexError) as exc:
                notes.append(f"{lv}: the last plan could not be restored ({exc}); press Rerun")
        self.last_message = " ".join(notes)
        return notes

    def _plan_from_state(self, level: str, p: dict) -> Outcome:
        ids = p["sites"]
        if len(ids) != len(self.unit_ids):
            raise ValueError("the project's units changed")
        full = RunSettings.from_dict({**p["settings"], "level": level})
        sites = self.inputs.sites
        level_ids = sites.loc[sites["level"] == level, "site_id"].astype(str).tolist()
        pos = {s: j for j, s in enumerate(level_ids)}
        a = np.array([pos[s] if s in pos else -1 for s in ids], dtype=np.int64)
        if (a < 0).any():
            raise ValueError("the plan names schools no longer in the project")
        fields = {k: p[k] for k in ("status", "objective", "bound", "gap") if k in p}
        return outcome_from_assignment(self.inputs, full, a, fields, name=p.get("name", ""),
                                       created=p.get("created", ""))

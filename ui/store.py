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

The Store is made of three parts: this module (settings, site edits, locks, runs, exports),
:mod:`ui.store_records` (options and the draft record in the store file) and
:mod:`ui.store_tables` (the report tables). No Panel or Bokeh here: threads and the page
belong to :mod:`ui.runner` and :mod:`ui.session`.
"""

from __future__ import annotations

import math
import tempfile
from collections.abc import Callable
from pathlib import Path

import numpy as np

from districting.intake import Inputs
from districting.intake.schema import SCHEMA
from districting.names import path_inside, slug
from districting.outputs import store as _options
from districting.rules import SITE_STATUSES
from districting.study import (
    Outcome,
    RunSettings,
    build_problem,
    outcome_from_assignment,
    resolved,
    run,
)
from districting.travel.measures import MEASURES

from .store_feeders import FEEDER_RULES, feeder_choice, feeder_edit
from .store_locks import LockEdits, LockRow
from .store_records import DRAFT_PREFIX, STATE_KEY, StoreError, StoreRecords
from .store_tables import TODAY, PlanTables

__all__ = ["Store", "StoreError", "LockRow", "STATE_KEY", "DRAFT_PREFIX", "EDITABLE_SETTINGS",
           "TODAY"]

#: RunSettings fields the settings panel edits, with their allowed range.
EDITABLE_SETTINGS = {
    "plan_year": None,
    "stability_weight": (0.0, 1e6),
    "keep_option_weight": (0.0, 1e6),
    "max_distance": (0.0, 1e6),
    "max_moved": (0.0, 1e9),
    "gap": (0.0, 0.5),
    "time_limit": (1.0, 3600.0),
    # Utilization ranges are the project file's ([solve] in districting.intake.schema): one home.
    "max_utilization": (0.05, SCHEMA["solve"].keys["max_utilization"].high),
    "min_utilization": (0.0, SCHEMA["solve"].keys["min_utilization"].high),
    "travel": MEASURES,  # a choice, not a range
    "keep_walkers": (False, True),  # a switch
    "max_transported": (0.0, 1e9),
    "group_band": (0.0, SCHEMA["groups"].keys["band_points"].high),
    "transport_charge": (0.0, 1e6),
    # the feeder rule: checked by ui.store_feeders.feeder_edit, which builds its fields
    "feeding": FEEDER_RULES,
    "given_name": None,  # a saved option of the neighbouring level, "" = today's zones
    "max_splits": (0, 1e6),
}

#: the feeder rule's fields, edited together
FEEDER_FIELDS = ("feeding", "given_name", "max_splits")


class Store(StoreRecords, PlanTables, LockEdits):
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
        return out is not None and out.settings != kept_by(self.effective, out)

    def on_screen(self) -> Outcome:
        """The plan on screen evaluated under the current edits (what the tables show).

        Right after a run this is the run's outcome; after an edit (a capacity, a lock) the
        same assignment is re-evaluated so the figures and flags show the edit's effect
        before the next run. The solver's status, objective, bound and gap are kept.
        """
        out = self.outcome
        if out is None:
            return self.today()
        rs = kept_by(self.effective, out)
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
            if name in FEEDER_FIELDS:
                continue
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
            if name == "keep_walkers":
                clean[name] = bool(value)
                continue
            if name == "travel":
                if value not in self.travel_measures():
                    raise StoreError(f"travel {value!r} is not available here; pick one of "
                                     f"{', '.join(self.travel_measures())}")
                clean[name] = value
                continue
            lo, hi = EDITABLE_SETTINGS[name]
            v = float(value)
            if not (math.isfinite(v) and lo <= v <= hi):
                raise StoreError(f"{name.replace('_', ' ')} must be between {lo:g} and {hi:g}; "
                                 f"got {value}")
            clean[name] = v
        new = self.settings.replace(**clean)
        try:  # the project file's rules hold for a run too (min below max utilization...)
            feeder = {k: v for k, v in changes.items() if k in FEEDER_FIELDS}
            if feeder and all(v is None for v in feeder.values()):  # the project's again
                new = new.replace(feeding=None, given={}, given_name="", max_splits=None)
            elif feeder:
                new = new.replace(**feeder_edit(
                    self.inputs, new, feeder.get("feeding"), feeder.get("given_name"),
                    feeder.get("max_splits")))
            resolved(self.inputs, new)
        except ValueError as err:
            raise StoreError(str(err)) from None
        self.runs[self.level] = new
        self._save()
        return new

    def feeder_choice(self) -> tuple[str, str, int]:
        """(rule, saved option held fixed or "" for today's zones, splits) of the current
        level's reruns; no rule when the project's [feeders] cannot be read."""
        try:
            return feeder_choice(self.inputs, self.settings)
        except ValueError:
            return "none", "", 0

    def travel_measures(self) -> list[str]:
        """The travel measures this project can use (streets only when it has them)."""
        return [m for m in MEASURES if m != "streets" or self.inputs.street_travel is not None]

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

        if start is not None and not rs.keep_option:  # keep the plan being edited
            rs = rs.replace(**keep_fields(before))
        try:
            if rs.feeding is None:  # the project's feeder rule, against [feeders] zones
                from districting.outputs.feeders import feeder_run

                rs = rs.replace(**feeder_run(self.inputs, level))
            elif rs.given_name:  # the saved option's zones as saved now (or refused)
                rs = rs.replace(**feeder_edit(self.inputs, rs, given_name=rs.given_name))
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
                msg = (plan.message  # engine.findings.no_plan_text: lead, then causes
                       or "No plan fits these settings. Relax the utilization band, remove "
                       "locks or forbids, or raise capacities.") + (
                    "\nThe plan on screen is unchanged; change the settings, then press Rerun.")
            self.last_message = msg
            raise StoreError(msg)
        self.previous[level] = before
        self.outcomes[level] = out
        self.last_message = ""
        self._save()
        return out

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


def keep_fields(edited: Outcome) -> dict:
    """Run fields that charge a rerun for students moved away from the plan being edited
    (its zones and name; the weight stays the run's, the project's by default)."""
    zones = edited.site_id_of(edited.assignment)
    return {"keep_option": {u: str(s) for u, s in zip(edited.unit_ids, zones, strict=True)
                            if s},
            "keep_option_name": edited.name or "the plan on screen"}


def kept_by(rs: RunSettings, out: Outcome) -> RunSettings:
    """``rs`` with the plan ``out`` was charged against: that plan is no edit of the planner,
    and the plan on screen is still compared with it."""
    return rs.replace(keep_option=out.settings.keep_option,
                      keep_option_name=out.settings.keep_option_name)

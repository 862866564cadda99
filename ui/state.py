"""One browser session's state, as param classes (no drawing here).

:class:`SessionState` wraps a :class:`~ui.store.Store`: its parameters are what the views
show and edit (level, settings, the selected units, the school to lock them to, the plan on
screen, progress, messages), and its methods are the planner's actions. A rerun solves on a
worker thread; progress and the result come back through ``schedule`` (the app passes the
session document's next-tick callback), so the page stays responsive and Cancel works.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable

import param

from .store import EDITABLE_SETTINGS, TODAY, Store, StoreError

__all__ = ["SessionState", "REFERENCES"]

#: What the change view compares the plan on screen with.
REFERENCES = ("today", "previous result")


#: state parameter -> (RunSettings field, factor from the widget's unit; None = as is)
_SETTING_PARAMS = {
    "plan_year": ("plan_year", None),
    "stability_weight": ("stability_weight", 1.0),
    "max_distance_km": ("max_distance", 1000.0),
    "max_util_pct": ("max_utilization", 0.01),
    "min_util_pct": ("min_utilization", 0.01),
    "gap_pct": ("gap", 0.01),
    "time_limit": ("time_limit", 1.0),
}


def _now() -> float:
    return time.monotonic()


class SessionState(param.Parameterized):
    """Everything one session shows and edits; actions turn into Store calls."""

    level = param.Selector(objects=[], doc="School level being planned")
    plan_year = param.Selector(objects=[], doc="Year the new zones take effect")
    stability_weight = param.Number(0.0, bounds=(0, None),
                                    doc="Metres of travel charged per student moved")
    max_distance_km = param.Number(0.0, bounds=(0, None),
                                   doc="Longest allowed trip in km (0 = no limit)")
    max_util_pct = param.Number(100.0, bounds=(5.0, 100 * EDITABLE_SETTINGS["max_utilization"][1]),
                                doc="Highest utilization allowed, percent of capacity")
    min_util_pct = param.Number(0.0, bounds=(0.0, 100 * EDITABLE_SETTINGS["min_utilization"][1]),
                                doc="Lowest utilization allowed, percent of capacity")
    gap_pct = param.Number(0.01, bounds=(0.0, 50.0), doc="Optimality gap to prove, percent")
    time_limit = param.Number(60.0, bounds=(1.0, 3600.0), doc="Seconds per rerun")

    selection = param.List(default=[], item_type=str, doc="Unit ids selected on the map")
    target_site = param.Selector(objects=[], allow_None=True,
                                 doc="School to lock (or forbid) the selection to")
    reference = param.Selector(objects=list(REFERENCES), default="today")

    running = param.Boolean(False)
    runs_finished = param.Integer(0, doc="reruns ended (with or without a plan)")
    elapsed = param.Number(0.0)
    progress = param.String("")
    message = param.String("")
    message_kind = param.Selector(objects=["info", "success", "warning", "danger"],
                                  default="info")

    #: why edits are not being written: another session saved the record, or the store
    #: file is damaged ('' when all is well); the page offers the ways out
    store_problem = param.String("")

    #: bumped whenever the plan on screen, the edits, the options or the drafts change
    plan_version = param.Integer(0)
    edits_version = param.Integer(0)
    options_version = param.Integer(0)
    drafts_version = param.Integer(0)

    def __init__(self, store: Store, schedule: Callable[[Callable], None] | None = None,
                 **params) -> None:
        super().__init__(**params)
        self.store = store
        self.schedule = schedule or (lambda fn: fn())
        self._cancel = threading.Event()
        self._worker: threading.Thread | None = None
        self._interim_guard = threading.Lock()
        self._interim_pending = False
        self._started = 0.0
        self._syncing = False
        self.param.level.objects = list(store.runs)
        self.param.plan_year.objects = list(store.inputs.settings.years)
        self._sync_from_store()
        self.store_problem = store.problem
        if store.last_message and not store.problem:
            self.notify(store.last_message, "warning")
        self.param.watch(self._on_level, "level")
        self.param.watch(self._on_setting, list(_SETTING_PARAMS))

    # ------------------------------------------------------------------ sync
    def _sync_from_store(self) -> None:
        """Show the store's level and its effective settings (without writing them back)."""
        st = self.store
        full = st.effective
        sites = st.site_ids
        self._syncing = True
        try:
            self.param.target_site.objects = sites
            target = self.target_site if self.target_site in sites else (
                sites[0] if sites else None)
            self.param.update(
                level=st.level,
                plan_year=int(full.plan_year),
                stability_weight=float(full.stability_weight or 0.0),
                max_distance_km=float(full.max_distance or 0.0) / 1000.0,
                max_util_pct=float(full.max_utilization) * 100.0,
                min_util_pct=float(full.min_utilization) * 100.0,
                gap_pct=float(full.gap) * 100.0,
                time_limit=float(full.time_limit or 60.0),
                target_site=target,
                selection=[],
            )
        finally:
            self._syncing = False

    def _on_level(self, event) -> None:
        if self._syncing:
            return
        self._guard(lambda: self.store.set_level(event.new))
        self._sync_from_store()
        self._bump_all()

    def _on_setting(self, *events) -> None:
        if self._syncing:
            return
        changes = {}
        for ev in events:
            field, scale = _SETTING_PARAMS[ev.name]
            changes[field] = ev.new if scale is None else float(ev.new) * scale
        if self._guard(lambda: self.store.update_settings(**changes)):
            self.edits_version += 1
        else:
            self._sync_from_store()

    def _bump_all(self) -> None:
        self.edits_version += 1
        self.plan_version += 1
        self.options_version += 1

    # ------------------------------------------------------------------ messages
    def notify(self, text: str, kind: str = "info") -> None:
        self.param.update(message=text, message_kind=kind)

    def clear_message(self) -> None:
        self.message = ""

    def _guard(self, action: Callable) -> bool:
        """Run an action; a StoreError becomes the message on the page (never a traceback)."""
        try:
            action()
        except StoreError as exc:
            self.notify(str(exc), "danger")
            return False
        finally:
            self.store_problem = self.store.problem
        return True

    # ------------------------------------------------------------------ locks and sites
    def select(self, unit_ids) -> None:
        self.selection = [str(u) for u in unit_ids]

    def _selection_action(self, method: str, done: str, with_site: bool = True) -> None:
        units = list(self.selection)
        site = self.target_site
        args = (units, site) if with_site else (units,)
        if self._guard(lambda: getattr(self.store, method)(*args)):
            noun = "unit" if len(units) == 1 else "units"
            self.notify(done.format(n=len(units), noun=noun, site=site,
                                    name=self.store.site_names().get(site, site)), "success")
            self.edits_version += 1

    def lock_selection(self) -> None:
        self._selection_action("lock", "Locked {n} {noun} to {name} ({site}). Press Rerun.")

    def unlock_selection(self) -> None:
        self._selection_action("unlock", "Unlocked {n} {noun}. Press Rerun.", with_site=False)

    def forbid_selection(self) -> None:
        self._selection_action("forbid", "{name} ({site}) is forbidden for {n} {noun}. "
                               "Press Rerun.")

    def allow_selection(self) -> None:
        self._selection_action("allow", "Removed forbids of {name} ({site}) for {n} {noun}.")

    def remove_rows(self, rows) -> None:
        if self._guard(lambda: self.store.remove(rows)):
            self.notify(f"Removed {len(rows)} lock(s)/forbid(s). Press Rerun.", "success")
            self.edits_version += 1

    def edit_site(self, site_id: str, **fields) -> bool:
        ok = self._guard(lambda: self.store.edit_site(site_id, **fields))
        if ok:
            self.notify(f"{site_id} changed; press Rerun to see its effect.", "info")
        self.edits_version += 1  # on failure the table shows the stored value again
        return ok

    # ------------------------------------------------------------------ runs
    def rerun(self) -> None:
        """Solve on a worker thread; progress and the result come back through schedule."""
        if self.running:
            return
        self._cancel.clear()
        self._started = _now()
        self.param.update(running=True, elapsed=0.0, progress="Starting the solver...",
                          message="")
        self._worker = threading.Thread(target=self._work, name="districting-rerun",
                                        daemon=True)
        self._worker.start()

    def cancel(self) -> None:
        if self.running:
            self._cancel.set()
            self.progress = "Cancelling: keeping the best plan found so far..."

    def tick(self) -> None:
        """Refresh the elapsed time while a run is going (the app calls this twice a second)."""
        if self.running:
            self.elapsed = _now() - self._started

    def wait(self, timeout: float | None = None) -> None:
        """Block until the worker finished (for tests and scripts without an event loop)."""
        if self._worker is not None:
            self._worker.join(timeout)

    def _work(self) -> None:
        try:
            out = self.store.rerun(progress=self._on_round, cancel=self._cancel.is_set,
                                   on_plan=self._on_plan)
        except StoreError as exc:
            text = str(exc)
            self.schedule(lambda: self._finish(None, text))
        except Exception as exc:  # noqa: BLE001 - shown in words; the page must not die
            text = (f"The solver stopped with an unexpected error: {type(exc).__name__}: {exc}."
                    " Your edits are kept; change a setting or press Rerun again.")
            self.schedule(lambda: self._finish(None, text))
        else:
            self.schedule(lambda: self._finish(out, ""))

    def _on_round(self, rnd) -> None:
        text = round_text(rnd)
        self.schedule(lambda: self._show_progress(text, rnd.seconds))

    def _on_plan(self, out) -> None:
        """A better valid plan while the solve goes on: the store already holds it; the
        page redraws once per batch (several plans may arrive before the redraw runs)."""
        with self._interim_guard:
            if self._interim_pending:
                return
            self._interim_pending = True
        self.schedule(self._show_interim)

    def _show_interim(self) -> None:
        with self._interim_guard:
            self._interim_pending = False
        if self.running:
            self.plan_version += 1

    def _show_progress(self, text: str, seconds: float) -> None:
        if self.running:
            self.param.update(progress=text, elapsed=max(self.elapsed, seconds))

    def _finish(self, out, error: str) -> None:
        self.param.update(running=False, elapsed=_now() - self._started,
                          runs_finished=self.runs_finished + 1,
                          store_problem=self.store.problem)
        if out is None:
            self.param.update(progress="")
            self.notify(error, "danger")
            return
        plan = out.plan
        s = self.store.summary(out)
        head = {"optimal": "Best plan found (proven within the gap).",
                "feasible": "A valid plan; not proven best within the gap.",
                "time_limit": "Time limit reached: showing the best plan found.",
                "cancelled": "Cancelled: showing the best plan found so far."}.get(
                    plan.status, plan.status)
        gap = f", gap {plan.gap:.2%}" if plan.gap == plan.gap else ""
        self.progress = (f"Done in {self.elapsed:.1f} s{gap}. {s['students_moved']:,.0f} students "
                         f"change school; mean trip {s['mean_km']:.2f} km.")
        kind = "success" if plan.status == "optimal" else "warning"
        oob = s["schools_out_of_band"]
        extra = f" {oob} school(s) outside the utilization band." if oob else ""
        self.notify(head + extra, kind)
        self.plan_version += 1

    # ------------------------------------------------------------------ options
    def save_option(self, name: str, overwrite: bool = False) -> bool:
        ok = self._guard(lambda: self.store.save_option(name, overwrite=overwrite))
        if ok:
            self.notify(f"Saved option {name.strip()!r}.", "success")
            self.options_version += 1
            self.plan_version += 1
        return ok

    def open_option(self, name: str) -> bool:
        ok = self._guard(lambda: self.store.open_option(name))
        if ok:
            self._sync_from_store()
            self.notify(f"Showing option {name!r}; its settings and locks are in force.",
                        "info")
            self._bump_all()
        return ok

    def delete_option(self, name: str) -> bool:
        ok = self._guard(lambda: self.store.delete_option(name))
        if ok:
            self.notify(f"Deleted option {name!r}.", "info")
            self.options_version += 1
        return ok

    # ------------------------------------------------------------------ drafts and the store
    def _continue_from_store(self, done: str, notes: list[str]) -> None:
        self._sync_from_store()
        self._bump_all()
        self.drafts_version += 1
        self.store_problem = self.store.problem
        self.notify(done + (" " + " ".join(notes) if notes else ""), "info")

    def _idle(self) -> bool:
        if self.running:
            self.notify("Wait for the run to finish (or cancel it) first.", "warning")
        return not self.running

    def reload_record(self) -> None:
        """Continue from the record as saved now (this page's unsaved edits are dropped)."""
        if self._idle():
            notes = self.store.reload()
            self._continue_from_store("Reloaded the saved work.", notes)

    def keep_as_draft(self, name: str) -> bool:
        """Write this page's edits as a new draft and continue on it."""
        if not self._idle():
            return False
        ok = self._guard(lambda: self.store.keep_as_draft(name))
        if ok:
            self.notify(f"Your edits are kept as draft {self.store.draft!r}; this page now "
                        "saves to it (Options tab: Drafts).", "success")
            self.drafts_version += 1
        return ok

    def open_draft(self, name: str) -> bool:
        if not self._idle():
            return False
        notes: list[str] = []
        ok = self._guard(lambda: notes.extend(self.store.open_draft(name)))
        if ok:
            label = f"draft {name!r}" if name else "the main workbench record"
            self._continue_from_store(f"Continuing from {label}.", notes)
        return ok

    def repair_store(self) -> bool:
        """Set a damaged store aside, start a new one and write this page's edits to it."""
        box: list = []
        ok = self._guard(lambda: box.append(self.store.repair()))
        if ok:
            where = f" The damaged file is kept as {box[0]}." if box[0] else ""
            self.notify("A new, empty option store is in place and your edits are written "
                        f"to it.{where}", "success")
            self.options_version += 1
            self.drafts_version += 1
        return ok

    @property
    def reference_outcome(self):
        """What the change view compares with: today's zones or the previous result."""
        st = self.store
        if self.reference == "previous result":
            prev = st.previous[st.level]
            if prev is not None:
                return prev
        return st.today()

    @property
    def reference_label(self) -> str:
        ref = self.reference_outcome
        return "today's zones" if ref.name == TODAY else (ref.name or "the previous result")


def round_text(rnd) -> str:
    """One line of progress for a solve round."""
    best = (f"best plan so far on the map ({rnd.objective / 1000.0:,.0f} student-km)"
            if rnd.objective < float("inf") else "no valid plan yet")
    gap = f"gap {rnd.gap:.2%}" if rnd.gap < float("inf") else "gap not known yet"
    return f"Round {rnd.number}: {rnd.seconds:.1f} s, {best}, {gap}; still solving"

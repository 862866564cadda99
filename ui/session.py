"""One browser session: its store, its state and its runner, and the planner's actions.

:class:`Session` keeps the :class:`~ui.state.SessionState` parameters and the
:class:`~ui.store.Store` in step: an edit of a setting parameter is written to the store,
a change of level or an opened option or draft is shown in the parameters, and a store
error becomes the message on the page (never a traceback). Solves go to the
:class:`~ui.runner.Runner`. Views hold a Session and call its actions.
"""

from __future__ import annotations

from collections.abc import Callable

from .history import History, describe_units
from .runner import Runner, Schedule
from .state import SETTING_PARAMS, TODAY_ZONES, SessionState
from .store import TODAY, Store, StoreError
from .store_feeders import feeder_level
from .text import restored_text

__all__ = ["Session"]


class Session:
    """The actions of one session over its store; views read ``state`` and ``store``."""

    def __init__(self, store: Store, schedule: Schedule | None = None) -> None:
        self.store = store
        self.state = state = SessionState()
        self.runner = Runner(store, state, schedule)
        self.history = History()
        self._syncing = False
        state.param.level.objects = list(store.runs)
        state.param.plan_year.objects = list(store.inputs.settings.years)
        state.param.travel.objects = store.travel_measures()
        self._sync_from_store()
        state.store_problem = store.problem
        if store.last_message and not store.problem:
            self.notify(store.last_message, "warning")
        elif store.outcome is not None and not store.problem:
            self.notify(restored_text(store.outcome), "info")
        state.param.watch(self._on_level, "level")
        state.param.watch(self._on_setting, list(SETTING_PARAMS))
        state.param.watch(self._on_options, "options_version")

    # ------------------------------------------------------------------ sync
    def _sync_from_store(self) -> None:
        """Show the store's level and its effective settings (without writing them back)."""
        st, state = self.store, self.state
        full = st.effective
        sites = st.site_ids
        self._syncing = True
        try:
            state.param.target_site.objects = sites
            target = state.target_site if state.target_site in sites else (
                sites[0] if sites else None)
            state.param.update(
                level=st.level,
                plan_year=int(full.plan_year),
                stability_weight=float(full.stability_weight or 0.0),
                keep_option_weight=float(full.keep_option_weight or 0.0),
                max_distance_km=float(full.max_distance or 0.0) / 1000.0,
                max_util_pct=float(full.max_utilization) * 100.0,
                min_util_pct=float(full.min_utilization) * 100.0,
                gap_pct=float(full.gap) * 100.0,
                time_limit=float(full.time_limit or 60.0),
                travel=full.travel,
                keep_walkers=bool(full.keep_walkers),
                max_transported=float(full.max_transported or 0.0),
                group_band=float(full.group_band or 0.0),
                transport_charge=float(full.transport_charge or 0.0),
                target_site=target,
                selection=[],
            )
            self._show_feeder_choice()
        finally:
            self._syncing = False

    def _on_options(self, event) -> None:
        """A saved option came or went: the list of zones a feeder rule may keep follows."""
        self._syncing = True
        try:
            self._show_feeder_choice()
        finally:
            self._syncing = False

    def _show_feeder_choice(self) -> None:
        """Show the level's feeder rule, the zones it keeps (with the saved options of the
        neighbouring level to pick from) and its splits; call with ``_syncing`` set."""
        st, state = self.store, self.state
        rule, given, splits = st.feeder_choice()
        other = feeder_level(st.inputs, st.level, rule)
        names = st.option_names(other) if other else []
        state.param.given_option.objects = [TODAY_ZONES, *names]
        state.param.update(feeding=rule, max_splits=splits,
                           given_option=given if given in names else TODAY_ZONES)

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
            field, scale = SETTING_PARAMS[ev.name]
            changes[field] = ev.new if scale is None else float(ev.new) * scale
        if changes.get("given_name") == TODAY_ZONES:
            changes["given_name"] = ""
        if self._guard(lambda: self.store.update_settings(**changes)):
            self.state.edits_version += 1
            if {"feeding", "given_name", "max_splits"} & set(changes):
                self._on_options(None)  # the zones to keep belong to the rule's level
        else:
            self._sync_from_store()

    def _bump_all(self) -> None:
        self.state.edits_version += 1
        self.state.plan_version += 1
        self.state.options_version += 1

    # ------------------------------------------------------------------ messages
    def notify(self, text: str, kind: str = "info") -> None:
        self.state.param.update(message=text, message_kind=kind)

    def _guard(self, action: Callable) -> bool:
        """Run an action; a StoreError becomes the message on the page (never a traceback)."""
        try:
            action()
        except StoreError as exc:
            self.notify(str(exc), "danger")
            return False
        finally:
            self.state.store_problem = self.store.problem
        return True

    # ------------------------------------------------------------------ runs
    def rerun(self) -> None:
        self.runner.start()

    def cancel(self) -> None:
        self.runner.cancel()

    def wait(self, timeout: float | None = None) -> None:
        """Block until a rerun finished (for tests and scripts without an event loop)."""
        self.runner.wait(timeout)

    # ------------------------------------------------------------------ locks and sites
    def select(self, unit_ids) -> None:
        self.state.selection = [str(u) for u in unit_ids]

    def _edit(self, action: Callable, words: str, message: str, kind: str = "success") -> bool:
        """Run an edit of the current level; a done edit goes into the history as ``words``."""
        st = self.store
        level, before = st.level, st.settings
        ok = self._guard(action)
        if ok:
            self.history.record(words, level, before, st.settings)
            self.notify(message, kind)
        self.state.edits_version += 1  # on failure the tables show the stored values again
        return ok

    def _site_label(self, site) -> str:
        return f"{self.store.site_names().get(site, site)} ({site})"

    def lock_selection(self) -> None:
        units, site = list(self.state.selection), self.state.target_site
        words = f"locked {describe_units(units)} to {self._site_label(site)}"
        self._edit(lambda: self.store.lock(units, site), words, f"{words[0].upper()}"
                   f"{words[1:]}. Press Rerun.")

    def unlock_selection(self) -> None:
        units = list(self.state.selection)
        words = f"unlocked {describe_units(units)}"
        self._edit(lambda: self.store.unlock(units), words, f"U{words[1:]}. Press Rerun.")

    def forbid_selection(self) -> None:
        units, site = list(self.state.selection), self.state.target_site
        words = f"forbade {self._site_label(site)} for {describe_units(units)}"
        self._edit(lambda: self.store.forbid(units, site), words,
                   f"{self._site_label(site)} is forbidden for {describe_units(units)}. "
                   "Press Rerun.")

    def allow_selection(self) -> None:
        units, site = list(self.state.selection), self.state.target_site
        words = f"allowed {self._site_label(site)} again for {describe_units(units)}"
        self._edit(lambda: self.store.allow(units, site), words, f"A{words[1:]}.")

    def remove_rows(self, rows) -> None:
        rows = list(rows)
        if len(rows) == 1:
            r = rows[0]
            what = "lock" if r.kind == "lock" else "forbid"
            words = f"removed the {what} of unit {r.unit} to {self._site_label(r.site)}"
        else:
            words = f"removed {len(rows)} locks and forbids"
        self._edit(lambda: self.store.remove(rows), words, f"R{words[1:]}. Press Rerun.")

    def edit_site(self, site_id: str, **fields) -> bool:
        label = self._site_label(site_id)
        parts = []
        for key, value in fields.items():
            if value is None:
                continue
            if key == "capacity":
                parts.append(f"the capacity of {label} to {float(value):,.0f} seats")
            elif key == "status":
                parts.append(f"the status of {label} to {value}")
            else:
                which = "highest" if key == "max_util" else "lowest"
                parts.append(f"the {which} utilization of {label} to {float(value):.0%}")
        words = "set " + "; ".join(parts) if parts else f"edited {label}"
        return self._edit(lambda: self.store.edit_site(site_id, **fields), words,
                          f"{site_id} changed; press Rerun to see its effect.", "info")

    # ------------------------------------------------------------------ undo and redo
    def undo(self) -> bool:
        return self._step_back_or_forth(undo=True)

    def redo(self) -> bool:
        return self._step_back_or_forth(undo=False)

    def _step_back_or_forth(self, undo: bool) -> bool:
        if not self._idle():
            return False
        step = self.history.undo() if undo else self.history.redo()
        if step is None:
            self.notify(f"Nothing to {'undo' if undo else 'redo'}.", "info")
            return False
        fields = step.before if undo else step.after
        if not self._guard(lambda: self.store.put_edits(step.level, fields)):
            self.history.position += 1 if undo else -1  # not applied: the step stays
            return False
        self.notify(f"{'Undone' if undo else 'Redone'}: {step.text}. Press Rerun.", "info")
        self.state.edits_version += 1
        return True

    # ------------------------------------------------------------------ options
    def save_option(self, name: str, overwrite: bool = False) -> bool:
        ok = self._guard(lambda: self.store.save_option(name, overwrite=overwrite))
        if ok:
            self.notify(f"Saved option {name.strip()!r}.", "success")
            self.state.options_version += 1
            self.state.plan_version += 1
        return ok

    def open_option(self, name: str) -> bool:
        ok = self._guard(lambda: self.store.open_option(name))
        if ok:
            self.history.clear()
            self._sync_from_store()
            self.notify(f"Showing option {name!r}; its settings and locks are in force.",
                        "info")
            self._bump_all()
        return ok

    def delete_option(self, name: str) -> bool:
        ok = self._guard(lambda: self.store.delete_option(name))
        if ok:
            self.notify(f"Deleted option {name!r}.", "info")
            self.state.options_version += 1
        return ok

    # ------------------------------------------------------------------ drafts and the store
    def _continue_from_store(self, done: str, notes: list[str]) -> None:
        self.history.clear()  # the steps were taken on edits that are no longer in force
        self._sync_from_store()
        self._bump_all()
        self.state.drafts_version += 1
        self.state.store_problem = self.store.problem
        self.notify(done + (" " + " ".join(notes) if notes else ""), "info")

    def _idle(self) -> bool:
        running = self.state.running
        if running:
            self.notify("Wait for the run to finish (or cancel it) first.", "warning")
        return not running

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
            self.state.drafts_version += 1
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
            self.state.options_version += 1
            self.state.drafts_version += 1
        return ok

    # ------------------------------------------------------------------ the change view
    @property
    def reference_outcome(self):
        """What the change view compares with: today's zones or the previous result."""
        st = self.store
        if self.state.reference == "previous result":
            prev = st.previous[st.level]
            if prev is not None:
                return prev
        return st.today()

    @property
    def reference_label(self) -> str:
        ref = self.reference_outcome
        return "today's zones" if ref.name == TODAY else (ref.name or "the previous result")

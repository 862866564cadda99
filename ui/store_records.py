"""The store file of a :class:`ui.store.Store`: named options and the session's draft record.

Mixed into the Store (moved here from ``ui/store.py``): saving, listing, opening and
deleting options (:mod:`districting.outputs.store`), and the draft record written after every
edit, with its revision (a save over a record another session changed since is refused
and flagged, :attr:`conflict`), reload, drafts of other names, and the repair of a damaged
store file. One writer at a time per store file in this process (:func:`write_lock`).
"""

from __future__ import annotations

import copy
import threading
from pathlib import Path

import numpy as np

from districting.names import BadName, check_name
from districting.outputs import store as _options
from districting.study import Outcome, RunSettings, outcome_from_assignment

__all__ = ["StoreRecords", "StoreError", "write_lock", "STATE_KEY", "DRAFT_PREFIX",
           "STATE_VERSION"]

#: Key of the workbench's row in the store's state table (drafts of other names: "workbench:NAME").
STATE_KEY = "workbench"
DRAFT_PREFIX = STATE_KEY + ":"
STATE_VERSION = 1

# One writer at a time per store file in this process (sessions share the server process).
_WRITE_LOCKS: dict[Path, threading.Lock] = {}
_LOCKS_GUARD = threading.Lock()


def write_lock(path: Path) -> threading.Lock:
    with _LOCKS_GUARD:
        return _WRITE_LOCKS.setdefault(Path(path).resolve(), threading.Lock())


class StoreError(ValueError):
    """An edit or a run that cannot be done, in words that say what to change."""


class StoreRecords:
    """Options and the draft record of a store (reads ``inputs``, ``runs``, ``outcomes``...)."""

    #: the planner put the page's first-load note away (kept with the record)
    intro_dismissed: bool = False

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
            with write_lock(self.store_path):
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
        with write_lock(self.store_path):
            try:
                _options.delete_option(self.store_path, name)
            except (ValueError, KeyError) as exc:
                raise StoreError(str(exc)) from exc

    def set_intro_dismissed(self, dismissed: bool) -> None:
        self.intro_dismissed = bool(dismissed)
        self._save()

    def put_edits(self, level: str, fields: dict) -> RunSettings:
        """Put back edited fields of a level's settings (locks, forbids, site edits), as
        undo and redo do; the other settings stay as they are."""
        if level not in self.runs:
            raise StoreError(f"level {level!r} is not in this project")
        self.runs[level] = self.runs[level].replace(**copy.deepcopy(dict(fields)))
        self._save()
        return self.runs[level]

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
            "intro_dismissed": bool(self.intro_dismissed),
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
            with write_lock(self.store_path):
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
            with write_lock(self.store_path):
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
        self.intro_dismissed = bool(data.get("intro_dismissed", False))
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

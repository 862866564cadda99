"""The planner's locks and forbids for the current level, mixed into
:class:`ui.store.Store`: each edit checks its units and school, writes the store's run
settings and saves them; :meth:`LockEdits.lock_rows` lists what is in force and where it
comes from (the workbench's own edits can be removed, the project file's cannot).

The methods read the store's ``inputs``, ``level``, ``unit_ids``, ``site_ids``,
``settings`` and ``effective`` settings, and write ``runs`` through ``_save()``.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from districting import rules
from districting.study import RunSettings

from .store_records import StoreError

__all__ = ["LockRow", "LockEdits"]


@dataclass(frozen=True)
class LockRow:
    unit: str
    site: str
    kind: str  # "lock" or "forbid"
    source: str  # "workbench" (removable) or "project file" (decided in project.toml)


class LockEdits:
    """Locks and forbids of the store's current level (a mixin of :class:`ui.store.Store`)."""

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

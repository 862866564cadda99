"""The store's report tables (pandas DataFrames for any front end), mixed into
:class:`ui.store.Store`; moved here from ``ui/store.py`` as they were.

The methods read the store's ``inputs``, ``level``, ``effective`` settings, ``on_screen()``
and ``today()`` outcomes and ``site_names()``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from districting import rules
from districting.outputs import tables
from districting.study import Outcome, RunSettings

from .store_records import StoreError
from .text import status_text

#: The name of today's zones as an outcome.
TODAY = "Today's zones"

__all__ = ["PlanTables", "TODAY"]


class PlanTables:
    """Tables of the plan on screen (or of a given outcome) for the store's level."""

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
                "status": status_text(out.plan) if out.name != TODAY else "today's zones",
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


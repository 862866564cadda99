"""One browser session's state, as a param class: parameters only (no store, no actions).

:class:`SessionState` is what the views show and edit: level, settings, the selected units,
the school to lock them to, what the change view compares with, the run's progress and the
message. The session (:class:`ui.session.Session`) turns edits of these parameters into
store calls; the runner (:class:`ui.runner.Runner`) sets the run's parameters.
"""

from __future__ import annotations

import param

from districting.travel.measures import MEASURES

from .store import EDITABLE_SETTINGS
from .store_feeders import FEEDER_RULES

__all__ = ["SessionState", "REFERENCES", "SETTING_PARAMS", "TODAY_ZONES"]

#: What the change view compares the plan on screen with.
REFERENCES = ("today", "previous result")

#: state parameter -> (RunSettings field, factor from the widget's unit; None = as is)
SETTING_PARAMS = {
    "plan_year": ("plan_year", None),
    "stability_weight": ("stability_weight", 1.0),
    "keep_option_weight": ("keep_option_weight", 1.0),
    "max_distance_km": ("max_distance", 1000.0),
    "max_util_pct": ("max_utilization", 0.01),
    "min_util_pct": ("min_utilization", 0.01),
    "gap_pct": ("gap", 0.01),
    "time_limit": ("time_limit", 1.0),
    "travel": ("travel", None),
    "keep_walkers": ("keep_walkers", None),
    "max_transported": ("max_transported", 1.0),
    "group_band": ("group_band", 1.0),
    "transport_charge": ("transport_charge", 1.0),
    "feeding": ("feeding", None),
    "given_option": ("given_name", None),
    "max_splits": ("max_splits", None),
}

#: The choice of zones a feeder rule holds fixed that stands for today's zones.
TODAY_ZONES = "Today's zones"


class SessionState(param.Parameterized):
    """Everything one session shows and edits."""

    level = param.Selector(objects=[], doc="School level being planned")
    plan_year = param.Selector(objects=[], doc="Year the new zones take effect")
    stability_weight = param.Number(0.0, bounds=(0, None),
                                    doc="Metres of travel charged per student moved")
    keep_option_weight = param.Number(3000.0, bounds=(0, None),
                                      doc="Metres charged per student moved away from the "
                                      "plan being edited (0 = a free rerun)")
    max_distance_km = param.Number(0.0, bounds=(0, None),
                                   doc="Longest allowed trip in km (0 = no limit)")
    max_util_pct = param.Number(100.0, bounds=(5.0, 100 * EDITABLE_SETTINGS["max_utilization"][1]),
                                doc="Highest utilization allowed, percent of capacity")
    min_util_pct = param.Number(0.0, bounds=(0.0, 100 * EDITABLE_SETTINGS["min_utilization"][1]),
                                doc="Lowest utilization allowed, percent of capacity")
    gap_pct = param.Number(0.01, bounds=(0.0, 50.0), doc="Optimality gap to prove, percent")
    time_limit = param.Number(60.0, bounds=(1.0, 3600.0), doc="Seconds per rerun")
    travel = param.Selector(objects=list(MEASURES), doc="How travel is measured")
    keep_walkers = param.Boolean(False, doc="Units within walking distance stay with such a "
                                 "school")
    max_transported = param.Number(0.0, bounds=(0, None),
                                   doc="Most students needing transport (0 = no limit)")
    group_band = param.Number(0.0, bounds=(0.0, 100.0),
                              doc="Group shares within this many points of the district's")
    transport_charge = param.Number(0.0, bounds=(0, None),
                                    doc="Metres charged per student beyond walking distance")
    feeding = param.Selector(objects=list(FEEDER_RULES), default="none",
                             doc="Feeder rule against the neighbouring level's zones")
    given_option = param.Selector(objects=[TODAY_ZONES], default=TODAY_ZONES,
                                  doc="Zones of the neighbouring level the feeder rule keeps")
    max_splits = param.Integer(0, bounds=(0, None),
                               doc="Whole feeding: schools below may split this many times")

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

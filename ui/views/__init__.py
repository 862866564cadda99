"""The workbench's components: each a ``pn.viewable.Viewer`` over one :class:`~ui.session.Session`.

Views only present: they read the session's state parameters and store, and call the
session's actions. ``map`` (the zone map), ``sidebar`` (settings, run, selection),
``sites`` (Schools and Locks tabs), ``results`` (Changes tab), ``options`` (Options tab),
``downloads`` (Downloads tab), ``history`` (undo, redo, the list of edits), ``messages``
(the message line and the store problem box).
"""

from .downloads import DownloadsPanel
from .history import HistoryPanel
from .map import MapView
from .messages import MessageArea, StoreProblem
from .options import OptionsPanel
from .results import ResultsView
from .sidebar import RunPanel, SelectionPanel, SettingsPanel
from .sites import LocksTable, SitesTable

__all__ = [
    "MapView", "SettingsPanel", "RunPanel", "SelectionPanel", "LocksTable", "SitesTable",
    "ResultsView", "OptionsPanel", "DownloadsPanel", "MessageArea", "StoreProblem",
    "HistoryPanel",
]

"""The options store: named options and workbench records in the project's GeoPackage.

:mod:`.storefile` is the store file itself (layout, atomic edits, the writer lock, a
damaged store set aside); :mod:`.options` the named options; :mod:`.workbench` the
workbench's state records; :mod:`.colours` each school's display colour.
"""

from .colours import load_school_colours, save_school_colours, stored_school_colours
from .options import (
    OptionInfo,
    check_option_name,
    delete_option,
    list_options,
    load_option,
    metrics_to_dict,
    option_settings,
    option_zones,
    rename_option,
    save_option,
)
from .storefile import (
    ASSIGNMENTS_TABLE,
    COLOURS_TABLE,
    OPTIONS_TABLE,
    STATE_TABLE,
    ZONES_LAYER,
    OptionError,
    StoreDamaged,
    repair_store,
    store_problem,
    tidy_store,
)
from .workbench import StateConflict, load_state, save_state, state_keys, state_record

__all__ = [
    "OptionInfo", "OptionError", "save_option", "list_options", "load_option",
    "delete_option", "rename_option", "option_settings", "option_zones", "save_state",
    "load_state",
    "state_record", "state_keys", "StateConflict", "StoreDamaged", "check_option_name",
    "store_problem", "repair_store", "tidy_store", "metrics_to_dict", "OPTIONS_TABLE",
    "ASSIGNMENTS_TABLE", "STATE_TABLE", "ZONES_LAYER", "COLOURS_TABLE",
    "load_school_colours", "save_school_colours", "stored_school_colours",
]

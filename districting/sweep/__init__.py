"""Option sweeps: one level solved for every combination of settings on a Dask cluster.

:mod:`.grid` the combinations and their names; :mod:`.cluster` where they run;
:mod:`.runner` the tasks, the results streaming back and the options saved (by the client
only); :mod:`.results` the figures of each; :mod:`.frontier` the non-dominated options;
:mod:`.chart` and :mod:`.table` the trade-off chart (PNG) and table (CSV); :mod:`.command`
the `districting sweep` command. Nothing here is imported by the engine.
"""

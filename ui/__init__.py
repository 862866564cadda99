"""The workbench: a Panel app over the districting engine.

``state.py`` holds one session's parameters (param classes, nothing else); ``session.py``
keeps them in step with the ``store.py`` (no UI code; talks to the engine; with
``store_records.py``, the options and draft record, and ``store_tables.py``, the report
tables) and holds the planner's actions; ``runner.py`` owns background solves;
``mapdata.py`` prepares the map's shapes once per project and level; ``views/`` holds the
Viewer components, which only present; ``projects.py`` reads a project once per file
version; ``app.py`` composes the page and registers ``districting serve``. The engine
never imports ui/.
"""

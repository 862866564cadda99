"""The workbench: a Panel app over the districting engine.

``state.py`` holds one session's state in param classes, ``store.py`` talks to the engine
and the project's store GeoPackage (no UI code), ``views.py`` draws the components and
``app.py`` composes them and registers ``districting serve``. The engine never imports ui/.
"""

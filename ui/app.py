"""The app shell: ``districting serve [PROJECT.toml]`` and the page each session gets.

The project is read and validated once when the server starts (its Inputs are read-only
and shared, and so is their map data, :class:`~ui.mapdata.MapData`); every browser session
then gets its own :class:`~ui.store.Store` and :class:`~ui.session.Session` (state
parameters, actions and a runner), made in the app factory, so two sessions never share
unsaved state. A project that does not load gives a page with the validation report and a
field to open another project, never a traceback.

This module is imported by the ``districting`` command to register ``serve``; Panel is
imported only when the server starts.
"""

from __future__ import annotations

import argparse
import os
import socket
import sys
from pathlib import Path

from .projects import load_inputs, problem_text

__all__ = ["register_serve", "serve_command", "create_app", "DEMO_FOLDER"]

#: Where ``districting serve`` without a project puts its working copy of the demo town.
DEMO_FOLDER = "districting-demo"


# ---------------------------------------------------------------------- the page
def create_app(project: str | Path, *, persist: bool = True):
    """The page of one session: its own store and state over the shared project Inputs."""
    import panel as pn

    from .views import (
        DownloadsPanel,
        HistoryPanel,
        LocksTable,
        MapView,
        MessageArea,
        OptionsPanel,
        ResultsView,
        RunPanel,
        SelectionPanel,
        SettingsPanel,
        SitesTable,
        StoreProblem,
    )
    from .views.compare import CompareMaps
    from .views.intro import IntroNote
    from .views.printmap import PrintLink
    from .views.project import ProjectOpener, error_page, page_header, project_info
    from .views.sweep import SweepChart

    shell = pn.Column(sizing_mode="stretch_width", css_classes=["districting-app"])

    def open_project(target: Path) -> None:  # the opener's project replaces this page
        new = create_app(target, persist=persist)
        shell.objects = list(new.objects)
        if hasattr(new, "session"):
            shell.session = new.session

    opener = ProjectOpener(open_project)
    try:
        inputs = load_inputs(project)
    except Exception as exc:  # noqa: BLE001 - shown as a report on the page
        shell.objects = [error_page(problem_text(exc, project), opener)]
        return shell

    from .session import Session
    from .store import Store

    doc = pn.state.curdoc
    session = Session(Store(inputs, persist=persist), schedule=_scheduler(doc))
    if doc is not None and doc.session_context is not None:
        pn.state.add_periodic_callback(session.runner.tick, period=500)

    mapview = MapView(session)  # first: its watchers run before the panels', as always
    sidebar = pn.Column(
        SettingsPanel(session),
        pn.Card(RunPanel(session), title="Run", sizing_mode="stretch_width",
                css_classes=["run-card"]),
        SelectionPanel(session), HistoryPanel(session), width=340, scroll=True,
        css_classes=["sidebar"])
    tabs = pn.Tabs(
        ("Schools", SitesTable(session)),
        ("Changes", ResultsView(session)),
        ("Locks", LocksTable(session)),
        ("Options", OptionsPanel(session)),
        ("Compare maps", CompareMaps(session)),
        ("Sweep", SweepChart(session)),
        ("Print", PrintLink(session)),
        ("Downloads", DownloadsPanel(session)),
        ("Project", pn.Column(project_info(inputs, project), opener)),
        dynamic=True, sizing_mode="stretch_width", css_classes=["result-tabs"],
    )
    main = pn.Column(IntroNote(session), MessageArea(session), StoreProblem(session), mapview,
                     tabs,
                     sizing_mode="stretch_width")
    shell.objects = [*page_header(inputs),
                     pn.Row(sidebar, main, sizing_mode="stretch_width")]
    shell.session = session  # for scripts and tests driving the page from Python
    return shell


def _scheduler(doc):
    """Run a callable on the session's event loop (thread-safe), with Panel's doc set."""
    if doc is None or doc.session_context is None:
        return None
    from panel.io.state import set_curdoc

    def schedule(fn):
        def cb():
            with set_curdoc(doc):
                fn()

        doc.add_next_tick_callback(cb)

    return schedule


# ---------------------------------------------------------------------- the command
def free_port(address: str = "127.0.0.1") -> int:
    with socket.socket() as s:
        s.bind((address, 0))
        return int(s.getsockname()[1])


def _default_port(address: str) -> int:
    """5006 (Panel's usual port) when it is free, else any free port."""
    with socket.socket() as s:
        try:
            s.bind((address, 5006))
            return 5006
        except OSError:
            return free_port(address)


def serve_command(args: argparse.Namespace) -> int:
    """Start the workbench server; blocks until stopped (Ctrl+C)."""
    if args.project:
        from districting.intake import project_file, validate_project

        # a folder stands for its project.toml, as in every other command
        project = project_file(Path(args.project).expanduser()).resolve()
        if not project.is_file():
            print(validate_project(project)[1].format() + "\n(or run without a project to "
                  "open the demo town)", file=sys.stderr)
            return 1
    else:
        from districting.demo import copy_demo

        project = Path(copy_demo(Path.cwd() / DEMO_FOLDER)).resolve()
        print(f"No project given: opening the invented demo town (working copy in "
              f"{project.parent})", flush=True)
    port = args.port or _default_port(args.address)
    # Every script and stylesheet from this server, never a CDN: the page works offline.
    os.environ["BOKEH_RESOURCES"] = "server"
    import panel as pn

    pn.extension("tabulator", notifications=False, sizing_mode="stretch_width")
    try:
        load_inputs(project)  # read once before the first page; errors show on the page
    except Exception as exc:  # noqa: BLE001 - printed, and the page shows it too
        print(problem_text(exc, project), file=sys.stderr, flush=True)
    else:
        # One page built and dropped: imports, map shapes and today's outlines are then
        # ready, so the first planner's page opens as fast as the next.
        from panel.io.resources import set_resource_mode

        with set_resource_mode("server"):  # as in a served page: no CDN links get cached
            create_app(project, persist=False).get_root()
    origins = [f"{args.address}:{port}", f"localhost:{port}", f"127.0.0.1:{port}"]
    url = f"http://{args.address}:{port}/"
    from .views.printmap import print_page

    routes = {"/": lambda: create_app(project), "/print": lambda: print_page(project)}
    server = pn.serve(routes, port=port, address=args.address,
                      show=False, start=False, websocket_origin=origins,
                      title="districting workbench", threaded=False,
                      check_unused_sessions=2000, unused_session_lifetime=15000)
    server.start()
    print(f"districting workbench: {url}", flush=True)
    try:
        server.io_loop.start()
    except KeyboardInterrupt:
        print("stopped", flush=True)
    finally:
        server.stop()
    return 0


def register_serve(subparsers) -> None:
    """Add ``serve`` to the ``districting`` command (called through the entry point)."""
    p = subparsers.add_parser(
        "serve", help="open the workbench in a browser (the demo town when no project)",
        description="Start the districting workbench (a local web page) and print its URL.")
    p.add_argument("project", nargs="?", help="the project file, or a folder holding "
                   f"project.toml (default: a copy of the demo town in ./{DEMO_FOLDER}/)")
    p.add_argument("--address", default="127.0.0.1", help="address to listen on "
                   "(default 127.0.0.1: this computer only)")
    p.add_argument("--port", type=int, default=0,
                   help="port (default 5006, or a free one when 5006 is taken)")
    p.set_defaults(func=serve_command)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m ui.app")
    register_serve(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(["serve", *(sys.argv[1:] if argv is None else argv)])
    return args.func(args)


if __name__ == "__main__":
    raise SystemExit(main())

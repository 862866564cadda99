"""The hearing packet's page of a sweep: the trade-off chart with the packet's frame.

:func:`sweep_page_maker` reads the level's latest sweep table and returns a page maker
for :func:`districting.outputs.packet.write_packet` (``extra_pages``); a level with no
sweep is refused with the command that makes one.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from matplotlib.figure import Figure

from ..intake import Inputs
from ..outputs.packet_layout import footer, frame, page
from .chart import draw_tradeoff
from .table import FRONTIER, default_folder, read_table, sweep_paths

__all__ = ["sweep_page_maker"]


def sweep_page_maker(inputs: Inputs, level: str, folder: str | Path | None = None
                     ) -> Callable[[str, str, int], Figure]:
    """A page maker ``(paper, stamp, number) -> Figure`` for the level's latest sweep."""
    folder = default_folder(inputs) if folder is None else Path(folder)
    sheet = read_table(folder, level)
    if sheet is None:
        raise ValueError(f"no sweep of the {level} level in {folder} "
                         f"({sweep_paths(folder, level)['csv'].name} is missing); run "
                         f"`districting sweep PROJECT --level {level} ...` first")

    def make(paper: str, stamp: str, number: int) -> Figure:
        fig = page(paper)
        on_front = int((sheet[FRONTIER] == "yes").sum())
        top = frame(fig, f"The trade-off: {level} options of a sweep",
                    f"{len(sheet)} combinations of settings; {on_front} on the frontier (no "
                    "other option moves fewer students with a shorter mean travel). Colour: "
                    "how unevenly the schools are filled. Every point is a saved option.",
                    footer(None, stamp), number, full_notice=False)
        ax = fig.add_axes((0.07, 0.09, 0.86, top - 0.13))
        draw_tradeoff(ax, sheet)
        return fig

    return make

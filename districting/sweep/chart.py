"""The trade-off chart: students moved against mean travel, one point per option.

Drawn from the sweep's table (:mod:`.table`, the CSV people open too), so the chart, the
workbench's Sweep tab and the packet page show the same figures. Colour is the spread of
utilization (highest minus lowest school, percentage points: how evenly the schools are
filled); each point is labelled with its settings in words; the non-dominated options are
joined as the frontier. :func:`draw_tradeoff` draws on any axes (the packet page uses
it); :func:`write_chart` writes the PNG atomically.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.transforms import Bbox

from .. import DRAFT_NOTICE
from ..io import atomic_path
from .table import FRONTIER, MEAN_KM, MOVED, SETTINGS, SPREAD

__all__ = ["draw_tradeoff", "write_chart"]

_DPI = 130
#: The thin line from a label moved off its point back to the point.
_LEADER = {"arrowstyle": "-", "color": "#888888", "linewidth": 0.5, "shrinkA": 0, "shrinkB": 4}


def draw_tradeoff(ax, sheet: pd.DataFrame, colorbar: bool = True) -> int:
    """Draw the chart of a sweep table on ``ax``; returns the options on the frontier."""
    shown = sheet.dropna(subset=[MOVED, MEAN_KM])
    missing = len(sheet) - len(shown)
    ax.set_xlabel("Students moved from today's school (plan year)")
    ax.set_ylabel("Mean travel (km)")
    ax.grid(True, color="#dddddd", linewidth=0.6)
    if missing:
        ax.text(0.99, 0.99, f"{missing} setting{'s' if missing > 1 else ''} without a "
                "valid plan (see the table)", transform=ax.transAxes, ha="right", va="top",
                fontsize=7, color="#8a1c1c")
    if not len(shown):
        return 0
    x = shown[MOVED].to_numpy(float)
    y = shown[MEAN_KM].to_numpy(float)
    front = (shown[FRONTIER] == "yes").to_numpy()  # decided once, in the table
    order = np.flatnonzero(front)[np.argsort(x[front])]
    ax.plot(x[order], y[order], color="#444444", linewidth=1.2, zorder=1,
            label="frontier: no option moves fewer students with shorter travel")
    dots = ax.scatter(x, y, c=np.nan_to_num(shown[SPREAD].to_numpy(float)), cmap="viridis",
                      s=70, zorder=2, edgecolors=np.where(front, "#111111", "#ffffff"),
                      linewidths=1.2)
    if colorbar:
        bar = ax.figure.colorbar(dots, ax=ax, fraction=0.05, pad=0.02)
        bar.set_label("Utilization spread (points, highest minus lowest school)", fontsize=8)
    ax.legend(loc="best", fontsize=7, frameon=False)
    ax.margins(y=0.12)
    pad_x = max(float(np.ptp(x)) * 0.08, 1.0)
    ax.set_xlim(min(0.0, x.min() - pad_x), x.max() + pad_x)
    _labels(ax, shown[SETTINGS].astype(str).tolist(), x, y)  # last: the frame is final
    return int(front.sum())


def _labels(ax, words: list[str], x: np.ndarray, y: np.ndarray) -> None:
    """Each point's settings in words, placed clear of the other labels and points and
    inside the frame: points a few pixels apart share one label; a label that would
    overlap moves up (then down) a line at a time, with a thin line back to its point;
    labels in the right half sit to the left of their point."""
    renderer = ax.figure.canvas.get_renderer()
    ax.autoscale_view()
    at = ax.transData.transform(np.column_stack([x, y]))
    groups: list[list[int]] = []
    for k in range(len(x)):
        near = next((g for g in groups if np.hypot(*(at[g[0]] - at[k])) < 8), None)
        if near is None:
            groups.append([k])
        else:
            near.append(k)
    middle = (x.min() + x.max()) / 2
    dots = [Bbox.from_extents(px - 7, py - 7, px + 7, py + 7) for px, py in at]
    placed: list = []
    for g in sorted(groups, key=lambda g: -at[g[0]][1]):
        right = x[g[0]] > middle and x.max() > x.min()
        style = {"textcoords": "offset points", "ha": "right" if right else "left",
                 "va": "bottom", "fontsize": 6.5, "color": "#222222"}
        text = "\n".join(words[k] for k in g)
        others = placed + [b for k, b in enumerate(dots) if k not in g]
        lift = 4
        for step in range(16):
            lift = 4 + 10 * step if step < 8 else -14 - 10 * (step - 8)
            label = ax.annotate(text, (x[g[0]], y[g[0]]), xytext=(-6 if right else 6, lift),
                                **style)
            box = label.get_window_extent(renderer)
            label.remove()
            inside = ax.bbox.contains(box.x0, box.y0) and ax.bbox.contains(box.x1, box.y1)
            if inside and not any(box.overlaps(other) for other in others):
                break
        else:  # no free place: the first one, drawn anyway
            lift = 4
        label = ax.annotate(text, (x[g[0]], y[g[0]]), xytext=(-6 if right else 6, lift),
                            arrowprops=None if lift == 4 else _LEADER, **style)
        placed.append(box)


def write_chart(sheet: pd.DataFrame, path: str | Path, title: str) -> Path:
    """The chart as a PNG (written to a temporary name, then renamed)."""
    fig = Figure(figsize=(9, 6), dpi=_DPI)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    fig.subplots_adjust(bottom=0.16, left=0.09, right=0.97, top=0.93)
    ax.set_title(title, fontsize=10, loc="left")
    draw_tradeoff(ax, sheet)
    fig.text(0.01, 0.01, DRAFT_NOTICE, fontsize=6, color="#555555", wrap=True)
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=_DPI)
    return Path(path)

"""A true-shape map frame: equal metres per pixel across and up, a scale bar, a north arrow.

Every map of the workbench (the zone map, the compare maps, the printable map) starts from
:func:`map_figure`. Its ranges are ``DataRange1d`` with ``match_aspect``, so Bokeh fits the
town to the frame at equal scale on both axes, and refits on a resize until the planner
zooms or pans; :data:`KEEP_TRUE_SHAPE` then keeps the scale equal on a resize by stretching
the vertical range around its centre (Bokeh leaves a range alone once it was moved by
hand). The scale bar is Bokeh's ``ScaleBar`` (metres, follows the zoom); the north arrow
is drawn here (projected CRS: north is up).
"""

from __future__ import annotations

from bokeh.models import (
    Arrow,
    CustomJS,
    DataRange1d,
    Label,
    MetricLength,
    NormalHead,
    ScaleBar,
)
from bokeh.plotting import figure

__all__ = ["map_figure", "add_scale_and_north", "KEEP_TRUE_SHAPE", "keep_true_shape"]

#: After a resize, make the y range's metres per pixel equal the x range's (around its
#: centre). Installed once per plot by :func:`keep_true_shape`.
KEEP_TRUE_SHAPE = """
if (plot.__true_shape) { return; }
plot.__true_shape = true;
const fix = () => {
  let w, h;
  try { w = plot.inner_width; h = plot.inner_height; } catch (e) { return; }  // not laid out
  const xr = plot.x_range, yr = plot.y_range;
  if (!(w > 0 && h > 0) || !(xr.end > xr.start) || !(yr.end > yr.start)) { return; }
  const per_px = (xr.end - xr.start) / w;
  const want = per_px * h;
  if (Math.abs((yr.end - yr.start) - want) / want < 0.002) { return; }
  const mid = (yr.start + yr.end) / 2;
  yr.setv({start: mid - want / 2, end: mid + want / 2});
};
let timer = null;
window.addEventListener('resize', () => {
  clearTimeout(timer);
  timer = setTimeout(() => { fix(); setTimeout(fix, 400); }, 250);
});
"""


def keep_true_shape(fig) -> None:
    """Install :data:`KEEP_TRUE_SHAPE` on the plot's first range update (a zoom, a pan or
    the first fit), so it runs in the page without a document hook."""
    cb = CustomJS(args={"plot": fig}, code=KEEP_TRUE_SHAPE)
    fig.js_on_event("rangesupdate", cb)
    fig.x_range.js_on_change("start", cb)


def add_scale_and_north(fig, *, font_size: str = "12px") -> None:
    """A metric scale bar (bottom left) and a north arrow with an N (top left of the frame),
    named after the figure (``zone-map-scale-bar``, ``zone-map-north-arrow``)."""
    fig.add_layout(ScaleBar(name=f"{fig.name}-scale-bar", range=fig.x_range, unit="m",
                            dimensional=MetricLength(), location="bottom_left",
                            bar_length=0.2, label_text_font_size=font_size,
                            background_fill_alpha=0.8, border_line_color="#666666"))
    # Screen units count from the frame's bottom left corner; "top" is found from the
    # frame's height in the page, so the arrow sits at a fixed offset from the top.
    arrow = Arrow(name=f"{fig.name}-north-arrow", x_start=30, y_start=0, x_end=30, y_end=0,
                  start_units="screen", end_units="screen", line_width=3,
                  line_color="#111111", end=NormalHead(size=14, fill_color="#111111"))
    label = Label(name=f"{fig.name}-north-label", x=30, y=0, x_units="screen", y_units="screen",
                  text="N", text_font_size="16px", text_font_style="bold",
                  text_align="center", text_baseline="bottom")
    place = CustomJS(args={"plot": fig, "arrow": arrow, "label": label}, code="""
let h;
try { h = plot.inner_height; } catch (e) { return; }  // a plot not laid out yet (hidden tab)
if (!(h > 0)) { return; }
const top = h - 30;
if (arrow.y_end !== top) {
  arrow.setv({y_start: top - 38, y_end: top});
  label.y = top + 2;
}
""")
    fig.add_layout(arrow)
    fig.add_layout(label)
    fig.js_on_event("rangesupdate", place)
    fig.x_range.js_on_change("start", place)
    fig.y_range.js_on_change("start", place)


def map_figure(*, name: str, css: str, height: int | None = 560, ranges=None, **kwargs):
    """A Bokeh figure for a map in metres: equal scale on both axes, fitted to its glyphs,
    no axes or grid, scale bar and north arrow. ``ranges`` = (x, y) shares another map's
    ranges (linked pan and zoom); ``height=None``: a fixed size, ``width`` and ``height_px``
    in ``kwargs``."""
    if ranges is None:  # fitted to the glyphs (no start/end: those would defeat the aspect)
        ranges = (DataRange1d(range_padding=0.04), DataRange1d(range_padding=0.04))
    size = {"height": height, "sizing_mode": "stretch_width"} if height else {
        "height": kwargs.pop("height_px")}
    fig = figure(name=name, css_classes=[css], match_aspect=True, aspect_scale=1,
                 x_range=ranges[0], y_range=ranges[1], output_backend="canvas",
                 **{**size, **kwargs})
    fig.axis.visible = False
    fig.grid.visible = False
    fig.background_fill_color = "#f4f4f0"
    add_scale_and_north(fig)
    keep_true_shape(fig)
    return fig

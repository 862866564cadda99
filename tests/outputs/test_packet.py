"""The hearing packet: pages, sizes, tables against the metrics, the notice, colours, words."""

from __future__ import annotations

import dataclasses
import re
import shutil
import subprocess

import geopandas as gpd
import numpy as np
import pytest
import shapely
from exports_town import CRS, make_outcome, make_town, nearest_assignment
from matplotlib.colors import to_hex
from matplotlib.lines import Line2D
from matplotlib.text import Text
from PIL import Image

from districting import DRAFT_NOTICE
from districting.intake.records import Source
from districting.outputs.colours import zone_edges
from districting.outputs.packet import PAPER, PNG_DPI, packet_figures, write_packet
from districting.outputs.packet_rows import (
    OVER,
    pair_rows,
    school_rows,
    short_name,
    summary_rows,
)
from districting.outputs.store import stored_school_colours
from districting.outputs.tables import zones_frame
from districting.study import RunSettings, outcome_from_assignment

#: Solver words no page may print (whole words; "bound" must not match "boundaries").
SOLVER_WORDS = re.compile(r"\b(time_limit|gap|bound|inf|infeasible|feasible|rounds?|cuts?|"
                          r"nan|optimal)\b", re.IGNORECASE)


def texts(fig) -> list[str]:
    return [t.get_text() for t in fig.findobj(Text) if t.get_text()]


def style(artist) -> tuple:
    """What a legend handle looks like: colours, width, dashes, marker, hatch."""
    if isinstance(artist, Line2D):
        return ("line", to_hex(artist.get_color()), artist.get_linewidth(),
                str(artist.get_linestyle()), artist.get_marker(),
                to_hex(artist.get_markerfacecolor()))
    return ("patch", to_hex(artist.get_facecolor()), to_hex(artist.get_edgecolor()),
            artist.get_hatch())


def with_barriers(town, folder):
    """The town with a river, a highway and a rail line (kinds in the layer) and a bridge."""
    x0, y0, x1, y1 = town.units.total_bounds
    lines = [shapely.LineString([(x0, y0 + 0.3 * (y1 - y0)), (x1, y0 + 0.35 * (y1 - y0))]),
             shapely.LineString([(x0 + 0.6 * (x1 - x0), y0), (x0 + 0.62 * (x1 - x0), y1)]),
             shapely.LineString([(x0, y0 + 0.8 * (y1 - y0)), (x1, y0 + 0.75 * (y1 - y0))])]
    path = folder / "lines.gpkg"
    gpd.GeoDataFrame({"kind": ["river", "highway", "rail"]}, geometry=lines, crs=CRS
                     ).to_file(path, layer="barriers")
    bridge = gpd.GeoSeries([shapely.Point(x0 + 0.5 * (x1 - x0), y0 + 0.325 * (y1 - y0))],
                           crs=CRS)
    settings = dataclasses.replace(town.settings, sources={
        **town.settings.sources, "barriers": Source(path, "barriers")})
    return dataclasses.replace(town, settings=settings, bridges=bridge,
                               barriers=gpd.GeoSeries(lines, crs=CRS))


def pdf_page_count(data: bytes) -> int:
    """Page objects in a PDF written without object streams (as matplotlib writes it)."""
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", data))


@pytest.fixture(scope="module")
def town(tmp_path_factory):
    folder = tmp_path_factory.mktemp("town")
    return with_barriers(make_town(folder), folder)


@pytest.fixture(scope="module")
def options(town):
    # straight-line travel: the hand-made plans join the nearest school, across the wall
    first = make_outcome(town, name="Option A", locks={"U0000": "E01"}, travel="straight-line")
    a = nearest_assignment(town)
    a[np.flatnonzero(a == 1)[:4]] = 0  # a second option: a few units to another school
    second = outcome_from_assignment(town, RunSettings(level="elementary",
                                                       travel="straight-line"), a,
                                     {"status": "optimal", "bound": 1.0, "gap": 0.0},
                                     name="Option B")
    return [first, second]


@pytest.fixture(scope="module")
def pages(options):
    return packet_figures(options, stamp="2027-01-15")


@pytest.fixture(scope="module")
def single(options):
    return packet_figures(options[:1])


@pytest.mark.slow
def test_write_packet_pdf_and_pngs(options, tmp_path):
    paths = write_packet(options, tmp_path / "packet.pdf", tmp_path / "png")
    pdf, pngs = paths[0], paths[1:]
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF")
    # summary + side by side + difference + (map, schools, moves) per option
    assert pdf_page_count(data) == 9 == len(pngs)
    assert b"DRAFT FOR DISCUSSION" in data  # document metadata carries the notice
    w, h = PAPER["letter"]
    for k, png in enumerate(pngs, start=1):
        assert png.name == f"packet_p{k:02d}.png"
        with Image.open(png) as im:
            assert im.size == (round(w * PNG_DPI), round(h * PNG_DPI))
            grey = np.asarray(im.convert("L"), dtype=float)
        assert grey.std() > 5  # something is drawn on every page
    assert not list(tmp_path.glob(".tmp-*")) and not list((tmp_path / "png").glob(".tmp-*"))
    # an independent renderer (poppler; bash dev.sh test installs poppler-utils) reads it
    assert shutil.which("pdftoppm"), "pdftoppm is missing: install poppler-utils"
    subprocess.run(["pdftoppm", "-png", "-r", "40", "-f", "1", "-l", "1", str(pdf),
                    str(tmp_path / "render")], check=True)
    assert list(tmp_path.glob("render*.png"))
    # poppler's text extraction: what a reader of the PDF sees has no solver words
    assert shutil.which("pdftotext"), "pdftotext is missing: install poppler-utils"
    text = subprocess.run(["pdftotext", "-layout", str(pdf), "-"], check=True,
                          capture_output=True, text=True).stdout
    assert "best possible" in text and "beside" in text
    assert not SOLVER_WORDS.findall(text)


@pytest.mark.slow
def test_a4_single_option(options, tmp_path):
    paths = write_packet(options[:1], tmp_path / "one.pdf", tmp_path, paper="a4")
    assert pdf_page_count(paths[0].read_bytes()) == 3 == len(paths) - 1
    with Image.open(paths[1]) as im:
        w, h = PAPER["a4"]
        assert im.size == (int(w * PNG_DPI), int(h * PNG_DPI))
    with pytest.raises(ValueError, match="paper"):
        packet_figures(options[:1], paper="tabloid")


def test_pages_and_notice(pages, single):
    assert len(pages) == 9
    summary = " ".join(texts(pages[0]))
    assert "Options compared" in summary
    notice = " ".join(DRAFT_NOTICE.split())
    for k in (0, 3, 6):  # summary and each option's map page: the notice in full
        assert notice in " ".join(" ".join(texts(pages[k])).split())
    for fig in pages:  # every page is marked as a draft and dated
        joined = " ".join(texts(fig))
        assert "DRAFT FOR DISCUSSION" in joined and "2027-01-15" in joined
    assert len(single) == 3
    assert "Options compared" not in " ".join(texts(single[0]))


def test_map_page_furniture(single):
    page = single[0]
    found = texts(page)
    assert "N" in found  # north arrow
    assert any(t.endswith(" km") for t in found)  # scale bar
    maps = [ax for ax in page.axes if ax.get_aspect() == 1.0]
    assert len(maps) == 2
    assert maps[0].get_xlim() == maps[1].get_xlim()  # same extent side by side
    assert maps[0].get_ylim() == maps[1].get_ylim()
    names = " ".join(t.get_text() for ax in maps for t in ax.texts)
    for name in ("Larkwhistle", "Tansy Hollow", "Quillmere", "Corvel Park"):
        assert name in names  # on the map, or in the numbered key under it
    legend = [t.get_text() for t in page.legends[0].get_texts()]
    assert any("school changes" in t for t in legend)
    for words in ("River", "Highway", "Rail line", "Bridge or overpass (joins both sides)",
                  "Today's zone boundaries", "Planning units the board has decided (locked)",
                  "School", "Attendance zone, in its school's colour"):
        assert words in legend
    # no blank swatch, and no two entries drawn alike (today's boundaries, the rail line,
    # the river and the highway each have a symbol of their own)
    signatures = []
    for handle in page.legends[0].legend_handles:
        parts = handle if isinstance(handle, tuple) else (handle,)
        assert parts and all(p.get_visible() for p in parts)
        signatures.append(tuple(style(p) for p in parts))
    assert len(set(signatures)) == len(signatures)
    hatched = [c for ax in maps for c in ax.collections if c.get_hatch()]
    assert len(hatched) >= 2  # changed units hatched on both maps


def test_school_table_equals_metrics(options, single):
    o = options[0]
    header, rows, flags = school_rows(o)
    m = o.metrics
    years = sorted(o.problem.years)
    assert header[5:5 + len(years)] == [str(y) for y in years]
    assert rows[-1][0] == "All schools"
    for j, row in enumerate(rows[:-1]):  # every school is open in this town
        assert row[0].endswith(f"({o.site_ids[j]})")
        for k, y in enumerate(years):
            t = list(o.problem.years).index(y)
            students, pct = re.match(r"^(?:\S )?([\d,]+) \(([\d.]+)%\)$", row[5 + k]).groups()
            assert int(students.replace(",", "")) == round(m.load[t, j])
            assert float(pct) == pytest.approx(100 * m.utilization[t, j], abs=0.51)
            over = m.load[t, j] > o.problem.max_util[j] * o.problem.capacity[j] + 1e-6
            assert (flags[j][5 + k] == "over") == over
            assert row[5 + k].startswith(OVER) == over
        assert row[-4] == f"{m.moved_in[j]:,.0f}" and row[-3] == f"{m.moved_out[j]:,.0f}"
        assert row[-2] == f"{m.mean_distance[j] / 1000:.2f}"
        assert row[-1] == f"{m.max_distance[j] / 1000:.2f}"
    assert rows[-1][-4] == f"{m.moved_in.sum():,.0f}"
    assert any(f == "over" for r in flags for f in r)  # the test town has a school over
    # what is drawn is the table: every cell text is on the schools page
    drawn = set(texts(single[1]))
    assert all(cell in drawn for row in rows for cell in row if cell)


def test_moves_table_and_summary(options, pages):
    o = options[0]
    header, rows, areas = pair_rows(o)
    moved = o.assignment != o.current
    assert rows[-1][1] == "All changes"
    assert int(rows[-1][3]) == moved.sum()
    assert int(rows[-1][4].replace(",", "")) == round(o.metrics.students_moved)
    ids = o.site_id_of(o.assignment)
    cur = o.site_id_of(o.current)
    for row, area in zip(rows[:-1], areas.itertuples(), strict=True):
        sel = moved & (cur == area.from_site) & (ids == area.to_site)
        assert row[1].endswith(f"({area.from_site})") and row[2].endswith(f"({area.to_site})")
        assert int(row[3]) == sel.sum()
        assert int(row[4].replace(",", "")) == round(o.problem.demand[0, sel].sum())
    students = [int(r[4].replace(",", "")) for r in rows[:-1]]
    assert students == sorted(students, reverse=True)

    header, srows = summary_rows(options)
    assert [r[0] for r in srows] == ["Option A", "Option B"]
    for r, opt in zip(srows, options, strict=True):
        assert r[3] == f"{opt.metrics.students_moved:,.0f}"
        assert r[7] == str(int(opt.metrics.out_of_band.sum()))
    assert srows[1][8] == "best possible plan"
    # the test plan's gap of 1 (a bound of 0) tells nothing about how close it is
    assert srows[0][8] == "a valid plan; how close to the best is not known"
    summary = set(texts(pages[0]))
    assert all(cell in summary for r in srows for cell in r[:8])
    assert "4-6" in summary and "7-9" in summary  # where each option's pages are


def test_touching_zones_never_share_a_colour(options):
    from districting.outputs.packet import _drawing  # the colours the pages use

    for o in options:
        d = _drawing(o)
        colours = d["colours"]
        for a in (o.current, o.assignment):
            for s, t in zone_edges(o.inputs.adjacency, o.site_id_of(a)):
                assert colours[s] != colours[t]
        # four schools, ten palette colours: every school keeps its own colour
        assert len(set(colours.values())) == len(colours) == 4
        assert colours == stored_school_colours(o.inputs, o.level)  # the same in every option


def zone_fill(ax, k: int = 0) -> list[str]:
    """The fill colours of the k-th collection drawn on a map (0: the zones)."""
    return [to_hex(c).upper() for c in ax.collections[k].get_facecolors()]


def test_side_by_side_and_difference_pages(options, pages):
    a, b = options
    colours = stored_school_colours(a.inputs, a.level)
    side = pages[1]
    assert "Option A beside Option B" in texts(side)
    maps = [ax for ax in side.axes if ax.get_aspect() == 1.0]
    assert len(maps) == 2 and maps[0].get_xlim() == maps[1].get_xlim()
    for ax, o in zip(maps, options, strict=True):
        assert zone_fill(ax) == [colours[s] for s in zones_frame(o)["site_id"]]
    diff = pages[2]
    assert "Option B: where it differs from Option A" in texts(diff)
    differs = a.assignment != b.assignment
    want = f"{round(b.problem.demand[0, differs].sum()):,} students in {differs.sum()} planning"
    assert any(want in t for t in texts(diff))
    (ax,) = [ax for ax in diff.axes if ax.get_aspect() == 1.0]
    to = b.site_id_of(b.assignment)[differs]
    assert set(zone_fill(ax, 0)) == {"#E6E6E6"}  # first the units, grey
    assert set(zone_fill(ax, 1)) == {colours[s] for s in to}  # then the changed ones


def test_pages_have_no_solver_words(pages):
    for fig in pages:
        found = SOLVER_WORDS.findall(" ".join(texts(fig)))
        assert not found, found


def test_labels_fit_inside_their_zones_without_overlap(tmp_path):
    from districting.outputs.packet_layout import page
    from districting.outputs.packet_maps import draw_zone_map, extent_of, map_axes

    # 14 schools on a small grid: narrow zones, so some names cannot fit
    town = make_town(tmp_path, nx=16, ny=12, n_sites=14, seed=3)
    o = make_outcome(town, name="Crowded")
    zones = zones_frame(o)
    fig = page("letter")
    ax = map_axes(fig, extent_of(o), 0.03, 0.2, 0.46, 0.6)
    drawn = draw_zone_map(ax, o, zones, stored_school_colours(town, "elementary"))
    renderer = fig.canvas.get_renderer()
    to_data = ax.transData.inverted()
    geoms = dict(zip(zones["site_id"], zones.geometry, strict=True))
    names = dict(zip(o.site_ids, o.sites["name"].map(short_name), strict=True))
    boxes, named, labelled = [], [], set()
    for t in ax.texts:
        if t.get_fontsize() != 6.8:
            continue  # the scale bar's figures
        box = t.get_window_extent(renderer)
        (x0, y0), (x1, y1) = to_data.transform([[box.x0, box.y0], [box.x1, box.y1]])
        x, y = t.get_position()
        (sid,) = [s for s, g in geoms.items() if g.contains(shapely.Point(x, y))]
        assert geoms[sid].contains(shapely.box(x0, y0, x1, y1)), t.get_text()
        assert not any(box.overlaps(other) for other in boxes), t.get_text()
        boxes.append(box)
        labelled.add(sid)
        if not t.get_text().isdigit():
            assert t.get_text() == names[sid]
            named.append(box)
    assert labelled == set(geoms)  # every zone has its name or a number
    # no name covers a school's marker
    sites = ax.transData.transform(shapely.get_coordinates(o.sites.geometry.to_numpy()))
    for box in named:
        assert not any(box.contains(x, y) for x, y in sites)
    assert drawn["key"]  # and the numbers are keyed by name
    assert all(re.fullmatch(r"\d+ .+ Elementary", k) for k in drawn["key"])



def test_long_tables_continue_on_next_pages(tmp_path):
    from districting.outputs.packet import _table_pages  # the schools pages alone (no maps)

    town = make_town(tmp_path, nx=16, ny=12, n_sites=30, seed=3)
    o = make_outcome(town, name="Many schools")
    header, rows, _ = school_rows(o)
    school_pages = _table_pages(o, "letter", "2027-01-15", 3)
    assert len(school_pages) >= 2
    assert "(page 1 of" in school_pages[0].texts[0].get_text()
    assert "page 4" in texts(school_pages[1])
    drawn = [t for p in school_pages for t in texts(p)]
    assert all(f"({sid})" in " ".join(drawn) for sid in o.site_ids)
    assert len(rows) == 31


def test_no_plan_is_refused(town):
    o = make_outcome(town)
    a = o.assignment.copy()
    a[0] = -1
    bad = outcome_from_assignment(town, o.settings, a, {"status": "infeasible"})
    with pytest.raises(ValueError, match="no valid plan"):
        packet_figures([bad])
    with pytest.raises(ValueError, match="at least one"):
        packet_figures([])


def test_streets_are_a_reference_layer_when_the_project_has_them(tmp_path):
    from districting.outputs.packet_layout import page
    from districting.outputs.packet_maps import draw_zone_map, extent_of, legend, map_axes
    from districting.outputs.symbols import STREET_LINE

    town = make_town(tmp_path)
    x0, y0, x1, y1 = town.units.total_bounds
    streets = np.array([shapely.LineString([(x0, (y0 + y1) / 2), (x1, (y0 + y1) / 2)]),
                        shapely.LineString([((x0 + x1) / 2, y0), ((x0 + x1) / 2, y1)])])
    town = dataclasses.replace(town, street_lines=streets)  # as intake reads [streets]
    o = make_outcome(town)
    fig = page("letter")
    ax = map_axes(fig, extent_of(o), 0.03, 0.2, 0.46, 0.6)
    colours = stored_school_colours(town, "elementary")
    drawn = draw_zone_map(ax, o, zones_frame(o), colours)
    assert drawn["streets"]
    grey = [c for c in ax.collections if len(c.get_edgecolor())
            and to_hex(c.get_edgecolor()[0]) == STREET_LINE.colour]
    assert grey and len(grey[0].get_paths()) == 2
    legend(fig, [drawn], colours, 0.15)
    assert "Streets" in [t.get_text() for t in fig.legends[0].get_texts()]


@pytest.mark.parametrize("name", ["Option A", "elementary-fewer-moves: where it differs from "
                                  "elementary-shortest-travel", "W" * 80 + ": beside " + "M" * 80])
def test_page_titles_stay_clear_of_the_notice_box(name):
    """Measured by matplotlib's own renderer: the title ends left of the notice box."""
    from districting.outputs.packet_layout import frame, page

    fig = page("letter")
    frame(fig, name, "subtitle", "footer", 1, full_notice=False)
    fig.canvas.draw()  # lays out the notice's box
    renderer = fig.canvas.get_renderer()
    title = fig.texts[0]  # frame() writes the title first
    notice = next(t for t in fig.texts if t.get_text() == "DRAFT FOR DISCUSSION")
    box = notice.get_bbox_patch().get_window_extent(renderer)
    assert title.get_window_extent(renderer).x1 < box.x0
    assert title.get_fontsize() >= 8
    if len(name) < 40:
        assert title.get_text() == name and title.get_fontsize() == 15

"""What the page says without a browser: the first-load note, the note on a restored
result, and downloads named after the saved option (ui/views/intro.py, ui/session.py,
ui/views/downloads.py)."""

from __future__ import annotations

import datetime as dt
import json

import pandas as pd
from ui_town import new_store

from ui.session import Session
from ui.store import Store
from ui.views.downloads import DownloadsPanel
from ui.views.intro import IntroNote


def test_the_first_screen_says_what_is_on_it_and_can_be_put_away(inputs):
    session = Session(new_store(inputs))
    note = IntroNote(session)
    text = note.text.object
    assert "today's zones</b>" in text and "140 planning units" in text
    assert "Rerun" in text and "undone" in text
    session.store.rerun()
    session.state.plan_version += 1  # what the runner does when a plan arrives
    assert "today's zones</b>" not in note.text.object
    assert "the last result</b>" in note.text.object
    assert note.box.visible and not note.reopen.visible
    note._hide(None)
    assert not note.box.visible and note.reopen.visible
    again = IntroNote(Session(Store(inputs)))  # the page opened again: put away
    assert not again.box.visible and again.reopen.visible
    again._show(None)
    assert again.box.visible and IntroNote(Session(Store(inputs))).box.visible


def test_a_reloaded_page_says_it_shows_the_last_result(inputs):
    st = new_store(inputs)
    assert "Showing" not in Session(st).state.message  # nothing to restore yet
    out = st.rerun()
    page = Session(Store(inputs))  # the page opened again
    assert page.store.outcome is not None
    local = dt.datetime.fromisoformat(out.created).astimezone()
    message = page.state.message
    assert message.startswith("Showing the last result for the middle level, solved at "
                              f"{local:%H:%M} on {local.day} {local:%b %Y}")
    assert "optimal" not in message and "gap" not in message
    st.save_option("East side")
    assert "option 'East side'" in Session(Store(inputs)).state.message
    assert "140 planning units" in IntroNote(page).text.object
    assert "today's zones</b>" not in IntroNote(page).text.object


def test_downloads_are_named_after_the_saved_option(inputs):
    session = Session(new_store(inputs))
    session.store.rerun()
    session.state.plan_version += 1
    panel = DownloadsPanel(session)
    assert all(b.filename.startswith("unsaved-result-middle") for b in panel.buttons)
    assert session.save_option("Hearing option B")
    assert [b.filename for b in panel.buttons][:4] == [
        "hearing-option-b-middle.gpkg", "hearing-option-b-middle.geojson",
        "hearing-option-b-middle.zip", "hearing-option-b-middle-units.csv"]
    assert "Hearing option B" in panel.note.object
    csv = panel._make("units_csv")
    assert "hearing-option-b" in csv
    # the file itself names the option wherever it names one
    text = open(csv, encoding="utf-8").read()
    assert "(unsaved" not in text
    assert len(pd.read_csv(csv, comment="#")) == 140
    # each CSV's sidecar sits beside it, under the CSV's name (districting.outputs.sheets)
    names = {b.filename for b in panel.buttons}
    for table in ("units", "schools", "feeders"):
        assert f"hearing-option-b-middle-{table}.about.json" in names
        about = json.loads(open(panel._make(f"{table}_about"), encoding="utf-8").read())
        assert about["option"] == "Hearing option B" and about["columns"]


def test_the_schools_table_has_no_nan_and_plain_titles(inputs):
    from ui.views.sites import SitesTable

    session = Session(new_store(inputs))
    st = session.store
    session.edit_site(st.site_ids[3], status="closed")  # no students: no mean trip
    for sid in st.site_ids[:3]:
        session.edit_site(sid, capacity=1200)
    st.rerun()
    table = SitesTable(session)
    value = table.table.value.set_index("site_id")
    km = value["Mean travel (km)"]
    assert km[st.site_ids[3]] == "\u2013" and "no students" in table.notes["Mean travel (km)"]
    assert all(v.replace(".", "").isdigit() and len(v.split(".")[1]) == 2
               for v in km.drop(st.site_ids[3]))
    assert not value.isna().any().any() and "nan" not in value.astype(str).to_numpy()
    # the screen shows what the schools CSV holds
    csv = pd.read_csv(st.export("schools_csv")).set_index("Site id")
    for column in ("Students 2027", "Students moving in (2027)", "Utilization 2027 (%)"):
        for sid in st.site_ids[:3]:
            assert float(value.loc[sid, column].replace(",", "")) == csv.loc[sid, column]
    titles = table.table.titles
    assert titles["capacity"] == "Capacity (edit)"


def test_todays_zones_name_the_schools_outside_the_band_and_by_how_much():
    from ui.views.results import outside_band

    sites = pd.DataFrame({  # worked by hand: A is over in 2028 most, B under in 2027
        "site_id": ["A", "B", "C"], "name": ["Alder", "Birch", "Cedar"],
        "min_util": [0.6, 0.6, 0.6], "max_util": [1.0, 1.0, 1.0],
        "util_2027": [1.02, 0.50, 0.80], "util_2028": [1.10, 0.58, 0.81],
        "flag": ["over 100% in 2027, 2028", "under 60% in 2027, 2028", ""]})
    assert outside_band(sites) == ["Alder (A) 110% in 2028, over its 100% limit",
                                   "Birch (B) 50% in 2027, under its 60% floor"]


def test_the_change_tables_read_as_the_sheets_do(inputs):
    from ui.views.results import ResultsView

    session = Session(new_store(inputs))
    st = session.store
    st.rerun()
    session.state.plan_version += 1
    view = ResultsView(session)
    changes = view.changes.value
    frame = st.changes_frame(st.on_screen(), st.today())
    assert len(changes) == len(frame) > 0
    assert "Students 2027" in changes.columns and "index" not in changes.columns
    # whole students with thousands separators, km with two decimals, never NaN
    total = sum(int(v.replace(",", "")) for v in changes["Students 2027"])
    assert total == round(frame["students"].round().sum())
    assert all(len(v.split(".")[1]) == 2 for v in changes["Travel after (km)"])
    assert "nan" not in changes.astype(str).to_numpy()
    flows = view.flows.value
    assert sum(int(v.replace(",", "")) for v in flows["Planning units"]) == len(frame)
    # the feeder table on screen is the feeder CSV's, as text
    from districting.outputs.feeders import feeder_sheet

    sheet, _notes = feeder_sheet(st.on_screen())
    shown = view.feeders.value
    assert len(shown) == len(sheet)
    assert list(shown.columns) == [c for c in sheet.columns if c != "Zones of the other level"]

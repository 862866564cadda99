"""Walk, transport and group-share columns of the school table, its CSV and the summary.

Expected values are recomputed here by plain loops over units (straight-line distances from
the unit points, as the invented grid town has no barriers or streets), apart from the
code under test.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import shapely
from exports_town import make_outcome, make_town

from districting.intake.records import GroupSettings, WalkSettings
from districting.outputs.console import plan_summary
from districting.outputs.sheets import school_sheet
from districting.outputs.tables import school_table

WALK = 600.0


def practice_town(tmp_path, band=0.0):
    inputs = make_town(tmp_path)
    counts = inputs.counts["elementary"]
    # an invented group, more common eastwards: a tenth of the students per grid column
    # (10 columns, units numbered row by row), rounded down
    east = (np.arange(counts.shape[1]) % 10) / 10
    group = np.floor(counts * east[None, :])[None]
    settings = dataclasses.replace(
        inputs.settings, walking=WalkSettings(distance={"elementary": WALK}),
        groups=GroupSettings(("meal_support_{year}",), band))
    return dataclasses.replace(inputs, settings=settings, groups={"elementary": group})


def test_school_table_counts_walkers_transport_and_group_shares_by_hand(tmp_path):
    inputs = practice_town(tmp_path)
    out = make_outcome(inputs)
    t = school_table(out)
    pts = shapely.get_coordinates(inputs.units["point"].to_numpy())
    xy = shapely.get_coordinates(inputs.sites.geometry.to_numpy())
    a = out.assignment
    counts, group = inputs.counts["elementary"], inputs.groups["elementary"][0]
    for year in (2027, 2029):
        row = inputs.year_row(year)
        for j in range(len(xy)):
            walk = ride = members = students = 0.0
            for i in range(len(a)):
                if a[i] != j:
                    continue
                d = float(np.hypot(*(pts[i] - xy[j])))
                if d <= WALK:
                    walk += counts[row, i]
                else:
                    ride += counts[row, i]
                members += group[row, i]
                students += counts[row, i]
            assert t.loc[j, f"walkers_{year}"] == walk
            assert t.loc[j, f"transported_{year}"] == ride
            assert abs(t.loc[j, f"share_meal_support_{year}"] - members / students) < 1e-12
    assert t["walkers_2027"].sum() > 0 and t["transported_2027"].sum() > 0
    sheet, notes = school_sheet(out)
    assert "Students needing transport 2028" in sheet.columns
    assert "Share of meal_support 2028 (%)" in notes
    assert "600 m" in notes["Students within walking distance 2027"]
    assert sheet["Students needing transport 2027"].sum() == t["transported_2027"].sum()


def test_the_summary_says_walkers_transport_and_group_shares(tmp_path):
    out = make_outcome(practice_town(tmp_path, band=15.0))
    text = plan_summary(out)
    rides = school_table(out)["transported_2027"].sum()
    assert f"{rides:,.0f} need transport" in text
    assert "meal_support" in text and "15 points either side" in text


def test_without_walking_or_groups_the_table_keeps_its_columns(tmp_path):
    t = school_table(make_outcome(make_town(tmp_path)))
    assert not [c for c in t.columns if c.startswith(("walkers_", "transported_", "share_"))]


def test_the_packet_page_lists_walkers_transport_and_shades_shares_outside_the_band(tmp_path):
    from districting.outputs.packet_practice import practice_pages, practice_rows

    out = make_outcome(practice_town(tmp_path, band=20.0))
    t = school_table(out)
    header, rows, flags = practice_rows(out)
    assert header[:3] == ["School", "Walk\n2027", "Transport\n2027"]
    assert header[3:] == ["meal support\n2027", "meal support\n2029"]
    assert rows[-1][2] == f"{t['transported_2027'].sum():,.0f}"
    counts, group = out.inputs.counts["elementary"], out.inputs.groups["elementary"][0]
    row = out.inputs.year_row(2027)
    district = group[row].sum() / counts[row].sum()
    assert rows[-1][3] == f"{100 * district:.1f}%"
    # a school is shaded exactly when its share is more than 20 points from the district's
    for k, (_, r) in enumerate(t[t["open"]].iterrows()):
        outside = abs(r["share_meal_support_2027"] - district) > 0.20
        assert (flags[k][3] == "over") == outside
    assert any(f[3] == "over" for f in flags[:-1]) and any(f[3] == "" for f in flags[:-1])
    assert len(practice_pages(out, "letter", "2026-12-03", 5)) == 1


def test_every_export_carries_the_walk_transport_and_group_columns(tmp_path):
    import zipfile

    import geopandas as gpd

    from districting.outputs.exports import export_all, read_export_csv

    out = make_outcome(practice_town(tmp_path))
    paths = export_all(out, tmp_path / "exports")
    t = school_table(out)
    schools, record = read_export_csv(paths["schools_csv"])
    assert schools["Students needing transport 2029"].sum() == t["transported_2029"].sum()
    assert "beyond 600 m" in record["columns"]["Students needing transport 2029"]
    geojson = gpd.read_file(paths["geojson"])
    assert {"walkers_2027", "transported_2027", "share_meal_support_2027"} <= set(
        geojson.columns)
    shp = gpd.read_file(f"zip://{paths['shapefile']}")
    assert {"wk_2027", "tr_2027", "g1_2027"} <= set(shp.columns)
    with zipfile.ZipFile(paths["shapefile"]) as zf:
        readme = zf.read("README.txt").decode()
    assert "g1_2027" in readme and "share of meal_support" in readme


def test_verify_of_an_option_catches_a_walker_sent_beyond_walking_distance(tmp_path):
    from districting.study import RunSettings, outcome_from_assignment
    from districting.verify import check_plan, facts_of_outcome

    inputs = practice_town(tmp_path)
    good = make_outcome(inputs, keep_walkers=True)
    # (the nearest-school plan of the test town breaks capacity; only walkers matter here)
    assert not [f for f in check_plan(facts_of_outcome(good), good.assignment)
                if f.rule == "walkers"]
    # E01's western neighbour (250 m away) sent to E02 (three cells east, one north: 791 m)
    root = int(inputs.sites["unit_index"].iloc[0])
    a = good.assignment.copy()
    a[root - 1] = 1
    bad = outcome_from_assignment(inputs, RunSettings(level="elementary", keep_walkers=True), a)
    found = [f for f in check_plan(facts_of_outcome(bad), a) if f.rule == "walkers"]
    assert [f.unit for f in found] == [root - 1]
    assert "within walking distance" in found[0].message
    off = outcome_from_assignment(inputs, RunSettings(level="elementary", keep_walkers=False), a)
    assert not [f for f in check_plan(facts_of_outcome(off), a) if f.rule == "walkers"]

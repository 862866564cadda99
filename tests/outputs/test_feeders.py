"""The feeder table on a six-unit town whose counts are worked by hand.

Units U0 ... U5 in a row (250 m squares). Elementary students in the plan year 2027:
10, 20, 30, 5, 5, 10. Today's elementary zones: Alder (E1) = U0-U2, Birch (E2) = U3-U5.
A middle option: Cedar (M1) = U0-U1, Dunmore (M2) = U2-U5.

By hand: Alder's 60 students go 10 + 20 = 30 to Cedar (50.0%) and 30 to Dunmore (50.0%):
Alder splits. Birch's 20 students all go to Dunmore (100.0%). One split feeder of two.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import shapely

from districting.intake import Inputs, Settings, SolveSettings
from districting.intake.adjacency import Adjacency
from districting.intake.feeders import FeederSettings
from districting.outputs.exports import export_all, read_export_csv
from districting.outputs.feeders import (
    feeder_sheet,
    feeder_table,
    feeder_words,
    given_zones,
    split_feeders,
)
from districting.study import RunSettings, outcome_from_assignment

CRS = "EPSG:32617"
ELEMENTARY_2027 = np.array([10, 20, 30, 5, 5, 10], float)
MIDDLE_PLAN = np.array([0, 0, 1, 1, 1, 1])  # Cedar, Cedar, Dunmore x 4 (level's site order)


def feeder_town(folder: Path, feeders: FeederSettings | None = None) -> Inputs:
    x0 = 500_000.0 + 250.0 * np.arange(6)
    geoms = shapely.box(x0, 4_400_000.0, x0 + 250.0, 4_400_250.0)
    ids = [f"U{k}" for k in range(6)]
    units = gpd.GeoDataFrame({"unit_id": ids, "point": shapely.centroid(geoms)},
                             geometry=geoms, crs=CRS)
    roots = np.array([0, 4, 0, 5])
    sites = gpd.GeoDataFrame({
        "site_id": ["E1", "E2", "M1", "M2"],
        "name": ["Alder Elementary", "Birch Elementary", "Cedar Middle", "Dunmore Middle"],
        "level": ["elementary", "elementary", "middle", "middle"],
        "capacity": [200.0, 200.0, 300.0, 300.0], "status": "open",
        "min_util": np.nan, "max_util": np.nan, "unit_index": roots,
    }, geometry=shapely.centroid(geoms[roots]), crs=CRS)
    elementary = np.vstack([ELEMENTARY_2027, ELEMENTARY_2027, ELEMENTARY_2027 + 1])
    settings = Settings(
        path=folder / "project.toml", name="Feeder test town (invented)", current_year=2026,
        years=(2027, 2028), plan_year=2027, levels=("elementary", "middle"),
        store=folder / "options.gpkg", solve=SolveSettings(),
        feeders=feeders or FeederSettings())
    return Inputs(
        settings=settings, units=units,
        counts={"elementary": elementary, "middle": np.full((3, 6), 8.0)},
        sites=sites,
        current={"elementary": np.array([0, 0, 0, 1, 1, 1]),
                 "middle": np.array([2, 2, 2, 3, 3, 3])},
        barriers=gpd.GeoSeries([], crs=CRS), bridges=gpd.GeoSeries([], crs=CRS),
        adjacency=Adjacency.from_edges(ids, [(k, k + 1) for k in range(5)]), report=None)


def middle_option(inputs: Inputs, **rs):
    return outcome_from_assignment(inputs, RunSettings(level="middle", **rs), MIDDLE_PLAN,
                                   {"status": "feasible"}, name="Middle A")


def test_feeder_table_matches_the_counts_worked_by_hand(tmp_path):
    t = feeder_table(middle_option(feeder_town(tmp_path)))
    got = {(r.from_id, r.to_id): (r.students, round(100 * r.share, 1), r.split)
           for r in t.itertuples()}
    assert got == {("E1", "M1"): (30.0, 50.0, True), ("E1", "M2"): (30.0, 50.0, True),
                   ("E2", "M2"): (20.0, 100.0, False)}
    assert set(t["lower_level"]) == {"elementary"} and set(t["upper_level"]) == {"middle"}
    assert split_feeders(t) == 1
    assert (t["source"] == "elementary: today's zones").all()


def test_the_elementary_option_feeds_today_s_middle_zones(tmp_path):
    # an elementary plan E1 = U0-U3, E2 = U4-U5 against today's middle zones M1 = U0-U2,
    # M2 = U3-U5: E1 sends 10+20+30 = 60 to Cedar and 5 to Dunmore (92.3% / 7.7%)
    inputs = feeder_town(tmp_path)
    option = outcome_from_assignment(inputs, RunSettings(level="elementary"),
                                     np.array([0, 0, 0, 0, 1, 1]), {"status": "feasible"})
    t = feeder_table(option)
    got = {(r.from_id, r.to_id): (r.students, round(100 * r.share, 1)) for r in t.itertuples()}
    assert got == {("E1", "M1"): (60.0, 92.3), ("E1", "M2"): (5.0, 7.7),
                   ("E2", "M2"): (15.0, 100.0)}


def test_every_export_carries_the_feeder_table_and_its_sidecar(tmp_path):
    paths = export_all(middle_option(feeder_town(tmp_path)), tmp_path / "out")
    sheet, about = read_export_csv(paths["feeders_csv"])
    assert list(sheet["Students 2027"]) == [30, 30, 20]
    assert list(sheet["Share of the from school's students (%)"]) == [50.0, 50.0, 100.0]
    assert list(sheet["From school splits"]) == ["yes", "yes", "no"]
    assert set(about["columns"]) == set(feeder_sheet(middle_option(
        feeder_town(tmp_path)))[1])


def test_a_named_option_that_is_not_saved_names_the_key_and_the_fix(tmp_path):
    inputs = feeder_town(tmp_path, FeederSettings(zones={"elementary": "Plan Z"}))
    with pytest.raises(ValueError) as err:
        given_zones(inputs, "elementary")
    text = str(err.value)
    assert "project.toml: [feeders] zones, elementary = 'Plan Z'" in text
    assert "no option named 'Plan Z'" in text and "fix:" in text


def test_whole_feeding_nests_the_zones_on_the_map(tmp_path):
    """Solved for real: with Alder's zone U0-U3 today, the cheapest middle plan splits it
    at U2 | U3 (each unit to its nearer school); whole feeding sends U3 with the rest of
    Alder's zone, and each elementary zone's dissolved polygon lies inside one middle
    zone's polygon (shapely's within, on the zones as the exports draw them)."""
    from districting.outputs.zones import dissolve_zones
    from districting.study import run

    inputs = feeder_town(tmp_path)
    inputs.current["elementary"][:] = [0, 0, 0, 0, 1, 1]
    free = run(inputs, RunSettings(level="middle", feeding=""))
    assert free.assignment.tolist() == [0, 0, 0, 1, 1, 1]
    assert split_feeders(feeder_table(free)) == 1
    whole = run(inputs, RunSettings(level="middle", feeding="whole"))
    assert whole.plan.status == "optimal"
    assert whole.assignment.tolist() == [0, 0, 0, 0, 1, 1]
    assert split_feeders(feeder_table(whole)) == 0
    ids = inputs.sites["site_id"].to_numpy()
    lower = dissolve_zones(inputs.units, ids[inputs.current["elementary"]])
    upper = dissolve_zones(inputs.units, whole.site_id_of(whole.assignment))
    for poly in lower.geometry:
        assert sum(poly.within(u.buffer(1e-6)) for u in upper.geometry) == 1


def test_the_packet_prints_the_feeder_table_as_exported(tmp_path):
    from matplotlib.text import Text

    from districting.outputs.packet_feeders import feeder_pages

    (fig,) = feeder_pages(middle_option(feeder_town(tmp_path)), "letter", "today", 7)
    texts = [t.get_text() for t in fig.findobj(Text)]
    assert "Alder Elementary (E1)" in texts and "Dunmore Middle (M2)" in texts
    assert texts.count("50.0%") == 2 and texts.count("100.0%") == 1
    assert texts.count("yes") == 2 and "page 7" in texts
    assert any("1 of 2 elementary schools split" in " ".join(t.split()) for t in texts)
    # the summary line counts schools the same way ("1 of 2 ... schools split")
    assert feeder_words(middle_option(feeder_town(tmp_path)))[0].startswith(
        "feeders elementary -> middle: 1 of 2 elementary schools split (")
    # a level whose neighbours have no zones gets no page
    lone = feeder_town(tmp_path)
    lone.current["elementary"][:] = -1
    assert feeder_pages(middle_option(lone), "letter", "today", 7) == []

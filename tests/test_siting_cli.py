"""``geo-reach sites`` end to end: a case worked by hand, the scenario it writes, refusals.

The network is a straight 10 km road of 1 km, 1-minute links (written from arrays); points sit on the
road, so a trip costs the km between its ends.  Objectives: Church and ReVelle (1974), maximal
covering; Hakimi (1964) / ReVelle and Swain (1970), p-median.
"""

from __future__ import annotations

import json
import sys
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import shapely
from pyproj import CRS

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network  # noqa: E402

from geo_reach import cli  # noqa: E402
from geo_reach._meta import CAUTION  # noqa: E402

X0, Y0 = 500000.0, 6000000.0
UTM = CRS.from_epsg(32633)


def run(argv, capsys, monkeypatch, commands=None):
    monkeypatch.setattr(cli, "COMMANDS", commands or [argv[0]])
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def assert_refused(code, err, *words):
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("geo-reach: error:"), err
    for w in words:
        assert w in lines[0], (w, lines[0])


def write_points(path, km, crs=UTM, dy=None, **fields):
    x = X0 + np.asarray(km, float) * 1000.0
    y = Y0 + (np.zeros(len(x)) if dy is None else np.asarray(dy, float))
    gpd.GeoDataFrame(fields, geometry=shapely.points(np.column_stack([x, y])), crs=crs).to_file(path)
    return path


@pytest.fixture
def case(tmp_path):
    xy = np.column_stack([X0 + np.arange(11) * 1000.0, np.full(11, Y0)])
    net = make_network([(a, a + 1) for a in range(10)], xy, minutes=1.0)
    object.__setattr__(net, "crs", UTM)
    net.edges_frame().to_file(tmp_path / "net.gpkg", layer="edges", driver="GPKG")
    net.nodes_frame().to_file(tmp_path / "net.gpkg", layer="nodes", driver="GPKG")
    # settlements A km 0 (100), B km 3 (500), C km 4 (300), D km 7.4 (400), E km 9.6 (200), F 9 km off (50)
    write_points(tmp_path / "settlements.gpkg", [0, 3, 4, 7.4, 9.6, 5], dy=[0, 0, 0, 0, 0, 9000],
                 name=list("ABCDEF"), pop=[100, 500, 300, 400, 200, 50])
    # a clinic at km 0 and a market at km 4
    write_points(tmp_path / "hubs.gpkg", [0, 4], hub_id=[1, 2], kind=["clinic", "market"])
    # candidates c1 km 3, c2 km 6.2, c3 km 8, c4 km 10
    write_points(tmp_path / "cands.gpkg", [3, 6.2, 8, 10], label=["c1", "c2", "c3", "c4"])
    return tmp_path


def args_for(d, *extra):
    return ["sites", d / "net.gpkg", "--hubs", d / "hubs.gpkg", "--hub-id-field", "hub_id", "--hub-kind-field", "kind",
            "--hub-kind", "clinic", "--settlements", d / "settlements.gpkg", "--population-field", "pop",
            "--settlement-id-field", "name", "--candidates", d / "cands.gpkg", "-o", d / "out.gpkg", *extra]


def test_coverage_by_hand(case, capsys, monkeypatch):
    """T = 2.5 minutes; the clinic at km 0 already covers A.  Within 2.5 of c1 (km 3): B (0), C (1) = 800
    people; c2 (km 6.2): C (2.2), D (1.2) = 700; c3 (km 8): D (0.6), E (1.6) = 600; c4 (km 10): E (0.4) = 200.
    Best pair: c1 + c3 = 800 + 600 (c1 + c2 cover B, C, D = 1200; c2 + c3 C, D, E = 900), so 100 + 1400 = 1500
    people within T.  Minutes saved against the clinic at km 0: c1: B 3 -> 0 (500 x 3) + C 4 -> 1
    (300 x 3) = 2400; then c3: D 7.4 -> 0.6 (400 x 6.8) + E 9.6 -> 1.6 (200 x 8) = 4320."""
    code, out, err = run(args_for(case, "--count", 2, "--objective", "coverage", "--within-minutes", 2.5,
                                  "--json"), capsys, monkeypatch)
    assert code == 0, err
    assert CAUTION in err
    rep = json.loads(out)
    assert rep["objective"] == pytest.approx(1500.0)
    assert rep["objective_before"] == pytest.approx(100.0)
    assert rep["optimal"] is True and rep["gap"] == 0.0 and rep["bound"] == pytest.approx(1500.0)
    layer = gpd.read_file(case / "out.gpkg", layer="chosen_sites")
    assert list(layer.columns)[:4] == ["site_id", "order", "people_newly_within", "person_minutes_saved"]
    assert layer["site_id"].tolist() == [1, 3] and layer["order"].tolist() == [1, 2]
    np.testing.assert_allclose(layer["people_newly_within"], [800, 600])
    np.testing.assert_allclose(layer["person_minutes_saved"], [2400, 4320], rtol=1e-9)
    np.testing.assert_allclose(shapely.get_coordinates(layer.geometry.values),
                               [[X0 + 3000, Y0], [X0 + 8000, Y0]])
    assert [s["site_id"] for s in rep["sites"]] == [1, 3]


def test_total_minutes_by_hand(case, capsys, monkeypatch):
    """One site, no bound.  Person-minutes with the clinic alone: 0 + 500x3 + 300x4 + 400x7.4 + 200x9.6
    = 7580.  With c1 (km 3): C 1, D 4.4, E 6.6 -> 300 + 1760 + 1320 = 3380; c2 (km 6.2): B 3, C 2.2, D 1.2,
    E 3.4 -> 1500 + 660 + 480 + 680 = 3320; c3 (km 8): B 3, C 4, D 0.6, E 1.6 -> 1500 + 1200 + 240 + 320 = 3260;
    c4 (km 10): 1500 + 1200 + 1040 + 80 = 3820.  Best: c3, 3260 person-minutes; F (9 km off the road)
    reaches nothing and is reported apart."""
    code, out, err = run(args_for(case, "--count", 1, "--objective", "total-minutes", "--json"), capsys, monkeypatch)
    assert code == 0, err
    rep = json.loads(out)
    assert rep["objective"] == pytest.approx(3260.0)
    assert rep["objective_before"] == pytest.approx(7580.0)
    assert rep["optimal"] is True
    assert rep["people_unreachable"] == pytest.approx(50.0)
    layer = gpd.read_file(case / "out.gpkg", layer="chosen_sites")
    assert layer["site_id"].tolist() == [3]
    assert layer["person_minutes_saved"].tolist() == pytest.approx([4320.0])


def test_scenario_file_adds_the_sites_to_a_study(case, capsys, monkeypatch):
    """The scenario parses as TOML, points to the chosen_sites layer, and a study run with it adds the
    two sites as clinics (people newly within 2.5 minutes of a clinic: 1400, as above)."""
    code, _, err = run(args_for(case, "--count", 2, "--objective", "coverage", "--within-minutes", 2.5,
                                "--scenario-file", case / "new.toml"), capsys, monkeypatch)
    assert code == 0, err
    text = (case / "new.toml").read_text()
    assert CAUTION in text
    sc = tomllib.loads(text)["scenarios"]["new_clinic_sites"]
    assert sc["add_hubs"] == {"path": "out.gpkg", "layer": "chosen_sites", "id_field": "hub_id",
                              "name_field": "name", "kind_field": "kind"}
    sites = gpd.read_file(case / "out.gpkg", layer="chosen_sites")
    assert sites["hub_id"].tolist() == [3, 4]          # after the existing ids 1 and 2
    assert sites["kind"].tolist() == ["clinic", "clinic"]
    from geo_reach.pipeline.inputs import read_hubs
    from geo_reach.pipeline.scenarios import scenario_inputs
    from geo_reach.study import load_study

    study = case / "study.toml"
    study.write_text('[network]\nprebuilt = "net.gpkg"\n[hubs]\npath = "hubs.gpkg"\nid_field = "hub_id"\n'
                     'kind_field = "kind"\n' + text)
    st = load_study(study)
    base = read_hubs(st, st.hubs, UTM)
    _, hubs, changes, _ = scenario_inputs(st, "new_clinic_sites", [], base)
    assert sorted(map(int, hubs.ids)) == [1, 2, 3, 4]
    assert list(hubs.kinds) == ["clinic", "market", "clinic", "clinic"]
    assert "added 2 hub(s)" in changes


def test_settlements_and_nodes_as_candidates(case, capsys, monkeypatch):
    """Settlements as sites, coverage 2.5, one site: at B (km 3) it covers B (0) and C (1), 800 people; at C
    (km 4) the same; at D (km 7.4) D and E (2.2), 600; so B (the lower index of the tie with C), and
    100 + 800 = 900 people within T.  Nodes (every km): node 5 covers B (2), C (1) and D (2.4), 1200 people,
    more than any other node (node 4: B, C = 800; node 6: C, D = 700), so 100 + 1200 = 1300."""
    for cands, site, people in (("settlements", ("B", "C"), 900.0), ("nodes", (5,), 1300.0)):
        args = args_for(case, "--count", 1, "--objective", "coverage", "--within-minutes", 2.5, "--json")
        args[args.index(case / "cands.gpkg")] = cands
        args[args.index(case / "out.gpkg")] = case / f"sites_{cands}.gpkg"
        code, out, err = run(args, capsys, monkeypatch)
        assert code == 0, err
        rep = json.loads(out)
        assert rep["objective"] == pytest.approx(people)
        assert rep["optimal"] is True
        assert rep["sites"][0]["site_id"] in site


def refused(case, capsys, monkeypatch, args, *words):
    code, _, err = run(args, capsys, monkeypatch)
    assert_refused(code, err, *words)
    assert not (case / "out.gpkg").exists()


def test_refusals(case, capsys, monkeypatch):
    cov = ["--objective", "coverage", "--within-minutes", 2.5]
    refused(case, capsys, monkeypatch, args_for(case, "--count", 5, *cov), "--count 5", "cands.gpkg", "at most 4")
    refused(case, capsys, monkeypatch, args_for(case, "--count", 1, "--objective", "coverage", "--within-minutes", 0),
            "--within-minutes 0")
    refused(case, capsys, monkeypatch, args_for(case, "--count", 1, "--objective", "coverage", "--within-minutes", -1),
            "--within-minutes -1")
    refused(case, capsys, monkeypatch, args_for(case, "--count", 1, "--objective", "nearest"), "--objective 'nearest'")
    refused(case, capsys, monkeypatch, args_for(case, "--count", 1, "--objective", "coverage"), "needs --within-minutes")
    refused(case, capsys, monkeypatch, args_for(case, "--count", 1, "--hub-kind", "school", *cov),
            "hubs.gpkg", "field 'kind'", "no hub of kind 'school'")
    write_points(case / "settlements.gpkg", [0, 3], name=["A", "B"], pop=["100", "many"])
    refused(case, capsys, monkeypatch, args_for(case, "--count", 1, *cov), "settlements.gpkg", "feature 2",
            "field 'pop'", "'many' is not a number")


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_candidates_without_crs_refused(case, capsys, monkeypatch):
    gpd.GeoDataFrame({"n": [1]}, geometry=[shapely.Point(X0, Y0)], crs=None).to_file(case / "c.shp")
    args = args_for(case, "--count", 1, "--objective", "coverage", "--within-minutes", 2.5)
    args[args.index(case / "cands.gpkg")] = case / "c.shp"
    refused(case, capsys, monkeypatch, args, "c.shp", "no CRS")


def test_scenario_file_never_replaces_an_input(case, capsys, monkeypatch):
    before = (case / "hubs.gpkg").read_bytes()
    code, _, err = run(args_for(case, "--count", 1, "--objective", "coverage", "--within-minutes", 2.5,
                                "--scenario-file", case / "hubs.gpkg", "--overwrite"), capsys, monkeypatch)
    assert_refused(code, err, "hubs.gpkg", "is also an input")
    assert (case / "hubs.gpkg").read_bytes() == before
    assert not (case / "out.gpkg").exists()


def test_workers_give_the_in_process_result(case, capsys, monkeypatch):
    """--workers 2: the settlement-candidate searches run on a local cluster of two worker processes; the
    chosen sites, their gains and the objective equal the in-process run's (the by-hand case above)."""
    cov = ["--count", 2, "--objective", "coverage", "--within-minutes", 2.5, "--json"]
    code, here, err = run(args_for(case, *cov), capsys, monkeypatch)
    assert code == 0, err
    a = gpd.read_file(case / "out.gpkg", layer="chosen_sites")
    code, there, err = run(args_for(case, *cov, "--workers", 2, "--overwrite"), capsys, monkeypatch)
    assert code == 0, err
    b = gpd.read_file(case / "out.gpkg", layer="chosen_sites")
    assert a.drop(columns="geometry").equals(b.drop(columns="geometry"))
    ra, rb = json.loads(here), json.loads(there)
    assert ra["objective"] == rb["objective"] == pytest.approx(1500.0) and ra["sites"] == rb["sites"]
    (case / "out.gpkg").unlink()
    refused(case, capsys, monkeypatch, args_for(case, *cov, "--workers", 0), "--workers 0")

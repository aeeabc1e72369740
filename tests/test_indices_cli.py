"""``geo-reach indices`` end to end: the layer, a worked example, refusals.

The network is a straight 10 km road of 1 km, 1-minute links (written from arrays, not by the builder);
points sit on it, so trip costs are the km between them (walking the 1 km to another link would take
12 minutes, never cheaper).  Expected figures are worked by hand beside each check (2SFCA: Luo and Wang
2003, Environment and Planning B 30(6)).
"""

from __future__ import annotations

import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from pyproj import CRS

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network  # noqa: E402

from geo_reach import cli  # noqa: E402
from geo_reach._meta import CAUTION  # noqa: E402

X0, Y0 = 500000.0, 6000000.0
UTM = CRS.from_epsg(32633)


def run(argv, capsys, monkeypatch):
    monkeypatch.setattr(cli, "COMMANDS", [argv[0]])
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def assert_refused(code, err, *words):
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("geo-reach: error:"), err
    for w in words:
        assert w in lines[0], (w, lines[0])


def write_points(path, xy, crs=UTM, layer=None, **fields):
    gpd.GeoDataFrame(fields, geometry=shapely.points(np.asarray(xy, float)), crs=crs).to_file(
        path, layer=layer, driver="GPKG" if str(path).endswith(".gpkg") else None)
    return path


@pytest.fixture
def case(tmp_path):
    xy = np.column_stack([X0 + np.arange(11) * 1000.0, np.full(11, Y0)])
    net = make_network([(a, a + 1) for a in range(10)], xy, minutes=1.0)
    object.__setattr__(net, "crs", UTM)
    path = tmp_path / "net.gpkg"
    net.edges_frame().to_file(path, layer="edges", driver="GPKG")
    net.nodes_frame().to_file(path, layer="nodes", driver="GPKG")
    # settlements A km 0 (1000 people), B km 4 (2000), C km 9 (500), D 8 km off the road (50)
    write_points(tmp_path / "settlements.gpkg", [(X0, Y0), (X0 + 4000, Y0), (X0 + 9000, Y0), (X0 + 5000, Y0 + 8000)],
                 name=["A", "B", "C", "D"], pop=[1000, 2000, 500, 50])
    # hubs H1 km 2 (capacity 2), H2 km 6 (capacity 1), both clinics; M km 5, a market
    write_points(tmp_path / "hubs.gpkg", [(X0 + 2000, Y0), (X0 + 6000, Y0), (X0 + 5000, Y0)],
                 hub="H1 H2 M".split(), beds=[2.0, 1.0, 7.0], kind=["clinic", "clinic", "market"])
    return tmp_path


def base_args(d, *extra):
    return ["indices", d / "net.gpkg", "--hubs", d / "hubs.gpkg", "--hub-id-field", "hub", "--capacity-field", "beds",
            "--settlements", d / "settlements.gpkg", "--population-field", "pop", "--settlement-id-field", "name",
            "-o", d / "out.gpkg", *extra]


def test_2sfca_worked_example(case, capsys, monkeypatch):
    """Clinics only (kind field), T = 4.5 minutes.
    Pairs within T: A-H1 2 min, B-H1 2, B-H2 2, C-H2 3 (A-H2 6, C-H1 7 are beyond; D is off the network).
    Step 1: R_H1 = 2 / (1000 + 2000) = 1/1500; R_H2 = 1 / (2000 + 500) = 1/2500.
    Step 2: A_A = 1/1500; A_B = 1/1500 + 1/2500 = 8/7500; A_C = 1/2500; A_D = 0 (no path: a reason).
    Conservation: 1000/1500 + 2000 * 8/7500 + 500/2500 = 2/3 + 32/15 + 1/5 = 3 = 2 + 1."""
    code, out, err = run(base_args(case, "--hub-kind-field", "kind", "--measure", "2sfca", "--within-minutes", 4.5,
                                   "--csv", case / "out.csv"), capsys, monkeypatch)
    assert code == 0, err
    assert CAUTION in err
    layer = gpd.read_file(case / "out.gpkg", layer="access_index")
    assert list(layer.columns) == ["settlement_id", "kind", "measure", "index", "hubs_within", "nearest_minutes",
                                   "reason", "geometry"]
    assert set(layer.geom_type) == {"Point"}
    cl = layer[layer["kind"] == "clinic"].set_index("settlement_id")
    np.testing.assert_allclose(cl.loc[["A", "B", "C", "D"], "index"], [1 / 1500, 8 / 7500, 1 / 2500, 0.0], rtol=1e-9)
    assert cl.loc[["A", "B", "C", "D"], "hubs_within"].tolist() == [1, 2, 1, 0]
    np.testing.assert_allclose(cl.loc[["A", "B", "C"], "nearest_minutes"], [2.0, 2.0, 3.0], rtol=1e-9)
    assert np.isnan(cl.loc["D", "nearest_minutes"])
    assert "8,000 m from the network" in cl.loc["D", "reason"]
    assert cl.loc[["A", "B", "C"], "reason"].isna().all()
    pop = np.array([1000, 2000, 500, 50])
    assert float(pop @ cl.loc[["A", "B", "C", "D"], "index"].to_numpy()) == pytest.approx(3.0, rel=1e-12)
    # markets: M at km 5 reaches B (1 min) within 4.5; A is 5 min away, C 4 -> A gets a reason, index 0
    mk = layer[layer["kind"] == "market"].set_index("settlement_id")
    assert mk.loc["A", "reason"] == "no market within 4.5 minutes" and mk.loc["A", "index"] == 0.0
    np.testing.assert_allclose(mk.loc[["B", "C"], "index"], [7 / 2500, 7 / 2500], rtol=1e-9)
    hubs = gpd.read_file(case / "out.gpkg", layer="hub_catchments").set_index("hub_id")
    np.testing.assert_allclose(hubs.loc[["H1", "H2"], "capacity_per_person"], [1 / 1500, 1 / 2500], rtol=1e-9)
    assert hubs.loc[["H1", "H2", "M"], "settlements_within"].tolist() == [2, 2, 2]
    from geo_reach.export.tables import read_csv

    assert CAUTION in (case / "out.csv").read_text(encoding="utf-8-sig").splitlines()[0]
    csv = read_csv(case / "out.csv")
    assert list(csv.columns) == ["settlement_id", "kind", "measure", "index", "hubs_within", "nearest_minutes",
                                 "reason"]
    assert len(csv) == 8


def test_cumulative_gravity_and_capacity_default(case, capsys, monkeypatch):
    """No capacity field: S_j = 1.  Cumulative within 4.5: A 1 (H1), B 3 (H1, H2, M), C 2 (H2, M), D 0.
    Gravity, power B = 2 (c floored at 1), unbounded: B = 1/2^2 + 1/2^2 + 1/1^2 = 1.5."""
    args = base_args(case, "--measure", "cumulative", "--within-minutes", 4.5)
    args.remove("--capacity-field"), args.remove("beds")
    code, _, err = run(args, capsys, monkeypatch)
    assert code == 0, err
    layer = gpd.read_file(case / "out.gpkg", layer="access_index").set_index("settlement_id")
    assert "kind" not in layer.columns
    assert layer.loc[["A", "B", "C", "D"], "index"].tolist() == [1.0, 3.0, 2.0, 0.0]
    args = base_args(case, "--measure", "gravity", "--decay", "power", "--decay-param", 2, "--overwrite")
    args.remove("--capacity-field"), args.remove("beds")
    code, _, err = run(args, capsys, monkeypatch)
    assert code == 0, err
    layer = gpd.read_file(case / "out.gpkg", layer="access_index").set_index("settlement_id")
    # A: H1 2, M 5, H2 6 -> 1/4 + 1/25 + 1/36
    np.testing.assert_allclose(layer.loc[["A", "B"], "index"], [1 / 4 + 1 / 25 + 1 / 36, 1.5], rtol=1e-9)


def test_e2sfca_and_bfca_run(case, capsys, monkeypatch):
    for measure, extra in (("e2sfca", ["--within-minutes", 6]), ("bfca", ["--within-minutes", 4.5]),
                           ("e2sfca", ["--zone-minutes", "2,4,6", "--zone-weights", "1,0.5,0.1"])):
        code, _, err = run(base_args(case, "--measure", measure, "--overwrite", *extra), capsys, monkeypatch)
        assert code == 0, err
        layer = gpd.read_file(case / "out.gpkg", layer="access_index")
        assert (layer["measure"] == measure).all() and len(layer) == 4
    # BFCA with T 4.5 over all three hubs: B reaches 3 (H1 2, H2 1, M 7 capacity), A only H1, C H2 and M.
    code, _, err = run(base_args(case, "--measure", "bfca", "--within-minutes", 4.5, "--overwrite"), capsys,
                       monkeypatch)
    layer = gpd.read_file(case / "out.gpkg", layer="access_index").set_index("settlement_id")
    pop = layer.loc[["A", "B", "C", "D"], "index"].to_numpy() @ np.array([1000, 2000, 500, 50])
    assert pop == pytest.approx(2 + 1 + 7, rel=1e-12)    # every hub reached by someone: all supply


def refused(case, capsys, monkeypatch, args, *words):
    code, _, err = run(args, capsys, monkeypatch)
    assert_refused(code, err, *words)
    assert not (case / "out.gpkg").exists()


@pytest.mark.parametrize("beds,words", [
    ([2.0, None, 1.0], ["hubs.gpkg", "feature 2", "field 'beds'", "no capacity"]),
    ([2.0, -1.0, 1.0], ["hubs.gpkg", "feature 2", "field 'beds'", "negative capacity"]),
    (["2", "lots", "1"], ["hubs.gpkg", "feature 2", "field 'beds'", "'lots' is not a number"]),
])
def test_bad_capacity_refused(case, capsys, monkeypatch, beds, words):
    write_points(case / "hubs.gpkg", [(X0 + 2000, Y0), (X0 + 6000, Y0), (X0 + 5000, Y0)], hub=["H1", "H2", "M"],
                 beds=beds, kind=["clinic", "clinic", "market"])
    refused(case, capsys, monkeypatch, base_args(case, "--measure", "2sfca", "--within-minutes", 5), *words)


def test_zero_capacity_allowed(case, capsys, monkeypatch):
    write_points(case / "hubs.gpkg", [(X0 + 2000, Y0), (X0 + 6000, Y0), (X0 + 5000, Y0)], hub=["H1", "H2", "M"],
                 beds=[0.0, 1.0, 0.0], kind=["clinic", "clinic", "market"])
    code, _, err = run(base_args(case, "--measure", "cumulative", "--within-minutes", 4.5), capsys, monkeypatch)
    assert code == 0, err
    layer = gpd.read_file(case / "out.gpkg", layer="access_index").set_index("settlement_id")
    assert layer.loc[["A", "B", "C"], "index"].tolist() == [0.0, 1.0, 1.0]


def test_option_refusals(case, capsys, monkeypatch):
    for extra, words in ((["--measure", "3sfca", "--within-minutes", 5], ["--measure '3sfca'", "2sfca"]),
                         (["--measure", "2sfca", "--within-minutes", 0], ["--within-minutes 0"]),
                         (["--measure", "2sfca", "--within-minutes", -3], ["--within-minutes -3"]),
                         (["--measure", "2sfca"], ["needs --within-minutes"]),
                         (["--measure", "gravity", "--decay", "linear", "--decay-param", 1], ["--decay 'linear'"]),
                         (["--measure", "gravity", "--decay", "power"], ["--decay-param"]),
                         (["--measure", "2sfca", "--within-minutes", 5, "--decay", "power"], ["gravity only"]),
                         (["--measure", "e2sfca", "--within-minutes", 5, "--zone-minutes", "2,4,9"], ["beyond"]),
                         (["--measure", "e2sfca", "--within-minutes", 9, "--zone-minutes", "2,9"], ["one weight per zone"])):
        refused(case, capsys, monkeypatch, base_args(case, *extra), *words)


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_layer_refusals(case, capsys, monkeypatch):
    args = base_args(case, "--measure", "2sfca", "--within-minutes", 5)
    refused(case, capsys, monkeypatch, [a if a != "pop" else "people" for a in args],
            "settlements.gpkg", "field 'people'", "--population-field")
    write_points(case / "settlements.gpkg", [(X0, Y0), (X0 + 4000, Y0)], name=["A", "B"], pop=[1000, -5])
    refused(case, capsys, monkeypatch, args, "settlements.gpkg", "feature 2", "field 'pop'", "negative population")
    gpd.GeoDataFrame({"name": ["A"], "pop": [10]}, geometry=[shapely.Point(X0, Y0)], crs=None).to_file(
        case / "nocrs.shp")
    args = base_args(case, "--measure", "2sfca", "--within-minutes", 5)
    args[args.index(case / "settlements.gpkg")] = case / "nocrs.shp"
    refused(case, capsys, monkeypatch, args, "nocrs.shp", "no CRS")


def test_output_never_replaces_an_input(case, capsys, monkeypatch):
    before = (case / "net.gpkg").read_bytes()
    args = base_args(case, "--measure", "cumulative", "--within-minutes", 5, "--overwrite")
    args[args.index(case / "out.gpkg")] = case / "net.gpkg"
    code, _, err = run(args, capsys, monkeypatch)
    assert_refused(code, err, "net.gpkg", "is also an input")
    assert (case / "net.gpkg").read_bytes() == before
    assert pyogrio.list_layers(case / "net.gpkg")[:, 0].tolist() == ["edges", "nodes"]

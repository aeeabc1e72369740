"""The study's [criticality], [indices] and [compute] sections: the commands' numbers, in the results folder.

The study runs the same engines as ``geo-reach criticality`` and ``geo-reach indices``; the checks here
are that a study section gives the command's numbers for the same inputs (the command is the
reference: its own tests hold it against brute force with networkx, tests/test_criticality*.py and
tests/test_indices*.py), that the results folder holds the layers, tables, sheets, rasters and map
layers, that [compute] reaches the executor, and that bad keys are refused by their dotted key.

The demo region is invented (data_samples/make_region.py).
"""

from __future__ import annotations

import json
import shutil
import textwrap
from pathlib import Path

import numpy as np
import pyogrio
import pytest

from geo_reach import cli
from geo_reach.errors import InputError
from geo_reach.study import load_study

DEMO = Path(__file__).resolve().parents[1] / "data_samples"

SECTIONS = """
[criticality]
links = "all"

[indices]
measures = ["2sfca", "gravity"]
within_minutes = 60
decay = "exponential"
decay_param = 0.05
"""


def run_cli(argv, capsys):
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out, err


def demo_study(folder: Path, extra: str = SECTIONS, scenarios: bool = False) -> Path:
    """The demo study with the sections added (no scenario, no chart: quicker)."""
    shutil.copytree(DEMO, folder, dirs_exist_ok=True)
    text = (folder / "study.toml").read_text()
    if not scenarios:
        text = text[: text.index("[scenarios.")]
    text = text.replace("[outputs]\nmap = true", "[outputs]\nmap = true\nprofile_png = false")
    (folder / "study.toml").write_text(text + extra)
    return folder / "study.toml"


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    study = demo_study(folder)
    assert cli.main(["run", str(study), "-o", str(folder / "out"), "--quiet"]) == 0
    return folder


def test_criticality_section_gives_the_commands_numbers(demo_run, capsys):
    """The same network (the study's own edges and nodes), hubs, settlements, terrain and water: the
    study's link_criticality layer equals the command's, link by link."""
    folder = demo_run
    out = folder / "out"
    layer = pyogrio.read_dataframe(out / "results.gpkg", layer="link_criticality")
    run_cli(["criticality", out / "results.gpkg", "--hubs", folder / "hubs.geojson", "--hub-id-field", "hub_id",
             "--hub-kind-field", "kind", "--settlements", f"{folder / 'region.gpkg'}:settlements",
             "--settlement-id-field", "settlement_id", "--population-field", "population",
             "--max-access-m", 5000, "--walk-kmh", 5, "--terrain", folder / "terrain.tif",
             "--barriers", f"{folder / 'region.gpkg'}:water", "--cell-m", 100,
             "-o", folder / "crit.gpkg"], capsys)
    ref = pyogrio.read_dataframe(folder / "crit.gpkg", layer="link_criticality")
    assert len(layer) == len(ref) == 277
    assert list(layer.columns) == list(ref.columns)
    a, b = layer.set_index("edge_id").sort_index(), ref.set_index("edge_id").sort_index()
    for c in a.columns:
        if c == "geometry":
            continue
        np.testing.assert_allclose(a[c].to_numpy(float), b[c].to_numpy(float), rtol=1e-9, err_msg=c)
    # the figures seen: somebody is cut off by the most critical link, and ranks run 1..n
    assert layer["people_cut_off"].iloc[0] > 0 and sorted(layer["rank"]) == list(range(1, 278))
    summary = json.loads((out / "summary.json").read_text())
    assert summary["criticality"]["links_examined"] == 277
    assert summary["criticality"]["top"][0]["edge_id"] == int(layer["edge_id"].iloc[0])


def test_indices_section_hub_minutes_are_the_settlements_minutes(demo_run):
    """One trip, one number: with terrain and water, each settlement's nearest_minutes per hub kind is its
    hub_minutes_<kind> in the settlements layer."""
    out = demo_run / "out"
    idx = pyogrio.read_dataframe(out / "results.gpkg", layer="access_index")
    st = pyogrio.read_dataframe(out / "results.gpkg", layer="settlements").set_index("settlement_id")
    assert set(idx["measure"]) == {"2sfca", "gravity"}
    kinds = sorted(set(idx["kind"]))
    assert kinds == ["clinic", "market", "port"]
    assert len(idx) == 2 * len(kinds) * len(st)
    for (m, k), rows in idx.groupby(["measure", "kind"]):
        rows = rows.set_index("settlement_id")
        want = st.loc[rows.index, f"hub_minutes_{k}"].to_numpy(float)
        np.testing.assert_allclose(rows["nearest_minutes"].to_numpy(float), want, rtol=1e-9, err_msg=f"{m} {k}")
    # 2SFCA's conservation (Luo and Wang 2003): sum_i D_i A_i = supply of the hubs whose catchment holds
    # demand (capacity 1 per hub here), per kind
    cat = pyogrio.read_dataframe(out / "results.gpkg", layer="hub_catchments")
    pop = st["population"]
    for k in kinds:
        rows = idx[(idx.measure == "2sfca") & (idx.kind == k)].set_index("settlement_id")
        served = cat[(cat.measure == "2sfca") & (cat.kind == k) & (cat.settlements_within > 0)]
        assert float((rows["index"] * pop.loc[rows.index]).sum()) == pytest.approx(len(served), rel=1e-9)


def test_results_folder_holds_tables_sheets_raster_and_map_layers(demo_run):
    import openpyxl
    import rasterio

    out = demo_run / "out"
    wb = openpyxl.load_workbook(out / "tables.xlsx", read_only=True)
    assert {"link_criticality", "access_index"} <= set(wb.sheetnames)
    ws = wb["link_criticality"]
    head = [c.value for c in next(ws.iter_rows(min_row=1, max_row=1))]
    units = [c.value for c in next(ws.iter_rows(min_row=2, max_row=2))]
    assert head[:2] == ["edge_id", "people_cut_off"] and units[1] == "people"
    csv = (out / "link_criticality.csv").read_text().splitlines()
    assert "estimates" in csv[0].lower() and csv[1].startswith("edge_id,people_cut_off")
    # the raster: per cell, how many hub kinds have a hub within 60 minutes (from the kinds' surfaces)
    with rasterio.open(out / "hub_kinds_within.tif") as r:
        kinds_within = r.read(1)
    mins = {}
    for k in ("clinic", "market", "port"):
        with rasterio.open(out / f"hub_minutes_{k}.tif") as r:
            mins[k] = r.read(1).astype(float)
    with np.errstate(invalid="ignore"):
        want = sum((np.isfinite(m) & (m <= 60)).astype(float) for m in mins.values())
    some = np.isfinite(kinds_within)
    assert some.any() and np.array_equal(kinds_within[some], want[some])
    assert set(np.unique(kinds_within[some])) <= {0.0, 1.0, 2.0, 3.0}
    page = (out / "map.html").read_text()
    assert '"id":"criticality"' in page.replace(" ", "") and '"id":"indices"' in page.replace(" ", "")


def _towns(folder: Path, extra: str, river: bool = False) -> Path:
    """The two-town case of tests/test_one_trip.py (its writer), with a section added."""
    import sys

    sys.path.insert(0, str(Path(__file__).parent))
    from test_one_trip import write_case

    study = write_case(folder, river=river)
    study.write_text(study.read_text() + textwrap.dedent(extra))
    assert cli.main(["build", f"{folder / 'towns.gpkg'}:roads", "--speed-field", "speed", "-o",
                     str(folder / "net.gpkg")]) == 0
    return study


def test_compute_workers_run_criticality_on_a_local_cluster_with_the_same_numbers(tmp_path, monkeypatch):
    """[compute] workers = 2 starts a local cluster of two worker processes for the criticality section
    (the executor is asked for it), and the layer equals the in-process run's."""
    import geo_reach.parallel as par

    asked = []
    real = par.executor

    def spy(**kw):
        asked.append(kw)
        return real(**kw)

    monkeypatch.setattr(par, "executor", spy)
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    here = _towns(tmp_path / "a", "\n[criticality]\nlinks = \"all\"\n")
    there = _towns(tmp_path / "b", "\n[criticality]\nlinks = \"all\"\n\n[compute]\nworkers = 2\n")
    assert cli.main(["run", str(here), "-o", str(tmp_path / "a" / "out"), "--quiet"]) == 0
    assert cli.main(["run", str(there), "-o", str(tmp_path / "b" / "out"), "--quiet"]) == 0
    assert asked == [{"workers": None, "scheduler": None, "timeout_s": 30.0},
                     {"workers": 2, "scheduler": None, "timeout_s": 30.0}]
    a = pyogrio.read_dataframe(tmp_path / "a" / "out" / "results.gpkg", layer="link_criticality")
    b = pyogrio.read_dataframe(tmp_path / "b" / "out" / "results.gpkg", layer="link_criticality")
    assert len(a) > 0 and a.drop(columns="geometry").equals(b.drop(columns="geometry"))


@pytest.mark.parametrize("extra,key,words", [
    ("[compute]\nworkers = 2\nscheduler = \"tcp://127.0.0.1:8786\"\n", "compute.scheduler", "not both"),
    ("[compute]\nworkers = 0\n", "compute.workers", "1 or more"),
    ("[compute]\nthreads = 2\n", "compute.threads", "unknown key"),
    ("[criticality]\nlinks = \"nowhere.txt\"\n", "criticality.links", "not found"),
    ("[criticality]\nlinks = [1, \"a\"]\n", "criticality.links", "whole numbers"),
    ("[criticality]\nhazard_raster = \"terrain.tif\"\n", "criticality.hazard_raster", "needs hazard_above"),
    ("[criticality]\nhazard = \"region.gpkg\"\nlinks = [1]\n", "criticality.links", "one or the other"),
    ("[criticality]\nclose_bridges = true\n", "criticality.close_bridges", "unknown key"),
    ("[indices]\nmeasure = \"gravity\"\n", "indices.decay", "needs decay"),
    ("[indices]\nmeasure = \"2sfca\"\n", "indices.within_minutes", "needs the catchment"),
    ("[indices]\nmeasure = \"3sfca\"\n", "indices.measure", "is not one of"),
    ("[indices]\nmeasure = \"2sfca\"\nwithin_minutes = -5\n", "indices.within_minutes", "positive"),
    ("[indices]\nmeasure = \"2sfca\"\nwithin_minutes = 30\ndecay = \"power\"\n", "indices.decay", "gravity only"),
])
def test_bad_section_keys_are_refused_by_their_dotted_key_and_line(tmp_path, extra, key, words):
    study = demo_study(tmp_path, extra)
    with pytest.raises(InputError, match=r"line \d+") as err:
        load_study(study)
    assert key in str(err.value) and words in str(err.value)


def test_an_unknown_link_id_is_refused_before_the_long_steps(tmp_path, capsys):
    study = _towns(tmp_path, "\n[criticality]\nlinks = [0, 999]\n")
    code = cli.main(["run", str(study), "-o", str(tmp_path / "out"), "--quiet"])
    _, err = capsys.readouterr()
    assert code == 2 and "criticality.links" in err and "999" in err
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("links", ["[2, 0, 2]", '"links.txt"', '"links.csv"'])
def test_links_as_ids_or_a_file_examine_those_links_only(tmp_path, links):
    """criticality.links as an array of edge ids (a repeat kept once) or a file (one id per line, or a CSV
    with an edge_id column): those links only, in rank order; the file is an input the run never replaces."""
    (tmp_path / "links.txt").write_text("2\n0\n")
    (tmp_path / "links.csv").write_text("edge_id,note\n2,bridge\n0,main\n")
    study = _towns(tmp_path, f"\n[criticality]\nlinks = {links}\n")
    assert cli.main(["run", str(study), "-o", str(tmp_path / "out"), "--quiet"]) == 0
    layer = pyogrio.read_dataframe(tmp_path / "out" / "results.gpkg", layer="link_criticality")
    assert sorted(layer["edge_id"]) == [0, 2] and sorted(layer["rank"]) == [1, 2]
    if links != "[2, 0, 2]":
        assert load_study(study).input_files().count(tmp_path / links.strip('"')) == 1


def test_hazard_section_gives_the_commands_layers(tmp_path, capsys):
    """[criticality] with hazard = the river polygon (also a barrier to walking): the bridge closes and the
    east bank loses both hubs; the study's hazard_links and hazard_places equal the command's (--hazard with
    the same barriers), and the tables are written."""
    study = _towns(tmp_path, '\n[criticality]\nhazard = "towns.gpkg"\nhazard_layer = "water"\n', river=True)
    run_cli(["run", study, "-o", tmp_path / "out", "--quiet"], capsys)
    run_cli(["criticality", tmp_path / "net.gpkg", "--hubs", f"{tmp_path / 'towns.gpkg'}:hubs", "--hub-id-field",
             "hub_id", "--hub-kind-field", "kind", "--settlements", f"{tmp_path / 'towns.gpkg'}:villages",
             "--settlement-id-field", "sid", "--population-field", "population", "--walk-kmh", 5,
             "--max-access-m", 5000, "--barriers", f"{tmp_path / 'towns.gpkg'}:water", "--cell-m", 100,
             "--hazard", f"{tmp_path / 'towns.gpkg'}:water", "-o", tmp_path / "h.gpkg"],
            capsys)
    for layer in ("hazard_links", "hazard_places"):
        a = pyogrio.read_dataframe(tmp_path / "out" / "results.gpkg", layer=layer).drop(columns="geometry")
        b = pyogrio.read_dataframe(tmp_path / "h.gpkg", layer=layer).drop(columns="geometry")
        assert len(a) > 0 and list(a.columns) == list(b.columns)
        for c in a.columns:
            np.testing.assert_array_equal(a[c].to_numpy(), b[c].to_numpy(), err_msg=f"{layer}.{c}")
    places = pyogrio.read_dataframe(tmp_path / "out" / "results.gpkg", layer="hazard_places")
    places = places.set_index(places["place_id"].astype(int))
    # settlements 2, 3 and 4 stand on the east bank, outside the river: the bridge closes and they are isolated
    assert places.loc[[2, 3, 4], "isolated"].tolist() == [1, 1, 1] and places.loc[[1, 5, 6], "isolated"].sum() == 0
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())["criticality"]
    assert summary["links_closed"] >= 1 and summary["people_isolated"] == 300.0
    assert (tmp_path / "out" / "hazard_places.csv").exists()

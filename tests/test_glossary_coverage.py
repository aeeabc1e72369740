"""One vocabulary: every name geo-reach writes is in the glossary, and every glossary entry is written.

The demo study runs once (cells coarsened to 400 m to keep it quick), is compared once, and the
commands that write layers of their own (build, access, metrics, od, criticality, indices, sites) run
once each on the demo data.
Then, for every output:

* every file name in the results folder, every layer name, every field of every layer of every
  GeoPackage (and its column description in ``gpkg_data_columns``, OGC 12-128), every raster's
  band description and attribute-table field, every field a layer style (SLD) reads (which must also
  be a field of the layer it styles), every sheet and column of ``tables.xlsx``, every CSV column;
* every key of the build report (``build --report``; issue kinds are data) and of a route's GeoJSON
  properties;
* every key of ``summary.json``, recursively, by these rules for keys that are data, not names:
  ``study`` is the study file read back, so its keys are checked against the study file's schema
  (``geo_reach.study.SCHEMA``) instead; the keys of ``inputs`` (file names), ``issues`` (issue kinds),
  ``population_by_band`` and ``people_newly_within`` (band minutes), ``by_kind`` (hub kinds),
  ``hub_numbers`` (hub numbers), ``scenarios`` (scenario names) and ``upgraded`` (layer names) are
  checked to be exactly those data values;

is in :mod:`geo_reach.glossary`, with each ``<part>`` of a pattern standing only for what this run has
(its hub kinds, bands, scenario, layers).  And the other way round: a glossary entry that none of these
outputs uses must be marked ``only`` (written by one command, option or situation not run here).
No output carries a name the glossary lists as renamed.
"""

from __future__ import annotations

import json
import re
import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path
from xml.etree import ElementTree

import geopandas as gpd
import openpyxl
import pyogrio
import pytest
import rasterio

from geo_reach import glossary
from geo_reach.export.tables import read_csv
from geo_reach.network.issues import ISSUE_KINDS
from geo_reach.study import SCHEMA

DATA = Path(__file__).resolve().parents[1] / "data_samples"
KINDS = ("clinic", "market", "port")
BANDS = ("30", "60", "120")
SCENARIO = "proposed_road"


def geo_reach(*args):
    p = subprocess.run([sys.executable, "-m", "geo_reach", *map(str, args)], capture_output=True, text=True)
    assert p.returncode == 0, f"geo-reach {' '.join(map(str, args))}: {p.stderr}"
    return p


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    """The demo study's results folder and every command's output folder, from one set of runs."""
    root = tmp_path_factory.mktemp("vocab")
    data = root / "data"
    shutil.copytree(DATA, data, ignore=shutil.ignore_patterns("*.py", "*.md"))
    study = data / "study.toml"
    text = study.read_text(encoding="utf-8")
    coarse = re.sub(r"(?m)^cell_m = 100\b", "cell_m = 400", text)
    assert coarse != text, "the demo study's cell size moved: update this fixture"
    study.write_text(coarse, encoding="utf-8")
    run = root / "run"
    geo_reach("run", study, "-o", run, "--quiet")
    compare = root / "compare"
    geo_reach("compare", study, "-o", compare, "--quiet")

    cmd = root / "commands"
    cmd.mkdir()
    hubs = gpd.read_file(data / "hubs.geojson")
    hubs["beds"] = [1.0 * k for k in range(len(hubs))]          # a capacity field for the indices
    hubs.to_file(cmd / "hubs_in.gpkg", driver="GPKG")
    hub_args = ["--hubs", cmd / "hubs_in.gpkg", "--hub-id-field", "hub_id", "--hub-kind-field", "kind"]
    places = [f"{data / 'region.gpkg'}:settlements"]
    people = ["--settlements", *places, "--population-field", "population", "--settlement-id-field", "settlement_id"]
    roads = [f"{data / 'region.gpkg'}:roads", "--class-field", "class", "--class-speeds",
             "trunk=80,main=60,feeder=40,track=15", "--oneway-field", "oneway"]
    net = cmd / "net.gpkg"
    geo_reach("build", *roads, "-o", net, "--report", cmd / "build_report.json")
    geo_reach("build", *roads, "-o", cmd / "net.parquet")
    geo_reach("access", net, *hub_args, "-o", cmd / "access.gpkg")
    geo_reach("route", net, "--from", "480000,6570000", "--to", "490000,6575000", "--crs", "EPSG:32727",
              "-o", cmd / "route.geojson")
    geo_reach("metrics", net, "-o", cmd / "metrics.gpkg")
    geo_reach("od", net, "--origins", *places, "--origin-id-field", "settlement_id", "--destinations",
              cmd / "hubs_in.gpkg", "--destination-id-field", "hub_id", "--nearest", "2", "-o", cmd / "od.gpkg")
    geo_reach("criticality", net, *hub_args, "--settlements", *places, "--population-field", "population",
              "-o", cmd / "criticality.gpkg", "--csv", cmd / "criticality.csv")
    for measure, weight in (("2sfca", "minutes"), ("cumulative", "length_m")):
        within = ["--within-minutes", "30" if weight == "minutes" else "20000"]   # (metres with length_m)
        geo_reach("indices", net, *hub_args, "--capacity-field", "beds", *people, "--measure", measure,
                  "--weight", weight, *within, "-o", cmd / f"indices_{weight}.gpkg",
                  "--csv", cmd / f"indices_{weight}.csv")
    geo_reach("sites", net, *hub_args, "--hub-kind", "clinic", *people, "--candidates", "settlements",
              "--count", "2", "--objective", "coverage", "--within-minutes", "30", "-o", cmd / "sites.gpkg")
    (cmd / "hubs_in.gpkg").unlink()                              # an input, not an output
    return run, compare, cmd


def parts_of(folder: Path) -> dict:
    stems = {p.name.split(".")[0] for p in folder.iterdir() if p.suffix in (".gpkg", ".tif")}
    layers = {str(n) for g in folder.glob("*.gpkg") for n in pyogrio.list_layers(g)[:, 0]}
    return {"kind": KINDS, "band": BANDS, "scenario": (SCENARIO,), "layer": tuple(layers), "output": tuple(stems),
            "measure": ("2sfca", "cumulative"), "weight": ("minutes", "length_m"), "step": ()}


class Names:
    """Every name seen, where it was seen, and the glossary term it matched (None: not in the glossary)."""

    def __init__(self):
        self.seen: dict[str, set] = {}
        self.terms: dict[str, glossary.Term | None] = {}

    def add(self, name, where, parts):
        name = str(name)
        self.seen.setdefault(name, set()).add(where)
        self.terms.setdefault(name, glossary.lookup(name, parts))

    def missing(self):
        return {n: sorted(self.seen[n]) for n, t in self.terms.items() if t is None}

    def used(self):
        return {t.name for t in self.terms.values() if t is not None}


def _summary_keys(names: Names, obj, path: str, parts: dict):
    """Walk summary.json: every key is a name, except the keys of maps that are data (checked as data)."""
    data_maps = {
        "inputs": None,                                        # file names: checked below against the folder
        "issues": set(ISSUE_KINDS),
        "population_by_band": set(BANDS), "people_newly_within": set(BANDS),
        "by_kind": set(KINDS),
        "scenarios": {SCENARIO},
        "upgraded": None,                                      # layer names (none in the demo)
        "rows_reaching_a_hub": {"2sfca"},                      # the demo study's [indices] measure
    }
    if isinstance(obj, list):
        for x in obj:
            _summary_keys(names, x, path + "[]", parts)
        return
    if not isinstance(obj, dict):
        return
    for k, v in obj.items():
        names.add(k, f"summary.json {path}", parts)
        where = f"{path}.{k}" if path else k
        if k == "study":
            _study_keys(v, SCHEMA, "study")
        elif k == "hub_numbers":
            assert list(v) == [str(i) for i in range(1, len(v) + 1)] and len(v) == 7, where
        elif k in data_maps and isinstance(v, dict):
            expected = data_maps[k]
            if expected is not None:
                assert set(v) <= expected, (where, set(v) - expected)
            for sub_key, sub in v.items():
                _summary_keys(names, sub, f"{where}.<{k} key {sub_key}>", parts)
        else:
            _summary_keys(names, v, where, parts)


def _study_keys(obj, schema, where):
    """The study file read back: its keys are the study file's own names (geo_reach.study.SCHEMA)."""
    if isinstance(schema, list):
        for x in obj:
            _study_keys(x, schema[0], where + "[]")
    elif isinstance(schema, dict):
        assert isinstance(obj, dict), where
        unknown = set(obj) - set(schema)
        assert not unknown, f"{where}: keys not in the study file's schema: {unknown}"
        for k, v in obj.items():
            _study_keys(v, schema[k], f"{where}.{k}")
    elif isinstance(schema, tuple) and schema[0] == "map" and isinstance(schema[1], (dict, list)):
        for k, v in obj.items():                           # e.g. scenarios: the keys are scenario names
            _study_keys(v, schema[1], f"{where}.<{k}>")


def collect(folder: Path, names: Names, chosen_names: bool):
    """``chosen_names``: the user chose the file names (command outputs); else the tool did (results folder)."""
    parts = parts_of(folder)
    for f in sorted(folder.iterdir()):
        if not chosen_names:
            names.add(f.name, f"file in {folder.name}", parts)
        elif f.name.startswith("net.") and f.suffix == ".parquet":     # build -o net.parquet names one per layer
            names.add("NETWORK." + f.name.split(".", 1)[1], f"file in {folder.name}", parts)
    for g in sorted(folder.glob("*.gpkg")):
        with sqlite3.connect(g) as db:
            described = set(db.execute("SELECT table_name, column_name FROM gpkg_data_columns").fetchall())
        for layer in pyogrio.list_layers(g)[:, 0]:
            names.add(layer, f"{g.name} layer", parts)
            for field in pyogrio.read_info(g, layer=layer)["fields"]:
                names.add(field, f"{g.name}:{layer}", parts)
                assert (layer, field) in described, f"{g.name}:{layer}.{field} has no column description"
    for sld in sorted(folder.glob("*.*.sld")):     # <output>.<layer>.sld reads fields of that layer
        stem, layer = sld.name.split(".")[:2]
        fields = set(pyogrio.read_info(folder / f"{stem}.gpkg", layer=layer)["fields"])
        for prop in ElementTree.parse(sld).iter("{http://www.opengis.net/ogc}PropertyName"):
            names.add(prop.text, sld.name, parts)
            assert prop.text in fields, f"{sld.name} styles by {prop.text!r}, not a field of layer {layer}"
    for aux in sorted(folder.glob("*.tif.aux.xml")):   # the nearest-hub rasters' attribute tables
        for defn in ElementTree.parse(aux).iter("FieldDefn"):
            names.add(defn.findtext("Name"), f"{aux.name} attribute table", parts)
    for g in sorted(folder.glob("*.parquet")):
        for field in gpd.read_parquet(g).columns:
            if field != "geometry":
                names.add(field, g.name, parts)
    for t in sorted(folder.glob("*.tif")):
        with rasterio.open(t) as r:
            desc = r.descriptions[0] or ""
        head = desc.split(":")[0]
        names.add(head, f"{t.name} band description", parts)
        assert head == t.stem or head == "hub_minutes_change", (t.name, desc)
    for x in sorted(folder.glob("*.xlsx")):
        wb = openpyxl.load_workbook(x, read_only=True)
        for ws in wb.worksheets:
            names.add(ws.title, f"{x.name} sheet", parts)
            if ws.title == "about":
                continue
            head = next(ws.iter_rows(max_row=1, values_only=True))
            for col in head:
                names.add(col, f"{x.name}:{ws.title}", parts)
        wb.close()
    for c in sorted(folder.glob("*.csv")):
        for col in read_csv(c).columns:
            names.add(col, c.name, parts)
    report = folder / "build_report.json"
    if report.exists():                  # issue kinds (top level) and modes (edges_by_mode) are data keys
        rep = json.loads(report.read_text(encoding="utf-8"))
        assert set(rep["issues"]) == set(ISSUE_KINDS) and set(rep["edges_by_mode"]) <= {"road", "rail", "cable",
                                                                                           "transfer"}
        for k, v in rep.items():
            if k not in ISSUE_KINDS:
                names.add(k, report.name, parts)
            for row in v if isinstance(v, list) else []:
                for sub in row if isinstance(row, dict) else []:
                    names.add(sub, f"{report.name} {k}[]", parts)
    route = folder / "route.geojson"
    if route.exists():                   # type, geometry, properties: GeoJSON's own names (RFC 7946)
        feature = json.loads(route.read_text(encoding="utf-8"))
        assert feature["type"] == "Feature" and feature["properties"]["reachable"] is True
        for k in feature["properties"]:
            names.add(k, f"{route.name} properties", parts)
    s = folder / "summary.json"
    if s.exists():
        summary = json.loads(s.read_text(encoding="utf-8"))
        assert set(summary["inputs"]) == {"hubs.geojson", "population.tif", "region.gpkg", "terrain.tif"}
        _summary_keys(names, summary, "", parts)


@pytest.fixture(scope="module")
def names(outputs):
    n = Names()
    run, compare, commands = outputs
    collect(run, n, chosen_names=False)
    collect(compare, n, chosen_names=False)
    collect(commands, n, chosen_names=True)
    return n


def test_every_output_name_is_in_the_glossary(names):
    assert len(names.seen) > 150                             # the walk did see the outputs
    assert not names.missing(), "\n".join(f"{k}: {v}" for k, v in sorted(names.missing().items()))


def test_every_glossary_entry_is_written_or_marked_only(names):
    used = names.used()
    unused = [t.name for t in glossary.TERMS if t.name not in used and not t.only]
    assert not unused, f"glossary entries no output uses (remove them, or mark them only=...): {unused}"


def test_no_output_carries_a_renamed_name(names):
    old = sorted(set(glossary.RENAMED) & set(names.seen))
    assert not old, {n: sorted(names.seen[n]) for n in old}
    terms = {t.name for t in glossary.TERMS}
    assert not set(glossary.RENAMED) & terms                 # an old name is not a current one
    assert set(glossary.RENAMED.values()) <= terms           # and each new name is explained


def test_patterns_only_stand_for_this_runs_parts(names):
    """The checks above are strict: a pattern's <kind> stands for the run's hub kinds only."""
    parts = {"kind": KINDS, "band": BANDS, "scenario": (SCENARIO,)}
    assert glossary.lookup("hub_minutes_clinic", parts).name == "hub_minutes_<kind>"
    assert glossary.lookup("hub_minutes_school", parts) is None
    assert glossary.lookup("share_within_45_pct", parts) is None
    assert glossary.lookup("hub_minutes_clinic_change", parts).name == "<field>_change"
    assert names.terms["proposed_road_settlements"].name == "<scenario>_settlements"


def test_the_walk_sees_a_name_outside_the_glossary(tmp_path):
    """The coverage check can fail: a layer with a field the glossary lacks is caught, both as a name
    and as a column with no description."""
    import shapely

    from geo_reach.export.gpkg import write_layers

    layer = gpd.GeoDataFrame({"hub_minutes": [1.0], "pop_total_xyz": [3]}, geometry=[shapely.Point(0, 0)],
                             crs="EPSG:32727")
    write_layers(tmp_path / "out.gpkg", {"settlements": layer})
    n = Names()
    with pytest.raises(AssertionError, match="pop_total_xyz has no column description"):
        collect(tmp_path, n, chosen_names=True)
    assert list(n.missing()) == ["pop_total_xyz"]

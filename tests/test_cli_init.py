"""``geo-reach init``: the starter study loads, runs, and says why it suggests each setting.

The reference for "the file is valid" is the TOML specification as read by
Python's standard ``tomllib`` (TOML v1.0.0, Preston-Werner et al., 2021) and
the project's own study schema (``geo_reach.study.load_study``).  The default
class speeds are checked against ``geo_reach.network.costs`` (the table the
builder uses), so a suggestion and a run agree.
"""

from __future__ import annotations

import json
import re
import sys
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely

from geo_reach.cli import main
from geo_reach.network.costs import DEFAULT_CLASS_SPEEDS_KMH, DEFAULT_SPEED_KMH
from geo_reach.study import load_study

sys.path.insert(0, str(Path(__file__).parent))
from studykit import CRS, X0, Y0, write_study  # noqa: E402
from helpers.cli import cli, refused  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "data_samples"


def init(capsys, *args):
    """Run ``geo-reach init`` in process; return (exit code, stdout, stderr)."""
    code = main(["init", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


def lines_layer(path, layer, fields, n=None, geoms=None):
    """Write a small line layer (a comb of 100 m lines) with the given attribute columns."""
    n = n if n is not None else len(next(iter(fields.values())))
    geoms = geoms if geoms is not None else [shapely.LineString([(X0 + 10 * i, Y0), (X0 + 10 * i, Y0 + 100)])
                                             for i in range(n)]
    gpd.GeoDataFrame(fields, geometry=geoms, crs=CRS).to_file(path, layer=layer)
    return f"{path}:{layer}"


def points_layer(path, layer, fields, n=None, crs=CRS):
    n = n if n is not None else (len(next(iter(fields.values()))) if fields else 2)
    gpd.GeoDataFrame(fields or {"x": list(range(n))}, geometry=[shapely.Point(X0 + 5 * i, Y0 + 50) for i in range(n)],
                     crs=crs).to_file(path, layer=layer)
    return f"{path}:{layer}"


def table_of(raw, layer):
    return next(t for t in raw["lines"] if t.get("layer") == layer)


def comment_of(text, key):
    """The comment on the (active) ``key = ...`` line."""
    for ln in text.splitlines():
        if re.match(rf"^{re.escape(key)}\s*=", ln):
            return ln.split("#", 1)[1] if "#" in ln else ""
    raise AssertionError(f"no line for {key}")


# ----------------------------------------------------------------------------- the studykit layers
@pytest.fixture(scope="module")
def kit(tmp_path_factory):
    d = tmp_path_factory.mktemp("kit")
    write_study(d)
    (d / "start").mkdir()
    return d


@pytest.fixture(scope="module")
def kit_study(kit):
    out = kit / "start" / "study.toml"
    code = main(["init", *map(str, [f"{kit}/net.gpkg:roads", f"{kit}/net.gpkg:proposed", f"{kit}/net.gpkg:settlements",
                                    f"{kit}/net.gpkg:zones", kit / "hubs.geojson", kit / "pop.tif", "-o", out])])
    assert code == 0
    return out


def test_kit_study_parses_loads_and_says_why(kit_study):
    text = kit_study.read_text()
    raw = tomllib.loads(text)                       # valid TOML (tomllib, TOML v1.0.0)
    st = load_study(kit_study)                       # valid study (schema, every file exists)
    roads = table_of(raw, "roads")
    assert roads["path"] == "../net.gpkg"            # relative to the study's folder
    assert roads["mode"] == "road"
    assert roads["speed_field"] == "speed"
    assert roads["all_season_field"] == "allseason"
    assert "class_field" not in roads
    assert "looks like a speed" in comment_of(text, "speed_field")
    assert "100% of 14 filled values" in comment_of(text, "speed_field")   # the kit has 14 roads of 30 km/h
    assert raw["hubs"] == {"path": "../hubs.geojson", "id_field": "hub_id", "kind_field": "kind", "name_field": "name"}
    assert "clinic, market" in comment_of(text, "kind_field")
    assert raw["settlements"]["population_field"] == "population"
    assert raw["settlements"]["layer"] == "settlements"
    assert raw["zones"]["layer"] == "zones" and raw["zones"]["id_field"] == "zid"
    assert raw["surface"]["population"] == "../pop.tif"
    assert raw["surface"]["bands"] == [30, 60, 120]
    # the layer named "proposed" becomes a scenario adding it, not part of today's network
    assert [t["layer"] for t in raw["lines"]] == ["roads"]
    add = raw["scenarios"]["proposed"]["add_lines"]
    assert add == [{"path": "../net.gpkg", "layer": "proposed", "mode": "road", "speed_field": "speed"}]
    assert st.scenarios and st.hubs is not None
    # the example scenario is there, commented out
    assert "# [scenarios.example]" in text
    assert "Model estimates" in text


def test_kit_study_runs(kit, kit_study):
    out = kit / "run-out"
    code, stdout, err = cli("run", kit_study, "-o", out, "--quiet")
    assert code == 0, err
    s = json.loads((out / "summary.json").read_text())
    with rasterio.open(kit / "pop.tif") as ds:
        total = float(ds.read(1, masked=True).sum())
    # the grid covers the whole population raster, so the run counts every person in it
    assert s["baseline"]["population_total"] == pytest.approx(total)
    assert s["baseline"]["hubs"]["count"] == 2 and s["baseline"]["hubs"]["joined"] == 2
    assert "proposed" in s["scenarios"]


def test_example_scenario_lines_work_when_uncommented(kit, kit_study, tmp_path):
    """The commented close/upgrade lines name the study's own layer and existing feature ids."""
    from geo_reach.pipeline import layer_specs, read_hubs, scenario_inputs

    text = kit_study.read_text()
    keep = ("# [scenarios.example]", "# description =", "# close =", "# upgrade =")
    text = "\n".join(ln[2:] if ln.startswith(keep) else ln for ln in text.splitlines()) + "\n"
    p = kit / "start" / "uncommented.toml"
    p.write_text(text)
    st = load_study(p)
    assert set(st.scenarios["example"]) == {"description", "close", "upgrade"}
    specs = layer_specs(st)
    hubs = read_hubs(st, st.hubs, "EPSG:32727")
    _, _, changes, _ = scenario_inputs(st, "example", specs, hubs)
    assert len(changes) == 2
    assert any("closed 2 feature(s) of roads" in c for c in changes)   # wording of the pipeline's change list
    assert any("1 feature(s) of roads" in c and "80 km/h" in c for c in changes)


# ----------------------------------------------------------------------------- the demo region
def test_demo_region(tmp_path, capsys):
    out = tmp_path / "tmp" / "study.toml"
    out.parent.mkdir()
    code, stdout, err = init(capsys, f"{SAMPLES}/region.gpkg:roads", f"{SAMPLES}/region.gpkg:settlements",
                             SAMPLES / "hubs.geojson", SAMPLES / "population.tif", "-o", out)
    assert code == 0, err
    text = out.read_text()
    st = load_study(out)
    roads = st.lines[0]
    assert (roads["class_field"], roads["oneway_field"], roads["level_field"], roads["all_season_field"]) == \
        ("class", "oneway", "level", "all_season")
    import pyogrio

    classes = set(pyogrio.read_dataframe(SAMPLES / "region.gpkg", layer="roads", read_geometry=False)["class"])
    assert set(roads["class_speeds"]) == classes
    assert roads["class_speeds"] == {c: DEFAULT_CLASS_SPEEDS_KMH[c] for c in classes}
    assert f"field 'class' looks like a road class: {len(classes)} values found" in text
    assert st.settlements["population_field"] == "population"
    assert st.hubs["kind_field"] == "kind" and st.hubs["id_field"] == "hub_id"
    assert st.resolve(st.surface_files["population"]).resolve() == (SAMPLES / "population.tif").resolve()
    assert "wrote" in stdout


def test_demo_gpkg_without_layer_name_gives_every_layer(tmp_path, capsys):
    out = tmp_path / "s.toml"
    code, stdout, err = init(capsys, SAMPLES / "region.gpkg", SAMPLES / "hubs.geojson", SAMPLES / "terrain.tif",
                             "-o", out)
    assert code == 0, err
    st = load_study(out)
    modes = {t["layer"]: t["mode"] for t in st.lines}
    assert modes == {"roads": "road", "rail": "rail", "cable": "cable"}
    rail = next(t for t in st.lines if t["layer"] == "rail")
    cable = next(t for t in st.lines if t["layer"] == "cable")
    assert rail["stations_layer"] == "stations" and cable["stations_layer"] == "cable_nodes"
    assert st.surface_files["barriers_layer"] == "water" and st.zones["layer"] == "districts"
    assert st.surface_files["terrain"].endswith("terrain.tif")
    assert st.scenarios["proposed_road"]["add_lines"][0]["layer"] == "proposed_road"


# ----------------------------------------------------------------------------- suggestions
def test_class_table_known_defaults_and_commented_guesses(tmp_path, capsys):
    odd = 'we"ird\nclass'
    vals = ["primary"] * 3 + ["residential"] * 2 + ["footway", "primary_link", odd, "Primary "]
    ref = lines_layer(tmp_path / "osm.gpkg", "ways", {"highway": vals, "maxspeed": [None] * len(vals)})
    out = tmp_path / "s.toml"
    code, _, err = init(capsys, ref, "-o", out)
    assert code == 0, err
    text = out.read_text()
    t = load_study(out).lines[0]
    assert t["class_field"] == "highway"
    # active rows: the classes the default table knows, matched as the builder matches (trimmed, lower case)
    assert t["class_speeds"] == {"primary": DEFAULT_CLASS_SPEEDS_KMH["primary"],
                                 "residential": DEFAULT_CLASS_SPEEDS_KMH["residential"]}
    assert "4 features; the default table's speed" in text          # 'Primary ' counted with 'primary'
    # unknown classes are written commented out with a guess and its reason
    assert re.search(r"^# primary_link = 70 .*guess: contains 'primary'", text, re.M)
    assert re.search(rf"^# footway = {DEFAULT_SPEED_KMH['road']:g} .*guess: the road default", text, re.M)
    # a speed-like field with no numbers is not suggested, and says why
    assert "speed_field" not in t
    assert re.search(r"^# speed_field = .*'maxspeed' is named like a speed but only 0% of its 0 filled", text, re.M)
    # uncommenting every guess gives valid TOML holding the guesses, odd key included
    un = "\n".join(re.sub(r"^# ((?:\"[^#]*\"|[a-z_]+) = [0-9.]+ )", r"\1", ln) for ln in text.splitlines())
    raw = tomllib.loads(un)
    cs = raw["lines"][0]["class_speeds"]
    assert cs["primary_link"] == 70 and cs["footway"] == DEFAULT_SPEED_KMH["road"]
    assert cs['we"ird\nclass'] == DEFAULT_SPEED_KMH["road"]          # the key as the builder will match it


def test_class_values_beyond_thirty_are_summarised(tmp_path, capsys):
    vals = ["primary"] * 40 + [f"k{i:02d}" for i in range(35)]
    ref = lines_layer(tmp_path / "a.gpkg", "roads", {"class": vals})
    out = tmp_path / "s.toml"
    assert init(capsys, ref, "-o", out)[0] == 0
    text = out.read_text()
    sec = text.split("[lines.class_speeds]")[1].split("\n\n")[0]
    rows = [ln for ln in sec.splitlines() if re.match(r"^(# )?[a-z0-9_]+ = ", ln)]
    assert len(rows) == 30
    assert rows[0].startswith("primary = ")                          # the most common first
    assert "6 more values (6 features) not listed" in sec
    load_study(out)


def test_a_name_field_is_not_taken_for_a_class(tmp_path, capsys):
    ref = lines_layer(tmp_path / "a.gpkg", "roads", {"type": [f"Road number {i}" for i in range(40)]})
    out = tmp_path / "s.toml"
    assert init(capsys, ref, "-o", out)[0] == 0
    text = out.read_text()
    assert "class_field" not in load_study(out).lines[0]
    assert re.search(r"^# class_field = .*'type' is named like a class but has 40 different values", text, re.M)
    assert re.search(r"^# speed_kmh = 40 .*no usable speed or class field", text, re.M)


def test_flags_that_the_builder_cannot_read_are_left_commented(tmp_path, capsys):
    ref = lines_layer(tmp_path / "a.gpkg", "roads", {
        "speed": [50, 60, 30, 40], "oneway": ["t", "f", "f", "f"], "bridge": ["yes", "no", "no", "no"],
        "surface": ["paved", "gravel", "paved", "dirt"]})
    out = tmp_path / "s.toml"
    assert init(capsys, ref, "-o", out)[0] == 0
    text = out.read_text()
    t = load_study(out).lines[0]
    assert t["speed_field"] == "speed" and "median 45" in comment_of(text, "speed_field")
    assert t["oneway_field"] == "oneway" and "1 one-way of 4 features" in comment_of(text, "oneway_field")
    assert "level_field" not in t and re.search(r"^# level_field = .*'bridge'.*levels must be numbers", text, re.M)
    assert "all_season_field" not in t
    assert re.search(r"^# all_season_field = .*'surface'.*'paved'", text, re.M)


def test_rail_and_cable_from_names_and_fields(tmp_path, capsys):
    roads = lines_layer(tmp_path / "roads.gpkg", "roads", {"class": ["main", "track"]})
    rail_by_name = lines_layer(tmp_path / "old_railway.gpkg", "lines", {"x": [1]})
    rail_by_field = lines_layer(tmp_path / "links.gpkg", "links", {"railway": ["rail", "rail"]})
    cable_by_value = lines_layer(tmp_path / "backbone.gpkg", "backbone", {"type": ["fibre", "fibre", "duct"]})
    trail = lines_layer(tmp_path / "trails.gpkg", "trails", {"x": [1]})  # 'trail' holds 'rail' but is no railway
    out = tmp_path / "s.toml"
    code, _, err = init(capsys, roads, rail_by_name, rail_by_field, cable_by_value, trail, "-o", out)
    assert code == 0, err
    text = out.read_text()
    st = load_study(out)
    assert [t["mode"] for t in st.lines] == ["road", "rail", "rail", "cable", "road"]
    assert "the name says 'railway'" in text
    assert "field 'railway' is named 'railway'" in text
    assert "most values of field 'type' say cable" in text
    assert "# stations = " in text          # a rail layer without stations is told it stays unjoined


def test_points_and_polygons_are_sorted(tmp_path, capsys):
    roads = lines_layer(tmp_path / "roads.gpkg", "roads", {"speed": [40, 40]})
    clinics = points_layer(tmp_path / "clinics.gpkg", "clinics", {"code": ["A", "B"]})
    places = points_layer(tmp_path / "pts.gpkg", "pts", {"kind": ["town", "village"], "pop": [1200, 80]})
    lakes = tmp_path / "lakes.gpkg"
    gpd.GeoDataFrame({"x": [1]}, geometry=[shapely.box(X0, Y0, X0 + 50, Y0 + 50)], crs=CRS).to_file(lakes, layer="lakes")
    wards = tmp_path / "wards.gpkg"
    gpd.GeoDataFrame({"ward_id": [1, 2]}, geometry=[shapely.box(X0, Y0, X0 + 50, Y0 + 50),
                                                    shapely.box(X0 + 50, Y0, X0 + 100, Y0 + 50)], crs=CRS).to_file(wards)
    out = tmp_path / "s.toml"
    code, _, err = init(capsys, roads, clinics, places, f"{lakes}:lakes", wards, "-o", out)
    assert code == 0, err
    st = load_study(out)
    assert st.hubs["path"] == "clinics.gpkg" and st.hubs["id_field"] == "code"
    # a population-like field wins over a kind-like one when the name says neither
    assert st.settlements["path"] == "pts.gpkg" and st.settlements["population_field"] == "pop"
    assert st.surface_files["barriers"] == "lakes.gpkg"
    assert st.zones["path"] == "wards.gpkg" and st.zones["id_field"] == "ward_id"


def test_unknown_points_raster_and_missing_crs_are_reported_not_guessed(tmp_path, capsys):
    src = tmp_path / "src"
    src.mkdir()
    gpd.GeoDataFrame({"speed": [30.0]}, geometry=[shapely.LineString([(0, 0), (1, 1)])]).to_file(src / "roads.shp")
    assert not (src / "roads.prj").exists()
    other = points_layer(src / "misc.gpkg", "misc", {"x": [1, 2]})
    with rasterio.open(src / "landuse.tif", "w", driver="GTiff", width=2, height=2, count=1, dtype="uint8", crs=CRS,
                       transform=rasterio.transform.from_origin(X0, Y0 + 200, 100, 100)) as ds:
        ds.write(np.ones((2, 2), "uint8"), 1)
    out = tmp_path / "s.toml"
    code, stdout, err = init(capsys, src / "roads.shp", other, src / "landuse.tif", "-o", out)
    assert code == 0, err
    text = out.read_text()
    st = load_study(out)
    assert "assume_crs" not in st.lines[0] and re.search(r'^# assume_crs = "EPSG:NNNN"', text, re.M)
    assert st.hubs is None and "No hub layer found" in text
    assert "population" not in st.surface_files and "landuse.tif" in text
    for word in ("no CRS", "misc", "landuse.tif", "no hub layer"):
        assert word in stdout, word


# ----------------------------------------------------------------------------- refusals and writing
def test_refuses_a_missing_file(tmp_path):
    out = tmp_path / "s.toml"
    refused(["init", tmp_path / "nope.gpkg", "-o", out], "nope.gpkg", "not found")
    refused(["init", tmp_path / "nope.tif", "-o", out], "nope.tif", "not found")
    assert not out.exists()


def test_refuses_a_missing_layer(kit, tmp_path):
    refused(["init", f"{kit}/net.gpkg:nothing", "-o", tmp_path / "s.toml"], "nothing", "roads")
    assert list(tmp_path.iterdir()) == []


def test_refuses_an_existing_output_without_overwrite_and_keeps_it(kit, tmp_path):
    out = tmp_path / "s.toml"
    out.write_text("# mine\n")
    refused(["init", f"{kit}/net.gpkg:roads", "-o", out], "s.toml", "--overwrite")
    assert out.read_text() == "# mine\n"
    code, _, err = cli("init", f"{kit}/net.gpkg:roads", "-o", out, "--overwrite")
    assert code == 0, err
    assert load_study(out).lines[0]["layer"] == "roads"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.toml"]     # no temporary file left beside it


def test_refuses_when_no_layer_holds_lines(kit, tmp_path):
    out = tmp_path / "s.toml"
    refused(["init", f"{kit}/net.gpkg:settlements", kit / "hubs.geojson", kit / "pop.tif", "-o", out],
            "no line layer", "settlements")
    assert list(tmp_path.iterdir()) == []


# ----------------------------------------------------------------------------- fields by content (issue: a class field
# named differently was missed, and no id or name fields were proposed for districts and villages)
def _block(text, label):
    """The comment lines listing a layer's fields."""
    lines = text.splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith(f"# Layer '{label}':"))
    out = []
    for ln in lines[i + 1:]:
        if not ln.startswith("#   "):
            break
        out.append(ln[4:])
    return lines[i], out


def test_every_layer_lists_its_fields_with_type_and_samples(tmp_path, capsys):
    roads = lines_layer(tmp_path / "r.gpkg", "roads", {"rdtype": ["primary", "primary", "track", "secondary"],
                                                       "width_m": [7.5, 7.5, 3.0, 6.0], "odd": [None] * 4})
    out = tmp_path / "s.toml"
    assert init(capsys, roads, "-o", out)[0] == 0
    text = out.read_text()
    head, rows = _block(text, "roads")
    assert head == "# Layer 'roads': 4 features, 3 fields:"
    assert [r.split()[0] for r in rows] == ["rdtype", "width_m", "odd"]
    assert rows[0].split()[1] == "text" and "4/4 filled, 3 distinct: 'primary', 'track', 'secondary'" in rows[0]
    assert rows[1].split()[1] == "decimal" and "7.5, 3, 6" in rows[1]
    assert "(all empty)" in rows[2]
    load_study(out)


def test_a_class_field_named_otherwise_is_found_by_its_values(tmp_path, capsys):
    ref = lines_layer(tmp_path / "r.gpkg", "roads", {"rdtype": ["primary"] * 3 + ["residential"] * 2 + ["track"],
                                                     "label": [f"Street {i}" for i in range(6)]})
    out = tmp_path / "s.toml"
    assert init(capsys, ref, "-o", out)[0] == 0
    t = load_study(out).lines[0]
    assert t["class_field"] == "rdtype"
    assert t["class_speeds"] == {c: DEFAULT_CLASS_SPEEDS_KMH[c] for c in ("primary", "residential", "track")}
    assert "'rdtype' is not named like a class but its values are road classes: 100% of features" in \
        comment_of(out.read_text(), "class_field")


def test_class_values_unknown_to_the_table_one_candidate_or_undecided(tmp_path, capsys):
    one = lines_layer(tmp_path / "a.gpkg", "roads", {"cat": ["A", "A", "B", "C", "C", "C"]})
    out = tmp_path / "a.toml"
    assert init(capsys, one, "-o", out)[0] == 0
    text = out.read_text()
    assert load_study(out).lines[0]["class_field"] == "cat"
    assert re.search(r"^# c = 40 .*3 features; guess: the road default", text, re.M)   # speeds left to set
    two = lines_layer(tmp_path / "b.gpkg", "roads", {"cat": ["A", "A", "B", "C", "C", "C"],
                                                     "material": ["tar", "tar", "dirt", "dirt", "dirt", "tar"]})
    out = tmp_path / "b.toml"
    assert init(capsys, two, "-o", out)[0] == 0
    text = out.read_text()
    assert "class_field" not in load_study(out).lines[0]
    assert "# could not tell which field holds the road class; fields that repeat a few values: cat, material " \
           "(all fields are listed above)" in text
    assert [r.split()[0] for r in _block(text, "roads")[1]] == ["cat", "material"]


def test_ids_names_and_population_of_districts_and_villages_by_content(tmp_path, capsys):
    roads = lines_layer(tmp_path / "roads.gpkg", "roads", {"speed": [40, 40]})
    villages = points_layer(tmp_path / "villages.gpkg", "villages",
                            {"vcode": [101, 102, 103, 104], "vill": ["Oak Ford", "Brennis", "Holm", "Leda"],
                             "inhab": [120, 85, 1400, 33], "ward": ["W1", "W1", "W2", "W2"]})
    districts = tmp_path / "districts.gpkg"
    gpd.GeoDataFrame({"dcode": ["D01", "D02"], "dname": ["North Vale", "South Vale"], "area": [12.5, 9.0]},
                     geometry=[shapely.box(X0, Y0, X0 + 50, Y0 + 50), shapely.box(X0 + 50, Y0, X0 + 100, Y0 + 50)],
                     crs=CRS).to_file(districts)
    out = tmp_path / "s.toml"
    code, _, err = init(capsys, roads, villages, districts, "-o", out)
    assert code == 0, err
    st = load_study(out)
    text = out.read_text()
    assert (st.settlements["id_field"], st.settlements["name_field"], st.settlements["population_field"]) == \
        ("vcode", "vill", "inhab")
    assert (st.zones["id_field"], st.zones["name_field"]) == ("dcode", "dname")
    assert "field 'inhab' holds non-negative numbers (median 102.5), maybe people: check" in text
    assert re.search(r"^name_field = \"dname\" +# field 'dname' reads as names: 100% distinct", text, re.M)
    assert [r.split()[0] for r in _block(text, "districts")[1]] == ["dcode", "dname", "area"]


def test_when_no_field_fits_it_says_so_and_lists_the_fields(tmp_path, capsys):
    roads = lines_layer(tmp_path / "roads.gpkg", "roads", {"speed": [40, 40]})
    places = points_layer(tmp_path / "villages.gpkg", "villages", {"grp": ["a", "a", "b"], "v": [1.5, 1.5, -2.0]})
    out = tmp_path / "s.toml"
    assert init(capsys, roads, places, "-o", out)[0] == 0
    text = out.read_text()
    assert "# no field is unique and filled for every feature, so features are numbered from 1; fields found: " \
           "grp (text), v (decimal)" in text
    assert "no population-like field found: name the field holding each settlement's population (fields found: " \
           "grp (text), v (decimal))" in text
    assert "# no field reads as names" in text

"""The HTML map page, checked as text: data only as JSON, no template engine, offline, deterministic, drawn right.

The real-browser checks are in ``test_browser_map.py``.  Sources: the HTML
Living Standard (WHATWG) for what ends a ``<script>`` element (``</script``,
and ``<!--`` opening an escaped section) and what a script/link/img
reference loads; ECMA-404 / RFC 8259 for JSON escapes (``\\u003c`` reads back
as ``<``); Douglas and Peucker (1973) for the simplification bound (every
dropped vertex lies within the tolerance of the simplified line).
"""

from __future__ import annotations

import hashlib
import json
import re
import sys
from pathlib import Path

import numpy as np
import pytest
import shapely
from hypothesis import given, settings, strategies as st
from pyproj import Transformer

sys.path.insert(0, str(Path(__file__).parent))
from helpers import map_input as MI  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.errors import CRSError, LayerError, OptionError, OutputExistsError, OutputError  # noqa: E402
from geo_reach.export import palette as P  # noqa: E402
from geo_reach.export.webmap import (MAP_PIXELS, MapInput, NetworkLayer, external_references,  # noqa: E402
                                     json_for_script, render_map, write_map)

ASSETS = Path(__file__).parents[1] / "geo_reach" / "export" / "assets"
DATA_RE = re.compile(r'<script type="application/json" id="gr-data">(.*?)</script>', re.S)


@pytest.fixture(scope="module")
def page():
    return render_map(MI.full())


def data_of(page: str) -> dict:
    blocks = DATA_RE.findall(page)
    assert len(blocks) == 1
    return json.loads(blocks[0])


def layers_of(data, group, view="any"):
    return [lay for lay in data["layers"] if lay["group"] == group and (view == "any" or lay["view"] == view)]


col = MI.col


def decode_points(geom, frame):
    """Reference decoding of the delta-encoded integer vertices (independent of the page script)."""
    q = np.cumsum(np.asarray(geom["xy"], dtype=np.int64).reshape(-1, 2), axis=0)
    return np.column_stack([frame["lon0"] + q[:, 0] * frame["step"], frame["lat0"] + q[:, 1] * frame["step"]])


def decode_lines(geom, frame):
    pts = decode_points(geom, frame)
    parts, k = [], 0
    for n in geom["n"]:
        parts.append(pts[k:k + n])
        k += n
    if "f" not in geom:
        return [[p] for p in parts]
    feats, k = [], 0
    for f in geom["f"]:
        feats.append(parts[k:k + f])
        k += f
    return feats


# ---------------------------------------------------------------- offline
def test_no_network_references(page):
    # own patterns, independent of external_references()
    assert not re.search(r"<script[^>]*\bsrc\s*=", page, re.I)
    assert not re.search(r"<link[^>]*\bhref\s*=", page, re.I)
    assert not re.search(r"<(img|iframe)[^>]*\bsrc\s*=", page, re.I)
    assert not re.search(r"url\(\s*[\"']?(https?:)?//", page, re.I)
    for host in ("cdn.jsdelivr", "cdnjs", "code.jquery", "bootstrapcdn", "fontawesome", "unpkg", "d3js",
                 "openstreetmap"):
        assert host not in page
    assert external_references(page) == []


def test_external_references_detects_what_it_should():
    bad = ('<script src="https://x.org/a.js"></script><link rel="stylesheet" href="//y.org/b.css">'
           '<style>a{background:url("http://z.org/c.png")}</style><img src=https://w.org/i.png>')
    assert external_references(bad) == ["https://x.org/a.js", "//y.org/b.css", "https://w.org/i.png",
                                        "http://z.org/c.png"]
    assert external_references('<a href="https://leafletjs.com">Leaflet</a>') == []  # a link loads nothing


def test_leaflet_and_our_assets_are_inlined(page):
    for name in ("leaflet.js", "georeach-map.js", "georeach-map.css"):
        assert (ASSETS / name).read_text("utf-8") in page, name
    assert "Leaflet 1.9.4" in page
    assert "url(images/" not in page and "url(data:image/png;base64," in page


def test_vendored_files_match_the_hashes_in_their_readme():
    readme = (ASSETS / "README.md").read_text("utf-8")
    listed = dict((name, digest) for digest, name in re.findall(r"^([0-9a-f]{64})  (\S+)$", readme, re.M))
    assert {"leaflet.js", "leaflet.css", "layers.png", "layers-2x.png", "marker-icon.png"} <= set(listed)
    for name in ("leaflet.js", "leaflet.css", "layers.png", "layers-2x.png", "marker-icon.png"):
        assert hashlib.sha256((ASSETS / name).read_bytes()).hexdigest() == listed[name], name
    assert "BSD 2-Clause" in (ASSETS / "LICENSE.leaflet").read_text("utf-8")


def test_basemap_is_optional():
    off = render_map(MI.full(scenarios=()))
    on = render_map(MI.full(scenarios=(), basemap=True))
    assert "tile.openstreetmap.org" not in off
    assert data_of(on)["basemap"]["url"].startswith("https://tile.openstreetmap.org/")
    css = (ASSETS / "georeach-map.css").read_text("utf-8")
    assert f"background: {P.BACKGROUND}" in css  # the plain background is the palette's


# ---------------------------------------------------------------- data is never code
def _outside_data(page: str) -> str:
    return DATA_RE.sub("DATA", page)


def test_data_travels_only_in_the_json_block():
    plain = render_map(MI.full())
    m, places = MI.hostile()
    evil = render_map(m)
    # everything but the data block is the same page, whatever the data: no user text reaches the markup
    assert _outside_data(plain) == _outside_data(evil)
    outside = _outside_data(evil)
    for texts in places.values():
        for t in texts:
            assert t not in outside, t
    # the block holds no character that could end or open an element, and reads back exactly
    block = DATA_RE.findall(evil)[0]
    for ch in "<>&\u2028\u2029":
        assert ch not in block
    data = json.loads(block)
    assert data["title"] == " ".join(places["title"][0].split())
    assert [v["name"] for v in data["views"]] == ["Today", "With " + places["scenario"][0]]
    hub = layers_of(data, "hubs")[0]
    assert col(hub, "name") == places["hubs"]
    sett = layers_of(data, "settlements", "today")[0]
    assert col(sett, "name") == [" ".join(t.split()) for t in places["settlements"]]
    dist = layers_of(data, "districts")[0]
    assert col(dist, "name") == places["districts"]
    kinds = {e["t"] for g in data["groups"] if g["id"] == "hubs" for e in g["legend"]}
    assert set(places["hub kinds"]) <= kinds
    # four script elements: the data, Leaflet, ours; none with a source
    assert len(re.findall(r"<script\b", evil)) == 3


def test_no_template_engine_sees_user_text(monkeypatch):
    """Record every template source handed to jinja2 or branca during a full render with hostile names."""
    import importlib.util

    seen = []
    if importlib.util.find_spec("jinja2") is not None:
        import jinja2

        class Recording(jinja2.Template):
            def __new__(cls, source, *a, **k):
                seen.append(str(source))
                return super().__new__(cls, source, *a, **k)

        real_from_string = jinja2.Environment.from_string
        monkeypatch.setattr(jinja2, "Template", Recording)
        monkeypatch.setattr(jinja2.Environment, "from_string",
                            lambda self, source, *a, **k: seen.append(str(source)) or real_from_string(self, source, *a, **k))
    if importlib.util.find_spec("branca") is not None:
        import branca.element

        real_init = branca.element.Element.__init__

        def init(self, template=None, *a, **k):
            seen.append(str(template))
            real_init(self, template, *a, **k)

        monkeypatch.setattr(branca.element.Element, "__init__", init)
    m, places = MI.hostile()
    page = render_map(m)
    users = [t for texts in places.values() for t in texts]
    for src in seen:
        for t in users:
            assert t not in src, (t, src[:200])
    # and the page really carries the texts (so the check above could have failed)
    data = json.dumps(data_of(page), ensure_ascii=False)
    assert all(json.dumps(t, ensure_ascii=False)[1:-1] in data for t in places["hubs"] + places["districts"])


def test_page_code_uses_no_template_engine_nor_markup_from_strings():
    src = "\n".join(p.read_text("utf-8") for p in (ASSETS.parent / "webmap").glob("*.py"))
    for word in ("jinja", "branca", "folium", "string.Template", "format_map", "eval(", "exec("):
        assert word not in src, word
    js = (ASSETS / "georeach-map.js").read_text("utf-8")
    for word in ("innerHTML", "outerHTML", "insertAdjacentHTML", "document.write", "eval(", "new Function",
                 "setTimeout('", "setInterval('"):
        assert word not in js, word
    # Leaflet turns a *string* popup, tooltip or icon into markup: ours hand it elements or functions making them
    assert "bindPopup(function" in js and "bindTooltip(function" in js
    assert not re.search(r"bind(Popup|Tooltip)\(\s*['\"]", js)
    for m in re.finditer(r"html:\s*([A-Za-z_]+)", js):
        assert m.group(1) in ("box", "b", "span", "el"), m.group(0)


@settings(max_examples=200, deadline=None)
@given(st.text())
def test_json_for_script_reads_back_and_cannot_close_a_tag(text):
    out = json_for_script({"t": text, "k": [text]})
    assert json.loads(out) == {"t": text, "k": [text]}
    for ch in "<>&\u2028\u2029":
        assert ch not in out


# ---------------------------------------------------------------- views, groups and what is on at first
def test_views_today_first_and_scenario_layers_only_in_their_view(page):
    d = data_of(page)
    assert [v["id"] for v in d["views"]] == ["today", "v1"]
    assert d["views"][1]["name"] == "With new bridge" and d["views"][1]["text"] == "A bridge over the Mere"
    for g in ("change", "proposed"):
        assert {lay["view"] for lay in layers_of(d, g)} == {"v1"}
    for g in ("network", "rings", "settlements"):
        assert {lay["view"] for lay in layers_of(d, g)} == {"today", "v1"}
    for g in ("weak_top", "diameter", "issues", "districts"):
        assert {lay["view"] for lay in layers_of(d, g)} == {"today"}
    for g in ("hubs", "water", "district_lines"):
        assert {lay["view"] for lay in layers_of(d, g)} == {None}


def test_what_is_shown_at_first(page):
    on = {g["id"]: g["on"] for g in data_of(page)["groups"]}
    assert on == {"rings": True, "districts": False, "settlements": True, "hubs": True, "network": True,
                  "change": True, "proposed": True, "water": True, "district_lines": True, "weak_top": True,
                  "weak_rest": False, "weak_empty": False, "diameter": False, "issues": False,
                  "criticality": False, "indices": False, "indices_2": False}
    modes = {g["id"]: g["mode"] for g in data_of(page)["groups"]}
    assert modes["rings"] == modes["districts"] == "shade"  # one shading at a time


# ---------------------------------------------------------------- colours follow the palette
def test_rings_and_settlements_share_the_travel_classes(page):
    d = data_of(page)
    classes = P.travel_classes(MI.THRESHOLDS)
    rings = layers_of(d, "rings", "today")[0]
    assert rings["cls"] == [0, 1, 2, 3]
    assert [s["fc"] for s in rings["styles"]] == [c.colour for c in classes]
    assert all(s["fo"] == 1 for s in rings["styles"])  # opaque: the rendered colour is the legend's
    legend = next(g for g in d["groups"] if g["id"] == "rings")["legend"]
    assert [(e["c"], e["t"]) for e in legend] == [(c.colour, c.label) for c in classes]
    sett = layers_of(d, "settlements", "today")[0]
    # minutes 4, 15 (= the bound: within 15), 31, 61.5, none, 88
    assert sett["cls"] == [0, 0, 2, 3, 4, 3]
    assert sett["styles"][4]["fc"] == P.NO_VALUE
    assert col(sett, "min") == [4.0, 15.0, 31.0, 61.5, None, 88.0]
    pop = np.array([5200, 830, 120, 2400, 35, 610.0])
    r = np.array(sett["size"])
    assert np.allclose((r - 3) ** 2 / (r[0] - 3) ** 2, pop / pop.max(), atol=0.01)  # dot area ~ people
    assert sett["order"] == [0, 3, 1, 5, 2, 4]  # names placed biggest first


def test_network_colours_by_cost_at_the_cheaper_end(page):
    d = data_of(page)
    net = MI.network()
    cost = net.link_cost()
    lay = layers_of(d, "network", "today")[0]
    classes = P.cost_classes(np.concatenate([cost, MI.scenario().network.link_cost()]))
    idx = P.classify(cost, classes)
    want = np.where(idx >= 0, idx, len(classes))
    assert lay["cls"] == want.tolist()
    assert [s["c"] for s in lay["styles"][:len(classes)]] == [c.colour for c in classes]
    assert lay["styles"][len(classes)]["c"] == P.NO_VALUE and lay["styles"][len(classes)]["dash"]
    # link (2,3)-(3,3) touches the node with no route; its other end has one, so it keeps a colour
    e = net.edges
    k = int(np.nonzero((e.from_node == 4 * 3 + 2) & (e.to_node == 4 * 3 + 3))[0][0])
    assert np.isfinite(cost[k]) and lay["cls"][k] < len(classes)
    # a link with no hub at either end is drawn "no route"; one not usable for this cost thin and grey
    c = MI.node_cost()
    c[[0, 1]] = np.nan
    ec = MI.network().edge_cost.copy()
    ec[5] = np.nan
    d2 = data_of(render_map(MapInput(title="t", network=NetworkLayer(e, c, ec))))
    lay2 = layers_of(d2, "network")[0]
    n = len(P.cost_classes(NetworkLayer(e, c).link_cost()))
    first = int(np.nonzero((e.from_node == 0) & (e.to_node == 1))[0][0])
    assert lay2["cls"][first] == n and lay2["cls"][5] == n + 1
    legend = next(g for g in d2["groups"] if g["id"] == "network")["legend"]
    assert [x["t"] for x in legend[-2:]] == ["no route to a hub", "not used for minutes"]


def test_change_uses_its_own_hues(page):
    d = data_of(page)
    lay = layers_of(d, "change", "v1")[0]
    delta = MI.scenario().change["delta"].to_numpy(float)
    classes = P.change_classes(delta)
    idx = P.classify(delta, classes)
    assert lay["cls"] == np.where(idx < 0, len(classes), idx).tolist()
    net_colours = {s["c"] for s in layers_of(d, "network", "v1")[0]["styles"]}
    assert not ({c.colour for c in classes} - {P.NEUTRAL}) & net_colours
    assert P.PATH_COLOUR not in {c.colour for c in classes}


def test_criticality_links_by_people_cut_off_in_their_own_hues(page):
    """Only links that cut somebody off are drawn, classed by people cut off, in the criticality family
    (no colour shared with the network's or the travel classes), switched off at first."""
    d = data_of(page)
    lay = layers_of(d, "criticality", "today")[0]
    crit = MI.criticality()
    cut = crit["people_cut_off"].to_numpy(float)
    drawn = cut[cut > 0]
    classes = P.criticality_classes(drawn)
    assert lay["cls"] == P.classify(drawn, classes).tolist()
    assert col(lay, "cut") == drawn.tolist() and len(drawn) == 8
    group = next(g for g in d["groups"] if g["id"] == "criticality")
    assert group["on"] is False and [e["c"] for e in group["legend"]] == [c.colour for c in classes]
    others = {s["c"] for s in layers_of(d, "network", "today")[0]["styles"]} | {c.colour for c in P.travel_classes(
        MI.THRESHOLDS)}
    assert not {c.colour for c in classes} & others


def test_access_index_one_group_per_measure_with_zero_grey(page):
    d = data_of(page)
    ids = [g["id"] for g in d["groups"] if g["id"].startswith("indices")]
    assert ids == ["indices", "indices_2"]
    titles = [g["title"] for g in d["groups"] if g["id"] in ids]
    assert titles == ["Access index: 2sfca (clinic)", "Access index: gravity (clinic)"]
    lay = layers_of(d, "indices_2", "today")[0]
    vals = np.array([1.2, 0.4, 0.9, 0.0, 2.2, 0.1])
    classes = P.index_classes(vals)
    idx = P.classify(np.where(vals > 0, vals, np.nan), classes)
    assert lay["cls"] == np.where(idx < 0, len(classes), idx).tolist() and lay["cls"][3] == len(classes)
    assert lay["styles"][-1]["fc"] == P.NO_VALUE
    # 2SFCA is supply per person: shown per 1,000 people (0.0004 -> 0.4)
    two = layers_of(d, "indices", "today")[0]
    assert col(two, "index")[:2] == [0.4, 1.1] and two["popup"]["rows"][0][0] == "Index (per 1,000 people)"


# ---------------------------------------------------------------- weak regions: about people
def test_weak_regions_top_20_with_people_rest_switchable_and_key_links(page):
    d = data_of(page)
    weak = MI.weak()
    pop = weak["population"].to_numpy()
    top = layers_of(d, "weak_top")
    fills = [lay for lay in top if lay["type"] == "fill"][0]
    assert col(fills, "rank") == list(range(1, 21))
    rest = [lay for lay in layers_of(d, "weak_rest") if lay["type"] == "fill"][0]
    assert col(rest, "rank") == [int(k) for k in weak["rank"][(pop >= 0.5)][20:]]
    empty = [lay for lay in layers_of(d, "weak_empty") if lay["type"] == "fill"][0]
    assert col(empty, "rank") == [int(k) for k in weak["rank"][pop < 0.5]]
    badges = [lay for lay in top if lay["type"] == "badge"]
    assert badges[0]["cols"]["rank"] == list(range(1, 21))
    # reason colours are fixed, whatever reasons occur
    for lay in (fills, rest, empty):
        for reason, k in zip(weak.set_index("rank").loc[col(lay, "rank"), "reason"], lay["cls"]):
            assert lay["styles"][k]["c"] == P.REASON_COLOURS[reason]
    # each single-link region in the top 20 is keyed to its link, with the people behind it
    keys = [lay for lay in top if lay["type"] == "line"][0]
    single = weak[(weak["rank"] <= 20) & (weak["reason"] == "single_link")]
    assert col(keys, "rank") == [int(k) for k in single["rank"]]
    assert col(keys, "people") == [int(round(p)) for p in single["population"]]
    feats = decode_lines(keys["geom"], d["frame"])
    tr = Transformer.from_crs(MI.CRS, 4326, always_xy=True)
    for f, eid in zip(feats, single["edge_id"]):
        line = MI.network().edges.geometry.iloc[int(eid)]
        lon, lat = tr.transform(*np.array(line.coords).T)
        assert np.allclose(f[0], np.column_stack([lon, lat]), atol=d["frame"]["step"])
    # popups: plain words; raw fields stay out of the page
    assert "join_x" not in json.dumps(d) and "src_fid" not in json.dumps(d)


def test_popups_use_plain_labels_units_and_rounding(page):
    d = data_of(page)
    raw = re.compile(r"^[a-z]+(_[a-z0-9]+)+$")
    for lay in d["layers"]:
        p = lay.get("popup")
        if not p:
            continue
        for label, key, fmt in p["rows"]:
            assert not raw.match(label), label
        for key in lay["cols"]:
            for v in col(lay, key):
                if isinstance(v, float):
                    assert v == round(v, 3), (lay["group"], key, v)
    sett = layers_of(d, "settlements", "today")[0]
    assert [r[0] for r in sett["popup"]["rows"]] == ["People", "Minutes to the nearest hub", "Nearest hub",
                                                     "Along the network"]
    assert sett["popup"]["rows"][1][2] == {"d": 1, "u": "min", "none": "no hub reachable"}


def test_network_issues_off_by_default_and_clustered(page):
    d = data_of(page)
    g = next(g for g in d["groups"] if g["id"] == "issues")
    assert g["on"] is False
    lay = layers_of(d, "issues")[0]
    assert lay["type"] == "cluster" and len(lay["geom"]["xy"]) == 2 * 32
    assert col(lay, "kind")[:1] == ["dead end"] and "crossing kept (bridge or tunnel)" in col(lay, "kind")


# ---------------------------------------------------------------- any routing weight
@pytest.mark.parametrize("unit,name,scale", [("km", "distance", 0.37), ("hops", "hops", 0.25), ("ms", "latency", 40.0)])
def test_any_cost_unit(unit, name, scale):
    net = MI.network(MI.node_cost() * scale)
    m = MI.full(cost_unit=unit, cost_name=name, network=net, scenarios=())
    d = data_of(render_map(m))
    g = next(g for g in d["groups"] if g["id"] == "network")
    assert g["title"] == f"Network: {name} to the nearest hub"
    labels = [e["t"] for e in g["legend"] if e.get("fam") != "none"]
    assert all(t.endswith(" " + unit) for t in labels) and not any(t.endswith(" min") for t in labels)
    lay = layers_of(d, "network", "today")[0]
    classes = P.cost_classes(net.link_cost(), unit)
    idx = P.classify(net.link_cost(), classes)
    assert lay["cls"] == np.where(idx >= 0, idx, len(classes)).tolist()
    assert lay["popup"]["rows"][0][2]["u"] == unit


# ---------------------------------------------------------------- geometry at the map's resolution
def test_lines_are_simplified_to_the_resolution_and_stay_within_it():
    # a 20 km line of 20,001 vertices wobbling by 0.2 m: the page keeps a handful of vertices
    x = np.linspace(0, 20_000, 20_001)
    y = 0.2 * np.sin(x / 3.0)
    wobbly = shapely.LineString(np.column_stack([MI.X0 + x, MI.Y0 + y]))
    zig = shapely.LineString([MI.xy(0, 1), MI.xy(5, 3), MI.xy(10, 1), MI.xy(15, 3), MI.xy(20, 1)])
    edges = MI.network().edges.iloc[:2].copy()
    edges = edges.set_geometry([wobbly, zig], crs=MI.CRS)
    m = MapInput(title="t", network=NetworkLayer(edges, MI.node_cost()))
    d = data_of(render_map(m))
    fr = d["frame"]
    res = fr["res_m"]
    assert res == pytest.approx(20_000 / MAP_PIXELS, rel=0.05)
    feats = decode_lines(layers_of(d, "network")[0]["geom"], fr)
    assert len(feats[0][0]) <= 4 and len(feats[1][0]) == 5
    back = Transformer.from_crs(4326, MI.CRS, always_xy=True)
    for f, orig in zip(feats, (wobbly, zig)):
        line = shapely.LineString(np.column_stack(back.transform(f[0][:, 0], f[0][:, 1])))
        # Douglas-Peucker bound: within the tolerance, plus one quantisation step (~1.1 m per 1e-5 degree)
        assert shapely.hausdorff_distance(line, orig) <= res + 2 * fr["step"] * 111_320


def test_rings_keep_sharing_edges_after_simplification(page):
    d = data_of(page)
    lay = layers_of(d, "rings", "today")[0]
    g = lay["geom"]
    pts = decode_points(g, d["frame"])
    back = Transformer.from_crs(4326, MI.CRS, always_xy=True)
    x, y = back.transform(pts[:, 0], pts[:, 1])
    pts = np.column_stack([x, y])
    rings, k = [], 0
    for n in g["n"]:
        rings.append(pts[k:k + n])
        k += n
    polys, k = [], 0
    for r in g["r"]:
        polys.append(shapely.Polygon(rings[k], rings[k + 1:k + r]))
        k += r
    feats, k = [], 0
    for f in g["f"]:
        feats.append(shapely.MultiPolygon(polys[k:k + f]))
        k += f
    orig = MI.rings().geometry.values
    for a, b in zip(feats, orig):
        assert a.symmetric_difference(b).area / b.area < 0.01
    total = sum(f.area for f in feats)
    assert shapely.union_all(feats).area == pytest.approx(total, rel=1e-3)  # still disjoint


# ---------------------------------------------------------------- deterministic, atomic, bad input
def test_same_inputs_give_identical_files(tmp_path):
    a = write_map(tmp_path / "a.html", MI.full())
    b = write_map(tmp_path / "b.html", MI.full())
    assert a.read_bytes() == b.read_bytes()


def test_bad_input(tmp_path):
    with pytest.raises(OptionError, match="nothing to draw"):
        render_map(MapInput(title="t"))
    with pytest.raises(OptionError, match="takes a MapInput"):
        render_map({"title": "t"})
    no_field = MI.settlements().drop(columns="minutes")
    with pytest.raises(LayerError, match=r"layer 'settlements', field 'minutes': is missing"):
        render_map(MI.full(settlements=no_field))
    no_crs = MI.hubs().set_crs(None, allow_override=True)
    with pytest.raises(CRSError, match="layer 'hubs': has no CRS"):
        render_map(MI.full(hubs=no_crs))
    with pytest.raises(OptionError, match="caution line must not be empty"):
        render_map(MI.full(caution="  "))
    with pytest.raises(LayerError, match="node numbers run past"):
        render_map(MapInput(title="t", network=NetworkLayer(MI.network().edges, np.zeros(3))))
    with pytest.raises(OptionError, match="given twice"):
        render_map(MI.full(scenarios=(MI.scenario(), MI.scenario())))
    with pytest.raises(OptionError, match=r"must end in \.html"):
        write_map(tmp_path / "m.png", MI.full())
    p = write_map(tmp_path / "m.html", MI.full())
    old = p.read_bytes()
    with pytest.raises(OutputExistsError):
        write_map(p, MI.full(scenarios=()))
    assert p.read_bytes() == old
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(OutputError, match="is a file, not a folder"):
        write_map(blocker / "m.html", MI.full())
    assert sorted(x.name for x in tmp_path.iterdir()) == ["file", "m.html"]


def test_caution_and_title_travel_as_data():
    m = MI.full(caution="Check <with> the district office & surveys", title="A & B <i>")
    d = data_of(render_map(m))
    assert d["caution"] == "Check <with> the district office & surveys" and d["title"] == "A & B <i>"
    assert data_of(render_map(MI.full()))["caution"] == CAUTION


# ---------------------------------------------------------------- through the pipeline (the adapter in pipeline._write_map)
@pytest.mark.parametrize("weight,unit,name", [("minutes", "min", "minutes"), ("length_m", "km", "distance")])
def test_a_study_run_writes_the_map_and_the_rings(tmp_path, weight, unit, name):
    import geopandas as gpd
    import pyogrio

    from geo_reach.pipeline import run_study
    from geo_reach.study import load_study

    sys.path.insert(0, str(Path(__file__).parent / "studykit"))
    sys.path.insert(0, str(Path(__file__).parent))
    from studykit import write_study

    path = write_study(tmp_path / "s")
    hubs = gpd.read_file(tmp_path / "s" / "hubs.geojson")
    hubs["name"] = ["{{ 7*7 }} {% raw %}", "<script>alert(7)</script> ${7*7}"]
    hubs.to_file(tmp_path / "s" / "hubs.geojson")
    text = path.read_text().replace('title = "Grid town"', 'title = "{{ 7*7 }} <b>town</b> ${7*7}"')
    text = text.replace('kind_field = "kind"\n', 'kind_field = "kind"\nname_field = "name"\n', 1)
    path.write_text(text.replace("[metrics]", f'[routing]\nweight = "{weight}"\n\n[metrics]'))
    out = tmp_path / "out"
    run_study(load_study(path), out)
    page = (out / "map.html").read_bytes().decode("utf-8")   # as written (the vendored CSS has CRLF lines)
    assert _outside_data(page) == _outside_data(render_map(MI.full()))   # the fixed page, whatever the study
    d = data_of(page)
    assert d["title"] == "{{ 7*7 }} <b>town</b> ${7*7}"
    assert set(col(layers_of(d, "hubs")[0], "name")) == set(hubs["name"])
    assert [v["name"] for v in d["views"]] == ["Today", "With far_link", "With new_clinic"]
    g = next(g for g in d["groups"] if g["id"] == "network")
    assert g["title"] == f"Network: {name} to the nearest hub"
    assert all(e["t"].endswith(" " + unit) for e in g["legend"] if e.get("fam") != "none")
    # the network is coloured for this weight: some links have a cost class (not all "no route")
    net = layers_of(d, "network", "today")[0]
    assert sum(c < len(g["legend"]) - 2 for c in net["cls"]) > 0.9 * len(net["cls"])
    # rings in the GeoPackage, disjoint, with their bounds; the scenario's own rings too
    layers = set(pyogrio.list_layers(out / "results.gpkg")[:, 0])
    assert {"reach_rings", "reach_bands", "far_link_reach_rings"} <= layers
    rings = gpd.read_file(out / "results.gpkg", layer="reach_rings")
    assert rings["from_minutes"].tolist()[:3] == [0.0, 15.0, 30.0] and rings["to_minutes"].tolist()[:3] == [15, 30, 60]
    assert shapely.union_all(rings.geometry.values).area == pytest.approx(rings.geometry.area.sum(), rel=1e-9)
    assert (out / "results.reach_rings.sld").exists()
    assert {lay["view"] for lay in layers_of(d, "rings")} == {"today", "v1", "v2"}
    proposed = layers_of(d, "proposed")
    assert [lay["view"] for lay in proposed] == ["v1"]


def test_a_single_link_region_without_its_link_is_drawn_without_a_key():
    import pandas as pd

    weak = MI.weak()
    ids = [None if k in (0, 3) else v for k, v in enumerate(weak["edge_id"])]
    weak["edge_id"] = pd.array(ids, dtype="Int64")
    d = data_of(render_map(MI.full(weak=weak, scenarios=())))
    keys = [lay for lay in layers_of(d, "weak_top") if lay["type"] == "line"][0]
    single = weak[(weak["rank"] <= 20) & (weak["reason"] == "single_link") & weak["edge_id"].notna()]
    assert col(keys, "rank") == [int(k) for k in single["rank"]] and 1 not in col(keys, "rank")

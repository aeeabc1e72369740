"""The HTML map page, checked as text: offline, escaped, deterministic, coloured by the shared palette.

The real-browser checks are in ``test_browser_map.py``.  Sources: the HTML
Living Standard (WHATWG) for what a script/link/img reference loads, and
common practice for HTML escaping (``html.escape`` turns ``<``, ``>``, ``&``
and quotes into character references).
"""

from __future__ import annotations

import hashlib
import html
import json
import re
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.export_layers import EVIL, LONG, sample_comparison, sample_layers  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.errors import CRSError, LayerError, OptionError, OutputExistsError, OutputError  # noqa: E402
from geo_reach.export import palette as P  # noqa: E402
from geo_reach.export.html_map import (TOOLTIP_CHARS, Comparison, external_references, render_map,  # noqa: E402
                                       write_map)

ASSETS = Path(__file__).parents[1] / "geo_reach" / "export" / "assets"


@pytest.fixture(scope="module")
def layers():
    return sample_layers()


def _all(layers):
    return dict(edges=layers["edges"], hubs=layers["hubs"], bands=layers["reach_bands"], weak=layers["weak_regions"],
                diameter=layers["diameter"], issues=layers["issues"])


@pytest.fixture(scope="module")
def page(layers):
    return render_map(**_all(layers))


def _geojson_blocks(page: str) -> list[dict]:
    """The GeoJSON each folium layer adds (``geo_json_NNNN_add({...});``)."""
    return [json.loads(m.group(1)) for m in re.finditer(r"geo_json_\d+_add\((\{.*?\})\);\n", page)]


# ---------------------------------------------------------------- offline
def test_no_network_references(page):
    # own patterns, independent of external_references()
    assert not re.search(r"<script[^>]*\bsrc\s*=", page, re.I)
    assert not re.search(r"<link[^>]*\bhref\s*=\s*[\"']?(https?:)?//", page, re.I)
    assert not re.search(r"<(img|iframe)[^>]*\bsrc\s*=\s*[\"']?(https?:)?//", page, re.I)
    assert not re.search(r"url\(\s*[\"']?(https?:)?//", page, re.I)
    for host in ("cdn.jsdelivr", "cdnjs", "code.jquery", "bootstrapcdn", "fontawesome", "unpkg", "d3js"):
        assert host not in page
    assert external_references(page) == []


def test_external_references_detects_what_it_should():
    bad = ('<script src="https://x.org/a.js"></script><link rel="stylesheet" href="//y.org/b.css">'
           '<style>a{background:url("http://z.org/c.png")}</style><img src=https://w.org/i.png>')
    assert external_references(bad) == ["https://x.org/a.js", "//y.org/b.css", "https://w.org/i.png",
                                        "http://z.org/c.png"]
    assert external_references('<a href="https://leafletjs.com">Leaflet</a>') == []  # a link loads nothing


def test_leaflet_is_inlined_from_the_vendored_files(page):
    js = (ASSETS / "leaflet.js").read_text("utf-8")
    assert js in page
    assert "L.map(" in page and "Leaflet 1.9.4" in page
    # the CSS images became data URIs
    assert "url(images/" not in page and "url(data:image/png;base64," in page


def test_vendored_files_match_the_hashes_in_their_readme():
    readme = (ASSETS / "README.md").read_text("utf-8")
    listed = dict((name, digest) for digest, name in re.findall(r"^([0-9a-f]{64})  (\S+)$", readme, re.M))
    assert {"leaflet.js", "leaflet.css", "layers.png", "layers-2x.png", "marker-icon.png"} <= set(listed)
    for name in ("leaflet.js", "leaflet.css", "layers.png", "layers-2x.png", "marker-icon.png"):
        assert hashlib.sha256((ASSETS / name).read_bytes()).hexdigest() == listed[name], name
    assert "BSD 2-Clause" in (ASSETS / "LICENSE.leaflet").read_text("utf-8")


def test_no_jquery_or_bootstrap_needed(page):
    script = page.split("Leaflet 1.9.4", 1)[1]
    assert "$(" not in script.split("</script>", 1)[1]  # folium's own code after the inlined Leaflet
    assert "jquery" not in page.lower() and "bootstrap" not in page.lower()


def test_basemap_is_optional(layers):
    off = render_map(edges=layers["edges"])
    on = render_map(edges=layers["edges"], basemap=True)
    assert "tile.openstreetmap.org" not in off
    assert "tile.openstreetmap.org" in on and "OpenStreetMap" in on
    assert "background:#f3f2ee" in off.replace(" ", "")  # a plain background when there is no basemap


# ---------------------------------------------------------------- escaping
def test_user_text_is_escaped_everywhere(page):
    assert EVIL not in page
    assert "<script>alert" not in page
    for block in _geojson_blocks(page):
        for feat in block["features"]:
            for k, v in feat["properties"].items():
                if k == "style":
                    continue
                assert "<" not in v and ">" not in v, v
    names = [f["properties"]["t0"] for b in _geojson_blocks(page) for f in b["features"]
             if "t0" in f["properties"] and "script" in f["properties"]["t0"]]
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in names


def test_long_text_is_shortened_in_tooltips_not_in_popups(page):
    tips = [v for b in _geojson_blocks(page) for f in b["features"] for k, v in f["properties"].items()
            if k.startswith("t") and "very long remark" in v]
    pops = [v for b in _geojson_blocks(page) for f in b["features"] for k, v in f["properties"].items()
            if k.startswith("p") and "very long remark" in v]
    assert tips and pops
    for t in tips:
        assert t.endswith("\u2026") and len(t) <= TOOLTIP_CHARS
    assert any(len(p) > TOOLTIP_CHARS and "wet season" in p for p in pops)
    assert len(LONG) > 300


def test_template_syntax_in_data_is_not_evaluated(layers):
    hubs = layers["hubs"].copy()
    hubs["kind"] = ["{{ 7*7 }}", "{% if true %}yes{% endif %}", "depot"]
    page = render_map(hubs=hubs, title="{{ 6*6 }} <b>title</b>")
    assert "{{ 7*7 }}" in page and "{% if true %}yes{% endif %}" in page  # shown literally in the legend
    assert "{{ 6*6 }} &lt;b&gt;title&lt;/b&gt;" in page
    assert "<title>{{ 6*6 }} &lt;b&gt;title&lt;/b&gt;</title>" in page
    assert "<b>title</b>" not in page


# ---------------------------------------------------------------- content
def test_layers_legend_and_caution_present(page):
    for name in ("Reach bands", "Weak regions (ranked)", "Network: minutes to nearest hub",
                 "Diameter path (longest shortest trip)", "Network issues", "Hubs"):
        assert json.dumps(name) in page, name  # a layer control entry
    assert 'class="gr-legend"' in page and "Network: minutes to nearest hub" in page
    assert "Weak regions by reason" in page and "Hubs by kind" in page
    assert "min</span>" in page  # units in the legend
    assert CAUTION in page and 'class="gr-caution"' in page
    assert "L.control.layers(" in page


def test_network_colours_follow_the_palette(page, layers):
    hub_minutes = layers["edges"]["hub_minutes"].to_numpy(float)
    want = P.colour_of(hub_minutes, P.cost_classes(hub_minutes))
    blocks = [b for b in _geojson_blocks(page) if len(b["features"]) == len(hub_minutes)
              and b["features"][0]["geometry"]["type"] == "LineString"]
    assert len(blocks) == 1
    got = [f["properties"]["style"]["color"] for f in blocks[0]["features"]]
    assert got == want
    for c in P.cost_classes(hub_minutes):
        assert html.escape(f"{c.label} min") in page


def test_geometry_is_in_wgs84_near_the_invented_region(page):
    coords = []
    for b in _geojson_blocks(page):
        for f in b["features"]:
            coords.extend(np.array(f["geometry"]["coordinates"], dtype=object).ravel().tolist())
    xy = np.array([c for c in coords if isinstance(c, float)], dtype=float)
    assert xy.size
    lon, lat = xy[0::2], xy[1::2]  # first pair is lon, lat
    assert np.all((lon > -21.2) & (lon < -20.8)) or np.all((lat > -31.2) & (lat < -30.8))


def test_weak_regions_ranked_with_population_in_popup(page):
    weak = [f for b in _geojson_blocks(page) for f in b["features"] if f["properties"].get("style", {}).get("dashArray") == "6 4"]
    assert len(weak) == 2
    assert [f["properties"]["p0"] for f in weak] == ["1", "2"]  # sorted by rank, rank first
    assert {f["properties"]["p2"] for f in weak} == {"540", "95"}  # population
    assert '"Rank", "Reason", "Population"' in page  # popup labels
    assert "gr-rank" in page  # the rank labels


def test_comparison_toggle_and_change_layer(layers):
    before, after, change = sample_comparison(layers["edges"])
    page = render_map(hubs=layers["hubs"], comparison=Comparison(before, after, change, "Today", "With new bridge"))
    assert '"Today: network, minutes to nearest hub"' in page
    assert '"With new bridge: network, minutes to nearest hub"' in page
    assert re.search(r"base_layers : \{\s*\"Today: network", page)  # radio buttons: one view at a time
    assert "Change in minutes (after \u2212 before)" in page
    d = change["delta_minutes"].to_numpy(float)
    want = P.colour_of(d, P.change_classes(d))
    blocks = [b for b in _geojson_blocks(page)
              if b["features"] and re.match(r"[+-]\d", b["features"][0]["properties"].get("t0", ""))]
    assert len(blocks) == 1
    assert [f["properties"]["style"]["color"] for f in blocks[0]["features"]] == want
    # before and after share one colour scale
    both = np.concatenate([before["hub_minutes"].to_numpy(float), after["hub_minutes"].to_numpy(float)])
    classes = P.cost_classes(both)
    nets = [b for b in _geojson_blocks(page) if len(b["features"]) == len(before)
            and not re.match(r"[+-]\d", b["features"][0]["properties"].get("t0", ""))]
    assert len(nets) == 2
    assert [f["properties"]["style"]["color"] for f in nets[0]["features"]] == P.colour_of(before["hub_minutes"], classes)
    assert [f["properties"]["style"]["color"] for f in nets[1]["features"]] == P.colour_of(after["hub_minutes"], classes)


# ---------------------------------------------------------------- deterministic, atomic, bad input
def test_same_inputs_give_identical_files(tmp_path, layers):
    a = write_map(tmp_path / "a.html", **_all(layers))
    b = write_map(tmp_path / "b.html", **_all(layers))
    assert a.read_bytes() == b.read_bytes()
    assert not re.search(r"[0-9a-f]{32}", a.read_text("utf-8").split("</script>", 1)[1])  # no random ids


def test_bad_input(tmp_path, layers):
    with pytest.raises(OptionError, match="nothing to draw"):
        render_map()
    with pytest.raises(OptionError, match="not both"):
        render_map(edges=layers["edges"], comparison=Comparison(layers["edges"], layers["edges"]))
    with pytest.raises(LayerError, match=r"layer 'edges', field 'hub_minutes': is missing"):
        render_map(edges=layers["edges"].drop(columns="hub_minutes"))
    no_crs = layers["hubs"].copy()
    no_crs = no_crs.set_crs(None, allow_override=True)
    with pytest.raises(CRSError, match="layer 'hubs': has no CRS"):
        render_map(hubs=no_crs)
    with pytest.raises(OptionError, match="caution line must not be empty"):
        render_map(hubs=layers["hubs"], caution="  ")
    with pytest.raises(OptionError, match=r"must end in \.html"):
        write_map(tmp_path / "m.png", hubs=layers["hubs"])
    p = write_map(tmp_path / "m.html", hubs=layers["hubs"])
    old = p.read_bytes()
    with pytest.raises(OutputExistsError):
        write_map(p, edges=layers["edges"])
    assert p.read_bytes() == old
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(OutputError, match="is a file, not a folder"):
        write_map(blocker / "m.html", hubs=layers["hubs"])
    assert sorted(x.name for x in tmp_path.iterdir()) == ["file", "m.html"]


def test_custom_caution_is_shown_escaped(layers):
    page = render_map(hubs=layers["hubs"], caution="Check <with> the district office & surveys")
    assert "Check &lt;with&gt; the district office &amp; surveys" in page


def test_point_layers_are_circles_never_default_markers(layers):
    """Leaflet's default marker loads an icon image file; every point layer must use circle markers."""
    before, after, _ = sample_comparison(layers["edges"])
    pts = layers["hubs"][["name", "geometry"]].assign(delta_minutes=[-3.0, 0.0, 7.0])
    page = render_map(issues=layers["issues"], comparison=Comparison(before, after, pts))
    assert page.count("new L.CircleMarker(") == 2
    assert "new L.Marker(" not in page and "L.marker(" not in page.split("Leaflet 1.9.4", 1)[1].split("</script>", 1)[1]
    assert 'gr-sw-point" style="background:' in page  # the change legend shows point swatches

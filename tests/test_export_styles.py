"""SLD style files and the shared palette.

Sources:
- OGC 05-078r4 (2007), Styled Layer Descriptor 1.1.0; OGC 05-077r4 (2006),
  Symbology Encoding 1.1.0; OGC 04-095 (2005), Filter Encoding 1.1.0: the
  namespaces, and that a Rule holds an optional Filter/ElseFilter followed by
  one or more symbolizers (element order from memory of the SE schema).
- CIE 15 (2004) CIELAB and IEC 61966-2-1 (1999) sRGB: the palette's own
  LCh -> sRGB conversion is checked against scikit-image's ``lab2rgb``.
- Sharma, Wu and Dalal (2005), "The CIEDE2000 color-difference formula":
  legend entries shown together are checked pairwise with scikit-image's
  ``deltaE_ciede2000`` (and the implementation against the paper's first
  published test pairs).
- Brewer (2003), ColorBrewer: sequential schemes stay readable to
  colour-blind readers when lightness changes monotonically (common practice).
"""

from __future__ import annotations

import re
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.export_layers import sample_comparison, sample_layers  # noqa: E402

from geo_reach.errors import OutputExistsError  # noqa: E402
from geo_reach.export import palette as P  # noqa: E402
from geo_reach.export.styles import (OGC_NS, SE_NS, SLD_NS, change_sld, edges_sld, hubs_sld,  # noqa: E402
                                     reach_bands_sld, reach_rings_sld, sld_for, style_path, weak_regions_sld,
                                     write_styles)

NS = {"sld": SLD_NS, "se": SE_NS, "ogc": OGC_NS}
SYMBOLIZERS = ("LineSymbolizer", "PolygonSymbolizer", "PointSymbolizer", "TextSymbolizer", "RasterSymbolizer")
HEX = re.compile(r"^#[0-9a-f]{6}$")


def _rules(text: str):
    root = ET.fromstring(text.encode("utf-8"))
    assert root.tag == f"{{{SLD_NS}}}StyledLayerDescriptor"
    assert root.get("version") == "1.1.0"
    return root, root.findall(".//se:Rule", NS)


def _check_document(text: str):
    root, rules = _rules(text)
    assert rules
    assert root.find("sld:NamedLayer/se:Name", NS) is not None
    assert root.find("sld:NamedLayer/sld:UserStyle/se:FeatureTypeStyle", NS) is not None
    for rule in rules:
        children = [c.tag for c in rule]
        filt = [i for i, t in enumerate(children) if t in (f"{{{OGC_NS}}}Filter", f"{{{SE_NS}}}ElseFilter")]
        syms = [i for i, t in enumerate(children) if t.split("}")[1] in SYMBOLIZERS and t.startswith(f"{{{SE_NS}}}")]
        assert len(filt) == 1, "every rule has exactly one filter"
        assert syms, "every rule has a symbolizer"
        assert filt[0] < min(syms), "SE 1.1: the filter comes before the symbolizers"
        assert children[0] == f"{{{SE_NS}}}Name"
    for p in root.iter(f"{{{SE_NS}}}SvgParameter"):
        if p.get("name") in ("fill", "stroke"):
            assert HEX.match(p.text), p.text
    return root, rules


def _matches(filt, props: dict) -> bool:
    """Evaluate the small Filter Encoding subset we write."""
    tag = filt.tag.split("}")[1]
    if tag == "Filter":
        return _matches(list(filt)[0], props)
    if tag == "And":
        return all(_matches(c, props) for c in filt)
    if tag == "PropertyIsNull":
        return props.get(filt.find("ogc:PropertyName", NS).text) is None
    name = filt.find("ogc:PropertyName", NS).text
    lit = filt.find("ogc:Literal", NS).text
    v = props.get(name)
    if v is None:
        return False
    if tag == "PropertyIsEqualTo":
        return (float(v) == float(lit)) if isinstance(v, (int, float)) else (str(v) == lit)
    v, lit = float(v), float(lit)
    return {"PropertyIsLessThan": v < lit, "PropertyIsGreaterThanOrEqualTo": v >= lit}[tag]


def _rule_for(rules, props):
    """The rules that apply to a feature (ElseFilter: when no other rule applies)."""
    hit = [r for r in rules if r.find("ogc:Filter", NS) is not None and _matches(r.find("ogc:Filter", NS), props)]
    if not hit:
        hit = [r for r in rules if r.find("se:ElseFilter", NS) is not None]
    return hit


def _colour(rule):
    for name in ("stroke", "fill"):
        for sym in rule:
            if sym.tag.endswith("TextSymbolizer"):
                continue
            p = sym.find(f".//se:SvgParameter[@name='{name}']", NS)
            if p is not None and (name == "stroke" and sym.tag.endswith("LineSymbolizer")
                                  or name == "fill" and not sym.tag.endswith("LineSymbolizer")):
                return p.text
    raise AssertionError("no colour")


@pytest.fixture(scope="module")
def layers():
    return sample_layers()


def test_edges_style_every_value_in_exactly_one_rule_with_the_palette_colour(layers):
    values = layers["edges"]["hub_minutes"].to_numpy(float)
    text = edges_sld(values)
    _, rules = _check_document(text)
    classes = P.cost_classes(values)
    probe = list(values) + [0.0, 1e6] + [c.lo for c in classes if c.lo is not None]
    for v in probe:
        props = {"hub_minutes": None if np.isnan(v) else float(v)}
        hit = _rule_for(rules, props)
        assert len(hit) == 1, (v, [h.find("se:Name", NS).text for h in hit])
        want = P.NO_VALUE if np.isnan(v) else P.colour_of([v], classes)[0]
        assert _colour(hit[0]) == want


def test_edges_style_for_another_weight():
    values = np.array([120.0, 5400.0, 23000.0, np.nan])
    text = edges_sld(values, field="hub_length_m")
    _, rules = _check_document(text)
    classes = P.cost_classes(values, "m")
    assert [r.find("se:Description/se:Title", NS).text for r in rules][:-1] == [c.label for c in classes]
    for v in values:
        hit = _rule_for(rules, {"hub_length_m": None if np.isnan(v) else float(v)})
        assert len(hit) == 1 and _colour(hit[0]) == (P.NO_VALUE if np.isnan(v) else P.colour_of([v], classes)[0])


def test_reach_rings_style_one_opaque_fill_per_ring_as_on_the_map():
    to = [30.0, 60.0, 120.0, None]
    _, rules = _check_document(reach_rings_sld(to))
    classes = P.travel_classes([30, 60, 120])
    assert len(rules) == 4
    for t, c in zip(to, classes):
        hit = _rule_for(rules, {"to_minutes": t})
        assert len(hit) == 1 and _colour(hit[0]) == c.colour
        op = hit[0].find(".//se:SvgParameter[@name='fill-opacity']", NS).text
        assert float(op) == 1.0


def test_reach_bands_style_outlines_only_and_skips_per_hub_rows(layers):
    bands = [15.0, 30.0, 60.0]
    root, rules = _check_document(reach_bands_sld(bands))
    assert len(rules) == 3
    assert root.find(".//se:PolygonSymbolizer", NS) is None  # nested bands are never filled (no stacking)
    for b in bands:
        assert len(_rule_for(rules, {"within_minutes": b, "hub_id": None})) == 1
        assert _rule_for(rules, {"within_minutes": b, "hub_id": 7}) == []   # per-hub copies are not drawn


def test_weak_regions_style_fixed_colour_per_reason_and_rank_label():
    _, rules = _check_document(weak_regions_sld())
    for reason, colour in P.REASON_COLOURS.items():
        hit = _rule_for(rules, {"reason": reason})
        assert len(hit) == 1 and _colour(hit[0]) == colour
        assert hit[0].find("se:TextSymbolizer/se:Label/ogc:PropertyName", NS).text == "rank"
        assert hit[0].find("se:PolygonSymbolizer", NS) is None   # outlined, so rings show through
    # the colours do not depend on which reasons occur
    assert weak_regions_sld(["no_hub"]) == weak_regions_sld(["single_link", "beyond_threshold"])
    other = _rule_for(rules, {"reason": "something new"})
    assert len(other) == 1 and _colour(other[0]) == P.reason_colour("something new")


def test_hubs_style_shapes_by_kind():
    root, rules = _check_document(hubs_sld(["port", "clinic", "clinic", "market"]))
    sym = P.hub_symbols(["port", "clinic", "market"])
    for kind, (shape, fill) in sym.items():
        hit = _rule_for(rules, {"kind": kind})
        assert len(hit) == 1
        assert hit[0].find(".//se:WellKnownName", NS).text == shape and _colour(hit[0]) == fill
    # the marks are the well-known names of Symbology Encoding 1.1
    assert {w.text for w in root.iter(f"{{{SE_NS}}}WellKnownName")} <= {"square", "circle", "triangle", "star",
                                                                          "cross", "x"}


def test_text_from_data_is_escaped_in_xml():
    nasty = 'flooded <road> & "ford"'
    text = hubs_sld([nasty])
    assert "<road>" not in text
    _, rules = _check_document(text)
    lits = [e.text for e in ET.fromstring(text.encode()).iter(f"{{{OGC_NS}}}Literal")]
    assert nasty in lits


@pytest.mark.parametrize("kind", ["line", "polygon", "point"])
def test_change_style_diverging_and_covering(layers, kind):
    _, _, change = sample_comparison(layers["edges"])
    d = change["delta_minutes"].to_numpy(float)
    _, rules = _check_document(change_sld(d, kind))
    classes = P.change_classes(d)
    sym = {"line": "se:LineSymbolizer", "polygon": "se:PolygonSymbolizer", "point": "se:PointSymbolizer"}[kind]
    assert all(r.find(sym, NS) is not None for r in rules)
    for v in list(d) + [-1e5, 1e5, 0.0, -0.5, 0.5]:
        hit = _rule_for(rules, {"delta_minutes": float(v)})
        assert len(hit) == 1 and _colour(hit[0]) == P.colour_of([v], classes)[0]


def test_sld_for_and_write_styles_beside_the_gpkg(tmp_path, layers):
    _, _, change = sample_comparison(layers["edges"])
    rings = layers["reach_bands"].rename(columns={"within_minutes": "to_minutes"})
    lay = dict(layers, change=change, reach_rings=rings, scen_reach_rings=rings)
    gpkg = tmp_path / "results.gpkg"
    written = write_styles(gpkg, lay)
    assert [p.name for p in written] == ["results.edges.sld", "results.hubs.sld", "results.reach_bands.sld",
                                         "results.weak_regions.sld", "results.change.sld",
                                         "results.reach_rings.sld", "results.scen_reach_rings.sld"]
    for p in written:
        _check_document(p.read_text(encoding="utf-8"))
        layer = p.name.split(".")[1]
        root = ET.parse(p).getroot()
        assert root.find("sld:NamedLayer/se:Name", NS).text == layer
    assert sld_for("diameter", layers["diameter"]) is None
    pts = layers["hubs"][["geometry"]].assign(delta_minutes=[-3.0, 0.0, 7.0])
    assert "PointSymbolizer" in sld_for("scen_settlements", pts)
    assert "hub_minutes" in sld_for("scen_edges", layers["edges"])
    assert "hub_latency_ms" in sld_for("edges", layers["edges"].rename(columns={"hub_minutes": "hub_latency_ms"}))
    assert sld_for("summary", layers["hubs"].drop(columns="geometry").copy()) is None
    before = written[0].read_bytes()
    with pytest.raises(OutputExistsError, match="style file already exists"):
        write_styles(gpkg, lay)
    assert written[0].read_bytes() == before
    assert style_path(gpkg, "edges") == tmp_path / "results.edges.sld"


# ---------------------------------------------------------------- palette against outside references
def _lab(hexcol: str) -> np.ndarray:
    from skimage.color import rgb2lab

    rgb = np.array([int(hexcol[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    return rgb2lab(rgb[None, None, :])[0, 0]


def _de(a: str, b: str) -> float:
    from skimage.color import deltaE_ciede2000

    return float(deltaE_ciede2000(_lab(a), _lab(b)))


def test_ciede2000_reference_pairs():
    """Sharma, Wu and Dalal (2005), Table 1, pairs 1, 7 and 17 (CIELAB in, Delta E00 out; quoted from memory)."""
    from skimage.color import deltaE_ciede2000

    pairs = [((50.0, 2.6772, -79.7751), (50.0, 0.0, -82.7485), 2.0425),
             ((50.0, 0.0, 0.0), (50.0, -1.0, 2.0), 2.3669),
             ((50.0, 2.5, 0.0), (73.0, 25.0, -18.0), 27.1492)]
    for a, b, want in pairs:
        assert float(deltaE_ciede2000(np.array(a), np.array(b))) == pytest.approx(want, abs=1e-4)


@pytest.mark.parametrize("lch", [(93, 30, 105), (48, 28, 215), (20, 45, 312), (52, 78, 355), (80, 22, 238),
                                 (100, 0, 0), (0, 0, 0), (60, 120, 30)])
def test_lch_to_hex_matches_scikit_image(lch):
    from skimage.color import lab2rgb

    L, C, h = lch
    lab = np.array([[[L, C * np.cos(np.radians(h)), C * np.sin(np.radians(h))]]])
    rgb = np.clip(lab2rgb(lab)[0, 0], 0, 1)
    want = "#" + "".join(f"{int(round(c * 255)):02x}" for c in rgb)
    got = P.lch_to_hex(*lch)
    assert max(abs(int(got[i:i + 2], 16) - int(want[i:i + 2], 16)) for i in (1, 3, 5)) <= 1, (got, want)


def _families(n_travel: int, n_net: int) -> dict:
    """Every colour family of the map with its legend colours; ``None`` families share meaning (no value)."""
    return {
        "background": [P.BACKGROUND],
        "travel": list(P.ramp(P.TRAVEL_ANCHORS, n_travel)),
        "network": list(P.ramp(P.NETWORK_ANCHORS, n_net)),
        "no value": [P.NO_VALUE],
        "water": [P.WATER],
        "hubs": [P.HUB_COLOUR],
        "reasons": list(P.REASON_COLOURS.values()),
        "path": [P.PATH_COLOUR],
        "issues": [P.ISSUE_COLOUR],
        "share": [c.colour for c in P.share_classes()],
        "change": [c.colour for c in P.change_classes([-100, 100])],
        "proposed": [P.PROPOSED_COLOUR],
        "district edge": ["#4d4d4d"],
        # the study sections' layers (link criticality, accessibility index): 2 to 5 classes each
        "criticality": sorted({c for n in range(2, 6) for c in P.ramp(P.CRITICAL_ANCHORS, n)}),
        "index": sorted({c for n in range(2, 6) for c in P.ramp(P.INDEX_ANCHORS, n)}),
    }


#: What can be on screen together: today's view (rings or the district shading) and a scenario's view.
VIEWS = {
    "today, rings": ["background", "travel", "network", "no value", "water", "hubs", "reasons", "path", "issues",
                     "district edge", "criticality", "index"],
    "today, districts": ["background", "share", "travel", "network", "no value", "water", "hubs", "reasons",
                         "path", "issues", "district edge", "criticality", "index"],
    "scenario": ["background", "travel", "network", "no value", "water", "hubs", "change", "proposed",
                 "district edge"],
}


@pytest.mark.parametrize("n_travel", [2, 3, 4, 5, 6, 7, 8])
def test_families_shown_together_differ_by_ciede2000(n_travel):
    for n_net in range(1, 7):
        fam = _families(n_travel, n_net)
        for view, names in VIEWS.items():
            for i, a in enumerate(names):
                for b in names[i + 1:]:
                    for ca in fam[a]:
                        for cb in fam[b]:
                            d = _de(ca, cb)
                            assert d >= P.MIN_DELTA_E_BETWEEN_FAMILIES, (view, a, ca, b, cb, round(d, 2))


@pytest.mark.parametrize("anchors,n", [(P.TRAVEL_ANCHORS, n) for n in range(2, 9)]
                         + [(P.NETWORK_ANCHORS, n) for n in range(2, 8)]
                         + [(P.SHARE_ANCHORS, 5), (P.FASTER_ANCHORS, 3), (P.SLOWER_ANCHORS, 3)]
                         + [(P.CRITICAL_ANCHORS, n) for n in range(2, 6)] + [(P.INDEX_ANCHORS, n) for n in range(2, 6)])
def test_ramps_fall_in_lightness_with_visible_steps(anchors, n):
    cols = P.ramp(anchors, n)
    L = [_lab(c)[0] for c in cols]
    assert all(a > b + 2 for a, b in zip(L, L[1:])), L          # monotone: readable with any colour vision
    assert all(_de(a, b) >= P.MIN_DELTA_E_WITHIN_RAMP for a, b in zip(cols, cols[1:]))


def test_reason_colours_are_fixed_and_distinct():
    assert set(P.REASON_COLOURS) == {"beyond_threshold", "single_link", "no_hub"}
    cols = list(P.REASON_COLOURS.values())
    assert min(_de(a, b) for i, a in enumerate(cols) for b in cols[i + 1:]) >= 20
    assert P.reason_colour("no_hub") == P.REASON_COLOURS["no_hub"]


def test_travel_classes_are_the_band_semantics():
    # a place is within t minutes when its minutes are <= t (as for the bands and population counts)
    cls = P.travel_classes([30, 60, 120])
    assert P.classify([0, 30, 30.000001, 60, 120, 120.5, float("nan")], cls).tolist() == [0, 0, 1, 1, 2, 3, -1]


def test_classes_cover_the_line_without_gaps_or_overlaps():
    rng = np.random.default_rng(7)
    for unit in ("min", "km", "hops", "ms"):
        for vmax in (0.3, 3, 12, 47, 100, 250, 900, 5000, 72000):
            vals = rng.random(50) * vmax
            for classes in (P.cost_classes(vals, unit), P.change_classes(vals - vmax / 2, unit)):
                assert classes[0].lo is None and classes[-1].hi is None
                for a, b in zip(classes, classes[1:]):
                    assert a.hi == b.lo
                probe = np.concatenate([vals, vals - vmax / 2, [c.lo for c in classes if c.lo is not None]])
                idx = P.classify(probe, classes)
                assert (idx >= 0).all()
                for v, i in zip(probe, idx):
                    assert classes[i].contains(v) and sum(c.contains(v) for c in classes) == 1
                assert all(HEX.match(c.colour) for c in classes)
                assert all(c.label.endswith(" " + unit) for c in classes)

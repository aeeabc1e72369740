"""SLD style files and the shared palette.

Sources:
- OGC 05-078r4 (2007), Styled Layer Descriptor 1.1.0; OGC 05-077r4 (2006),
  Symbology Encoding 1.1.0; OGC 04-095 (2005), Filter Encoding 1.1.0: the
  namespaces, and that a Rule holds an optional Filter/ElseFilter followed by
  one or more symbolizers (element order from memory of the SE schema).
- CIE 15 (2004) L* from relative luminance, with the sRGB transfer function of
  IEC 61966-2-1 (1999): used to check the cost scale's lightness is monotonic.
- matplotlib's ``viridis`` and ``PuOr`` colour maps as the reference the
  palette is sampled from (ColorBrewer ``PuOr``: Brewer 2003).
"""

from __future__ import annotations

import re
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import matplotlib
import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.export_layers import sample_comparison, sample_layers  # noqa: E402

from geo_reach.errors import OutputExistsError  # noqa: E402
from geo_reach.export import palette as P  # noqa: E402
from geo_reach.export.styles import (OGC_NS, SE_NS, SLD_NS, change_sld, edges_sld, reach_bands_sld,  # noqa: E402
                                     sld_for, style_path, weak_regions_sld, write_styles)

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


def test_reach_bands_style_one_rule_per_band(layers):
    bands = layers["reach_bands"]["band_minutes"]
    _, rules = _check_document(reach_bands_sld(bands))
    assert len(rules) == 3
    for b, want in zip(bands, P.band_colour(bands, P.band_classes(bands))):
        hit = _rule_for(rules, {"band_minutes": float(b)})
        assert len(hit) == 1 and _colour(hit[0]) == want


def test_weak_regions_style_fills_by_reason_and_labels_rank(layers):
    weak = layers["weak_regions"]
    _, rules = _check_document(weak_regions_sld(weak["reason"]))
    colours = P.category_colours(weak["reason"])
    for reason in weak["reason"]:
        hit = _rule_for(rules, {"reason": reason})
        assert len(hit) == 1 and _colour(hit[0]) == colours[reason]
        assert hit[0].find("se:TextSymbolizer/se:Label/ogc:PropertyName", NS).text == "rank"
    other = _rule_for(rules, {"reason": "something new"})
    assert len(other) == 1 and _colour(other[0]) == P.NO_VALUE


def test_text_from_data_is_escaped_in_xml():
    nasty = 'flooded <road> & "ford"'
    text = weak_regions_sld([nasty])
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
    lay = dict(layers, change=change)
    gpkg = tmp_path / "results.gpkg"
    written = write_styles(gpkg, lay)
    assert [p.name for p in written] == ["results.edges.sld", "results.hubs.sld", "results.reach_bands.sld",
                                         "results.weak_regions.sld", "results.change.sld"]
    for p in written:
        _check_document(p.read_text(encoding="utf-8"))
        layer = p.name.split(".")[1]
        root = ET.parse(p).getroot()
        assert root.find("sld:NamedLayer/se:Name", NS).text == layer
    assert sld_for("diameter", layers["diameter"]) is None
    pts = layers["hubs"][["geometry"]].assign(delta_minutes=[-3.0, 0.0, 7.0])
    assert "PointSymbolizer" in sld_for("scen_settlements", pts)
    assert "hub_minutes" in sld_for("scen_edges", layers["edges"])
    assert sld_for("summary", layers["hubs"].drop(columns="geometry").copy()) is None
    before = written[0].read_bytes()
    with pytest.raises(OutputExistsError, match="style file already exists"):
        write_styles(gpkg, lay)
    assert written[0].read_bytes() == before
    assert style_path(gpkg, "edges") == tmp_path / "results.edges.sld"


# ---------------------------------------------------------------- palette against outside references
def _lstar(hexcol: str) -> float:
    """CIE L* of an sRGB colour (IEC 61966-2-1 transfer function, D65 luminance weights)."""
    rgb = np.array([int(hexcol[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    y = float(lin @ np.array([0.2126, 0.7152, 0.0722]))
    return 116 * y ** (1 / 3) - 16 if y > (6 / 29) ** 3 else (29 / 3) ** 3 * y


@pytest.mark.parametrize("n", [2, 3, 5, 6, 8])
def test_cost_scale_is_sampled_viridis_with_monotonic_lightness(n):
    cols = P.sequential(n)
    cmap = matplotlib.colormaps["viridis"]
    ref = [matplotlib.colors.to_hex(cmap(x)) for x in np.linspace(0.8, 0.0, n)]
    assert list(cols) == ref
    L = [_lstar(c) for c in cols]
    assert all(a > b + 3 for a, b in zip(L, L[1:])), L  # dearer is darker, with visible steps


def test_change_scale_is_sampled_puor_and_darkens_away_from_zero():
    faster, slower = P.diverging(3)
    cmap = matplotlib.colormaps["PuOr"]
    refs = {matplotlib.colors.to_hex(cmap(x)) for x in np.linspace(0, 1, 1001)}
    assert set(faster) | set(slower) <= refs
    Lf, Ls = [_lstar(c) for c in faster], [_lstar(c) for c in slower]
    assert all(a > b for a, b in zip(Lf, Lf[1:])) and all(a > b for a, b in zip(Ls, Ls[1:]))


def test_okabe_ito_colours():
    # Okabe & Ito (2008); values as commonly quoted (from memory)
    assert P.QUALITATIVE == ("#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7")


def test_classes_cover_the_line_without_gaps_or_overlaps():
    rng = np.random.default_rng(7)
    for vmax in (3, 12, 47, 100, 250, 900, 5000):
        vals = rng.random(50) * vmax
        for classes in (P.cost_classes(vals), P.change_classes(vals - vmax / 2)):
            assert classes[0].lo is None and classes[-1].hi is None
            for a, b in zip(classes, classes[1:]):
                assert a.hi == b.lo
            probe = np.concatenate([vals, vals - vmax / 2, [c.lo for c in classes if c.lo is not None]])
            idx = P.classify(probe, classes)
            assert (idx >= 0).all()
            for v, i in zip(probe, idx):
                assert classes[i].contains(v) and sum(c.contains(v) for c in classes) == 1
            assert all(HEX.match(c.colour) for c in classes)

"""Style files in the open OGC Styled Layer Descriptor format, written beside a GeoPackage.

Each ``.sld`` file styles one layer with the same classes and colours as the
HTML map (:mod:`geo_reach.export.palette`), so a layer added to a desktop GIS
project can be given its style with one "load style" step:

* ``reach_rings``: one opaque fill per disjoint ring (by ``to_minutes``);
* ``reach_bands``: the nested bands as outlines, all hubs together only
  (per-hub rows are not drawn);
* ``weak_regions``: outlined in the fixed colour of each ``reason``, labelled with ``rank``;
* ``edges`` (with ``hub_<weight>``): lines graduated by the cost to the nearest hub;
* ``hubs`` (with ``kind``): the map's shape per kind;
* any layer with ``delta_minutes``: lines or fills on the diverging change scale.

Files are SLD 1.1.0 documents whose symbolizers use Symbology Encoding 1.1
(namespace ``se``) and whose filters use Filter Encoding 1.1 (``ogc``).

References
----------
.. [1] OGC 05-078r4 (2007). OpenGIS Styled Layer Descriptor Profile of the Web
   Map Service Implementation Specification, version 1.1.0.
.. [2] OGC 05-077r4 (2006). OpenGIS Symbology Encoding Implementation
   Specification, version 1.1.0.
.. [3] OGC 04-095 (2005). OpenGIS Filter Encoding Implementation Specification, version 1.1.0.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Mapping

import numpy as np

from ..errors import OptionError
from . import palette as P
from .atomic import atomic_path, check_output

__all__ = [
    "SLD_NS", "SE_NS", "OGC_NS",
    "reach_rings_sld", "reach_bands_sld", "weak_regions_sld", "edges_sld", "hubs_sld", "change_sld",
    "COST_FIELDS",
    "sld_for", "write_styles", "style_path",
]

SLD_NS = "http://www.opengis.net/sld"
SE_NS = "http://www.opengis.net/se"
OGC_NS = "http://www.opengis.net/ogc"
_XLINK_NS = "http://www.w3.org/1999/xlink"
_XSI_NS = "http://www.w3.org/2001/XMLSchema-instance"
_SCHEMA = "http://www.opengis.net/sld http://schemas.opengis.net/sld/1.1.0/StyledLayerDescriptor.xsd"

for _p, _u in (("", SLD_NS), ("se", SE_NS), ("ogc", OGC_NS), ("xlink", _XLINK_NS), ("xsi", _XSI_NS)):
    ET.register_namespace(_p, _u)

FILL_OPACITY = 0.55


def _se(tag):
    return f"{{{SE_NS}}}{tag}"


def _ogc(tag):
    return f"{{{OGC_NS}}}{tag}"


def _sub(parent, tag, text=None, **attrib):
    el = ET.SubElement(parent, tag, attrib)
    if text is not None:
        el.text = str(text)
    return el


def _num(v) -> str:
    return f"{float(v):g}"


def _svg(parent, name, value):
    _sub(parent, _se("SvgParameter"), value, name=name)


def _document(layer: str, title: str, abstract: str):
    root = ET.Element(f"{{{SLD_NS}}}StyledLayerDescriptor", {
        "version": "1.1.0", f"{{{_XSI_NS}}}schemaLocation": _SCHEMA})
    named = _sub(root, f"{{{SLD_NS}}}NamedLayer")
    _sub(named, _se("Name"), layer)
    style = _sub(named, f"{{{SLD_NS}}}UserStyle")
    _sub(style, _se("Name"), layer)
    desc = _sub(style, _se("Description"))
    _sub(desc, _se("Title"), title)
    _sub(desc, _se("Abstract"), abstract)
    fts = _sub(style, _se("FeatureTypeStyle"))
    return root, fts


def _rule(fts, name: str, title: str):
    rule = _sub(fts, _se("Rule"))
    _sub(rule, _se("Name"), name)
    d = _sub(rule, _se("Description"))
    _sub(d, _se("Title"), title)
    return rule


def _cmp(parent, op: str, field: str, value):
    el = _sub(parent, _ogc(op))
    _sub(el, _ogc("PropertyName"), field)
    _sub(el, _ogc("Literal"), value)
    return el


def _range_filter(rule, field: str, lo, hi):
    """``lo <= field < hi`` (open ends left out)."""
    f = _sub(rule, _ogc("Filter"))
    parts = []
    if lo is not None:
        parts.append(("PropertyIsGreaterThanOrEqualTo", _num(lo)))
    if hi is not None:
        parts.append(("PropertyIsLessThan", _num(hi)))
    if len(parts) == 2:
        f = _sub(f, _ogc("And"))
    for op, v in parts:
        _cmp(f, op, field, v)


def _null_filter(rule, field: str):
    f = _sub(rule, _ogc("Filter"))
    el = _sub(f, _ogc("PropertyIsNull"))
    _sub(el, _ogc("PropertyName"), field)


def _line(rule, colour: str, width: float = 2.0, dash: str | None = None):
    sym = _sub(rule, _se("LineSymbolizer"))
    st = _sub(sym, _se("Stroke"))
    _svg(st, "stroke", colour)
    _svg(st, "stroke-width", _num(width))
    _svg(st, "stroke-linejoin", "round")
    _svg(st, "stroke-linecap", "round")
    if dash:
        _svg(st, "stroke-dasharray", dash)


def _polygon(rule, colour: str, opacity: float = FILL_OPACITY, outline: str = P.OUTLINE, width: float = 0.4):
    sym = _sub(rule, _se("PolygonSymbolizer"))
    fill = _sub(sym, _se("Fill"))
    _svg(fill, "fill", colour)
    _svg(fill, "fill-opacity", _num(opacity))
    st = _sub(sym, _se("Stroke"))
    _svg(st, "stroke", outline)
    _svg(st, "stroke-width", _num(width))


def _circle(rule, colour: str, size: float = 9.0):
    sym = _sub(rule, _se("PointSymbolizer"))
    g = _sub(sym, _se("Graphic"))
    m = _sub(g, _se("Mark"))
    _sub(m, _se("WellKnownName"), "circle")
    fill = _sub(m, _se("Fill"))
    _svg(fill, "fill", colour)
    st = _sub(m, _se("Stroke"))
    _svg(st, "stroke", P.OUTLINE)
    _svg(st, "stroke-width", "1")
    _sub(g, _se("Size"), _num(size))


def _label(rule, field: str):
    sym = _sub(rule, _se("TextSymbolizer"))
    lab = _sub(sym, _se("Label"))
    _sub(lab, _ogc("PropertyName"), field)
    font = _sub(sym, _se("Font"))
    _svg(font, "font-family", "sans-serif")
    _svg(font, "font-size", "12")
    _svg(font, "font-weight", "bold")
    place = _sub(sym, _se("LabelPlacement"))
    pp = _sub(place, _se("PointPlacement"))
    ap = _sub(pp, _se("AnchorPoint"))
    _sub(ap, _se("AnchorPointX"), "0.5")
    _sub(ap, _se("AnchorPointY"), "0.5")
    halo = _sub(sym, _se("Halo"))
    _sub(halo, _se("Radius"), "1.5")
    hf = _sub(halo, _se("Fill"))
    _svg(hf, "fill", "#ffffff")
    fill = _sub(sym, _se("Fill"))
    _svg(fill, "fill", P.OUTLINE)


def _text(root) -> str:
    ET.indent(root, space="  ")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


def _values(values) -> np.ndarray:
    return np.asarray(list(values) if values is not None else [], dtype=object)


# ------------------------------------------------------------------ one function per layer
def _and_filter(rule, *parts):
    """A filter of several comparisons joined by And (one part: no And)."""
    f = _sub(rule, _ogc("Filter"))
    if len(parts) > 1:
        f = _sub(f, _ogc("And"))
    for op, field, value in parts:
        if op == "PropertyIsNull":
            el = _sub(f, _ogc(op))
            _sub(el, _ogc("PropertyName"), field)
        else:
            _cmp(f, op, field, value)


def reach_rings_sld(to_minutes, layer: str = "reach_rings") -> str:
    """SLD text for disjoint reach rings: one opaque fill per ring, the map's colours.

    Rings are told apart by ``to_minutes`` (their inclusive upper bound; null
    for the last, open ring), so they tile the map without stacking.

    Examples
    --------
    >>> "PropertyIsNull" in reach_rings_sld([30, 60, None])
    True
    """
    vals = np.asarray([np.nan if v is None else float(v) for v in to_minutes], dtype=float)
    ts = sorted({float(v) for v in vals[np.isfinite(vals)]}) or [float("inf")]
    classes = P.travel_classes(ts) if np.isfinite(ts[-1]) else []
    root, fts = _document(layer, "Reach rings (minutes to the nearest hub)",
                          "Disjoint rings: each place lies in one. The last ring also holds places no hub "
                          "reaches. Model estimates only.")
    for i, c in enumerate(classes):
        rule = _rule(fts, f"ring_{i + 1}", c.label)
        if c.hi is None:
            _null_filter(rule, "to_minutes")
        else:
            f = _sub(rule, _ogc("Filter"))
            _cmp(f, "PropertyIsEqualTo", "to_minutes", _num(c.hi))
        _polygon(rule, c.colour, opacity=1.0, outline=c.colour, width=0.2)
    return _text(root)


def reach_bands_sld(band_minutes, layer: str = "reach_bands", field: str = "within_minutes") -> str:
    """SLD text for the nested reach bands: the outline of each band for all hubs together.

    The bands are nested (the 60-minute band holds the 30-minute one), so
    filling them would stack colours; each is drawn as its outline (an
    isochrone), and the per-hub rows (``hub_id`` not null) match no rule.
    Use ``reach_rings`` for filled areas.

    Examples
    --------
    >>> "PolygonSymbolizer" in reach_bands_sld([15, 30])
    False
    """
    vals = sorted({float(v) for v in np.asarray(list(band_minutes), dtype=float) if np.isfinite(v)})
    root, fts = _document(layer, "Reach bands: outline of the places within each band (all hubs)",
                          "Nested bands drawn as outlines; per-hub rows are not drawn. Model estimates only.")
    widths = np.linspace(2.2, 1.0, len(vals)) if vals else []
    for t, w in zip(vals, widths):
        rule = _rule(fts, f"band_{_num(t)}", f"within {_num(t)} min")
        _and_filter(rule, ("PropertyIsEqualTo", field, _num(t)), ("PropertyIsNull", "hub_id", None))
        _outline(rule, P.OUTLINE, float(w))
    return _text(root)


def weak_regions_sld(reasons=None, layer: str = "weak_regions") -> str:
    """SLD text for weak regions: outlined in the fixed colour of each reason, labelled with ``rank``."""
    root, fts = _document(layer, "Weakly connected regions (by reason, labelled with rank)",
                          "Rank 1 has the most people. Model estimates only.")
    for i, (reason, colour) in enumerate(P.REASON_COLOURS.items()):
        rule = _rule(fts, f"reason_{i + 1}", P.REASON_LABELS[reason])
        f = _sub(rule, _ogc("Filter"))
        _cmp(f, "PropertyIsEqualTo", "reason", reason)
        _outline(rule, colour)
        _label(rule, "rank")
    rule = _rule(fts, "reason_other", "other reason")
    _sub(rule, _se("ElseFilter"))
    _outline(rule, P.reason_colour(None))
    _label(rule, "rank")
    return _text(root)


def _outline(rule, colour: str, width: float = 2.5):
    sym = _sub(rule, _se("LineSymbolizer"))
    st = _sub(sym, _se("Stroke"))
    _svg(st, "stroke", colour)
    _svg(st, "stroke-width", _num(width))


#: Cost fields of network layers and their units (``hub_cost`` is in the routing weight's unit, given by
#: the caller; the others are kept for layers written by earlier versions).
COST_FIELDS = {"hub_cost": "", "hub_minutes": "min", "hub_length_m": "m", "hub_hops": "hops",
               "hub_latency_ms": "ms"}
#: Change fields (after minus before) and their units; ``hub_cost_change`` is in the weight's unit.
CHANGE_FIELDS = {"hub_minutes_change": "min", "hub_cost_change": "", "delta_minutes": "min"}


def edges_sld(values, layer: str = "edges", field: str = "hub_minutes", unit: str | None = None) -> str:
    """SLD text for the network graduated by the cost to the nearest hub (the map's network colours)."""
    unit = unit or COST_FIELDS.get(field, "")
    classes = P.cost_classes(np.asarray(list(values), dtype=float), unit)
    root, fts = _document(layer, "Network by cost to the nearest hub",
                          f"Cost from each link to the nearest hub ({unit}). Model estimates only.")
    for i, c in enumerate(classes):
        rule = _rule(fts, f"cost_{i + 1}", c.label)
        _range_filter(rule, field, c.lo, c.hi)
        _line(rule, c.colour, 2.0)
    rule = _rule(fts, "no_route", "no route to a hub")
    _null_filter(rule, field)
    _line(rule, P.NO_VALUE, 1.2, dash="4 3")
    return _text(root)


def hubs_sld(kinds, layer: str = "hubs") -> str:
    """SLD text for hubs: the map's shape per ``kind`` (black, or white with a black outline)."""
    sym = P.hub_symbols(_values(kinds))
    root, fts = _document(layer, "Hubs by kind", "Places trips are measured to.")
    for i, (kind, (shape, fill)) in enumerate(sym.items()):
        rule = _rule(fts, f"kind_{i + 1}", kind)
        f = _sub(rule, _ogc("Filter"))
        _cmp(f, "PropertyIsEqualTo", "kind", kind)
        _mark(rule, shape, fill)
    rule = _rule(fts, "kind_other", "other")
    _sub(rule, _se("ElseFilter"))
    _mark(rule, "square", P.NO_VALUE)
    return _text(root)


def _mark(rule, shape: str, fill: str, size: float = 12.0):
    sym = _sub(rule, _se("PointSymbolizer"))
    g = _sub(sym, _se("Graphic"))
    m = _sub(g, _se("Mark"))
    _sub(m, _se("WellKnownName"), shape)
    f = _sub(m, _se("Fill"))
    _svg(f, "fill", fill)
    st = _sub(m, _se("Stroke"))
    _svg(st, "stroke", P.OUTLINE if fill == "#ffffff" else "#ffffff")
    _svg(st, "stroke-width", "1")
    _sub(g, _se("Size"), _num(size))


def change_sld(delta, geometry: str = "line", layer: str = "change", field: str = "delta_minutes",
               unit: str = "min") -> str:
    """SLD text for a change layer on the map's diverging scale of ``field`` (after minus before).

    Parameters
    ----------
    geometry : {"line", "polygon", "point"}
        Lines (network links), polygons (cells, regions) or points (settlements).
    """
    draw = {"line": lambda r, c: _line(r, c, 2.5),
            "polygon": lambda r, c: _polygon(r, c, 0.75, width=0.2),
            "point": lambda r, c: _circle(r, c, 8.0)}
    if geometry not in draw:
        raise OptionError(f"geometry must be 'line', 'polygon' or 'point', not {geometry!r}")
    classes = P.change_classes(np.asarray(list(delta), dtype=float), unit)
    root, fts = _document(layer, "Change (after minus before)",
                          "Negative: faster or cheaper after the change; positive: slower. Model estimates only.")
    for i, c in enumerate(classes):
        rule = _rule(fts, f"change_{i + 1}", c.label)
        _range_filter(rule, field, c.lo, c.hi)
        draw[geometry](rule, c.colour)
    rule = _rule(fts, "no_value", "no value before or after (new, closed or unreachable)")
    _null_filter(rule, field)
    if geometry == "line":
        _line(rule, P.NO_VALUE, 1.2, dash="4 3")
    else:
        draw[geometry](rule, P.NO_VALUE)
    return _text(root)


def _geometry_kind(frame) -> str:
    types = set(frame.geometry.geom_type.dropna().unique()) if len(frame) else set()
    if types and types <= {"Polygon", "MultiPolygon"}:
        return "polygon"
    if types and types <= {"Point", "MultiPoint"}:
        return "point"
    return "line"


def sld_for(name: str, frame, cost_unit: str = "") -> str | None:
    """The SLD text for a layer if it is one this module styles, else ``None``.

    Chosen by field: a change field (:data:`CHANGE_FIELDS`), then by name:
    ``reach_rings`` (``to_minutes``; also ``<scenario>_reach_rings``),
    ``reach_bands`` (``within_minutes``), ``weak_regions`` (``reason``),
    ``edges`` and ``<scenario>_edges`` (``hub_cost``), ``hubs`` (``kind``).
    ``cost_unit`` is the routing weight's unit, for ``hub_cost`` legends.
    """
    cols = set(getattr(frame, "columns", []))
    if not hasattr(frame, "geometry"):
        return None
    change = [c for c in CHANGE_FIELDS if c in cols]
    if change:
        unit = CHANGE_FIELDS[change[0]] or cost_unit
        return change_sld(frame[change[0]], _geometry_kind(frame), layer=name, field=change[0], unit=unit)
    if (name == "reach_rings" or name.endswith("_reach_rings")) and "to_minutes" in cols:
        return reach_rings_sld(frame["to_minutes"], layer=name)
    band = "within_minutes" if "within_minutes" in cols else "band_minutes"
    if name == "reach_bands" and band in cols:
        return reach_bands_sld(frame[band], layer=name, field=band)
    if name == "weak_regions" and "reason" in cols:
        return weak_regions_sld(frame["reason"], layer=name)
    cost = [c for c in COST_FIELDS if c in cols]
    if cost and _geometry_kind(frame) == "line" and (name == "edges" or name.endswith("_edges")):
        return edges_sld(frame[cost[0]], layer=name, field=cost[0], unit=COST_FIELDS[cost[0]] or cost_unit)
    if name == "hubs" and "kind" in cols:
        return hubs_sld(frame["kind"], layer=name)
    return None


def style_path(gpkg_path, layer: str) -> Path:
    """Where the style of ``layer`` goes: ``<gpkg stem>.<layer>.sld`` beside the GeoPackage."""
    p = Path(gpkg_path)
    return p.with_name(f"{p.stem}.{layer}.sld")


def write_styles(gpkg_path, layers: Mapping[str, object], overwrite: bool = False,
                 cost_unit: str = "") -> list[Path]:
    """Write an ``.sld`` file beside ``gpkg_path`` for each layer :func:`sld_for` styles.

    Parameters
    ----------
    gpkg_path : str or Path
        The GeoPackage the layers were (or will be) written to.
    layers : mapping of str to GeoDataFrame
        The same mapping given to :func:`geo_reach.export.gpkg.write_layers`.
    overwrite : bool
        Replace existing style files.
    cost_unit : str
        Unit of ``hub_cost`` (the routing weight's), for legends.

    Returns
    -------
    list of Path
        The files written, in layer order.

    Raises
    ------
    OutputExistsError, OutputError
        As :func:`geo_reach.export.atomic.check_output`; checked for every
        file before any is written.
    """
    todo = []
    for name, frame in layers.items():
        text = sld_for(name, frame, cost_unit)
        if text is not None:
            todo.append((check_output(style_path(gpkg_path, name), overwrite, "style file"), text))
    out = []
    for path, text in todo:
        with atomic_path(path) as tmp:
            tmp.write_text(text, encoding="utf-8")
        out.append(path)
    return out


"""Style files in the open OGC Styled Layer Descriptor format, written beside a GeoPackage.

Each ``.sld`` file styles one layer with the same classes and colours as the
HTML map (:mod:`geo_reach.export.palette`), so a layer added to a desktop GIS
project can be given its style with one "load style" step:

* ``reach_bands``: fill by ``band_minutes`` (one rule per band);
* ``weak_regions``: fill by ``reason``, labelled with ``rank``;
* ``edges`` (with ``hub_minutes``): lines graduated by minutes to the nearest hub;
* ``hubs`` (with ``kind``): circles by kind;
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
    "reach_bands_sld", "weak_regions_sld", "edges_sld", "hubs_sld", "change_sld",
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
def reach_bands_sld(band_minutes, layer: str = "reach_bands") -> str:
    """SLD text for reach bands: one fill rule per distinct ``band_minutes`` (upper bound, minutes).

    Examples
    --------
    >>> "PropertyIsEqualTo" in reach_bands_sld([15, 30])
    True
    """
    classes = P.band_classes(np.asarray(list(band_minutes), dtype=float))
    root, fts = _document(layer, "Reach bands (minutes to the nearest hub)",
                          "Places reached within each band's upper bound, in minutes. Model estimates only.")
    for c in classes:
        rule = _rule(fts, f"band_{_num(c.hi)}", f"{c.label} min")
        f = _sub(rule, _ogc("Filter"))
        _cmp(f, "PropertyIsEqualTo", "band_minutes", _num(c.hi))
        _polygon(rule, c.colour)
    return _text(root)


def weak_regions_sld(reasons, layer: str = "weak_regions") -> str:
    """SLD text for weak regions: fill by ``reason``, each labelled with its ``rank``."""
    colours = P.category_colours(_values(reasons))
    root, fts = _document(layer, "Weakly connected regions (by reason, labelled with rank)",
                          "Rank 1 is the weakest. Model estimates only.")
    for i, (reason, colour) in enumerate(colours.items()):
        rule = _rule(fts, f"reason_{i + 1}", reason)
        f = _sub(rule, _ogc("Filter"))
        _cmp(f, "PropertyIsEqualTo", "reason", reason)
        _polygon(rule, colour, outline=P.OUTLINE, width=1.0)
        _label(rule, "rank")
    rule = _rule(fts, "reason_other", "other or no reason")
    _sub(rule, _se("ElseFilter"))
    _polygon(rule, P.NO_VALUE, outline=P.OUTLINE, width=1.0)
    _label(rule, "rank")
    return _text(root)


def edges_sld(hub_minutes, layer: str = "edges", field: str = "hub_minutes") -> str:
    """SLD text for the network graduated by minutes to the nearest hub (``hub_minutes``)."""
    classes = P.cost_classes(np.asarray(list(hub_minutes), dtype=float))
    root, fts = _document(layer, "Network by minutes to the nearest hub",
                          "Travel time from each link to the nearest hub. Model estimates only.")
    for i, c in enumerate(classes):
        rule = _rule(fts, f"minutes_{i + 1}", f"{c.label} min")
        _range_filter(rule, field, c.lo, c.hi)
        _line(rule, c.colour, 2.0)
    rule = _rule(fts, "no_route", "no route to a hub")
    _null_filter(rule, field)
    _line(rule, P.NO_VALUE, 1.2, dash="4 3")
    return _text(root)


def hubs_sld(kinds, layer: str = "hubs") -> str:
    """SLD text for hubs: circles coloured by ``kind``."""
    colours = P.category_colours(_values(kinds))
    root, fts = _document(layer, "Hubs by kind", "Places trips are measured to.")
    for i, (kind, colour) in enumerate(colours.items()):
        rule = _rule(fts, f"kind_{i + 1}", kind)
        f = _sub(rule, _ogc("Filter"))
        _cmp(f, "PropertyIsEqualTo", "kind", kind)
        _circle(rule, colour)
    rule = _rule(fts, "kind_other", "other")
    _sub(rule, _se("ElseFilter"))
    _circle(rule, P.NO_VALUE)
    return _text(root)


def change_sld(delta_minutes, geometry: str = "line", layer: str = "change") -> str:
    """SLD text for a change layer on the diverging scale of ``delta_minutes`` (after minus before).

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
    classes = P.change_classes(np.asarray(list(delta_minutes), dtype=float))
    root, fts = _document(layer, "Change in minutes (after minus before)",
                          "Negative: faster after the change; positive: slower. Model estimates only.")
    for i, c in enumerate(classes):
        rule = _rule(fts, f"change_{i + 1}", f"{c.label} min")
        _range_filter(rule, "delta_minutes", c.lo, c.hi)
        draw[geometry](rule, c.colour)
    rule = _rule(fts, "no_value", "no value before or after (new, closed or unreachable)")
    _null_filter(rule, "delta_minutes")
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


def sld_for(name: str, frame) -> str | None:
    """The SLD text for a layer if it is one this module styles, else ``None``.

    Chosen by field: ``delta_minutes`` (change), then by name: ``reach_bands``
    (``band_minutes``), ``weak_regions`` (``reason``), ``edges``
    (``hub_minutes``), ``hubs`` (``kind``).
    """
    cols = set(getattr(frame, "columns", []))
    if not hasattr(frame, "geometry"):
        return None
    if "delta_minutes" in cols:
        return change_sld(frame["delta_minutes"], _geometry_kind(frame), layer=name)
    if name == "reach_bands" and "band_minutes" in cols:
        return reach_bands_sld(frame["band_minutes"], layer=name)
    if name == "weak_regions" and "reason" in cols:
        return weak_regions_sld(frame["reason"], layer=name)
    cost = "hub_cost" if "hub_cost" in cols else "hub_minutes"
    if cost in cols and _geometry_kind(frame) == "line" and (name == "edges" or name.endswith("_edges")):
        return edges_sld(frame[cost], layer=name, field=cost)
    if name == "hubs" and "kind" in cols:
        return hubs_sld(frame["kind"], layer=name)
    return None


def style_path(gpkg_path, layer: str) -> Path:
    """Where the style of ``layer`` goes: ``<gpkg stem>.<layer>.sld`` beside the GeoPackage."""
    p = Path(gpkg_path)
    return p.with_name(f"{p.stem}.{layer}.sld")


def write_styles(gpkg_path, layers: Mapping[str, object], overwrite: bool = False) -> list[Path]:
    """Write an ``.sld`` file beside ``gpkg_path`` for each layer :func:`sld_for` styles.

    Parameters
    ----------
    gpkg_path : str or Path
        The GeoPackage the layers were (or will be) written to.
    layers : mapping of str to GeoDataFrame
        The same mapping given to :func:`geo_reach.export.gpkg.write_layers`.
    overwrite : bool
        Replace existing style files.

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
        text = sld_for(name, frame)
        if text is not None:
            todo.append((check_output(style_path(gpkg_path, name), overwrite, "style file"), text))
    out = []
    for path, text in todo:
        with atomic_path(path) as tmp:
            tmp.write_text(text, encoding="utf-8")
        out.append(path)
    return out


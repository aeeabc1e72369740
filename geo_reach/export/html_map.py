"""A self-contained HTML map of the results (folium / Leaflet) that works with no network access.

Everything the page needs is inside the one file: Leaflet's script and style
sheet (vendored in ``assets/``, see its README), the layer data, the legend
(plain HTML), the caution line and a few lines of our own script.  folium's
default links to Leaflet, jQuery, Bootstrap and icon fonts on the internet are
switched off, and only folium parts that need none of them are used
(GeoJson layers with their tooltips and popups, circle markers, the layer
control).  A basemap can be switched on (it needs the internet); the map
reads without one on a plain background.

Every text taken from the data is shortened where it is a tooltip and
escaped with :func:`html.escape` before it reaches the page: folium's GeoJSON
tooltips and popups insert property values as HTML without escaping them.
No text from the data ever passes through a template engine either: our own
HTML is put into the rendered page after folium has rendered it.

Element ids, which folium draws at random, are numbered in order instead, so
the same inputs give a byte-identical file.
"""

from __future__ import annotations

import base64
import contextlib
import html
import itertools
import json
import math
import re
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np

from .. import CAUTION
from ..errors import CRSError, GeoReachError, LayerError, OptionError, where
from . import palette as P
from .atomic import atomic_path, check_output

__all__ = ["Comparison", "write_map", "render_map", "external_references", "TOOLTIP_CHARS", "POPUP_CHARS"]

#: Longest text shown in a tooltip (characters, before escaping); longer text ends with an ellipsis.
TOOLTIP_CHARS = 80
#: Longest text shown in a popup.
POPUP_CHARS = 600
#: Most fields listed in a popup.
POPUP_FIELDS = 14

_LABELS = {
    "name": "Name", "kind": "Kind", "mode": "Mode", "edge_id": "Link id", "hub_id": "Hub id",
    "hub_minutes": "Minutes to nearest hub", "minutes": "Minutes", "length_m": "Length (m)",
    "band_minutes": "Reached within (min)", "area_km2": "Area (km\u00b2)", "population": "Population",
    "rank": "Rank", "reason": "Reason", "delta_minutes": "Change (min, after \u2212 before)",
    "issue": "Issue", "detail": "Detail", "latency_ms": "Latency (ms)", "oneway": "One-way",
    "from_node": "From node", "to_node": "To node", "nearest_hub": "Nearest hub",
}

_PLACE_HEAD = "<!--geo-reach:head-->"
_PLACE_BODY = "<!--geo-reach:body-->"


@dataclass(frozen=True)
class Comparison:
    """A before/after pair for the map.

    Attributes
    ----------
    before, after : GeoDataFrame
        The network (lines) before and after the change, each with
        ``hub_minutes``; shown as two views the reader switches between.
    change : GeoDataFrame, optional
        Lines or polygons with ``delta_minutes`` (after minus before, minutes).
    before_label, after_label : str
        Names of the two views.
    """

    before: object
    after: object
    change: object = None
    before_label: str = "Before"
    after_label: str = "After"


# ------------------------------------------------------------------ text helpers
def _shorten(text: str, limit: int) -> str:
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[: limit - 1].rstrip() + "\u2026"


def _esc(text, limit: int) -> str:
    """Shorten to ``limit`` characters, then escape for HTML."""
    return html.escape(_shorten(text, limit), quote=True)


def _is_missing(v) -> bool:
    if v is None:
        return True
    try:
        return bool(v != v)  # NaN, pd.NA raise or are NaN
    except (TypeError, ValueError):
        return True


def _fmt(field: str, v) -> str:
    """Format one value for display (not yet escaped)."""
    if _is_missing(v):
        return "no route" if field in ("hub_minutes", "minutes") else "\u2013"
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        if field in ("population",):
            return f"{int(v):,}"
        if field == "oneway":
            return "yes" if v else "no"
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if field == "delta_minutes":
            return f"{v:+.1f}"
        if field.endswith("minutes") or field == "minutes":
            return f"{v:.1f}"
        if field.endswith("_m") or field == "population":
            return f"{v:,.0f}"
        if field.endswith("_km2"):
            return f"{v:,.2f}"
        if math.isfinite(v) and v == int(v) and abs(v) < 1e15:
            return str(int(v))
        return f"{v:.4g}"
    return str(v)


def external_references(page: str) -> list[str]:
    """Resources the page would fetch from the network: ``src``/``href`` of script, link, img,
    iframe and source tags, CSS ``url(...)`` and ``@import`` with ``http(s)://`` or ``//``."""
    found = []
    for m in re.finditer(r"<(script|link|img|iframe|source|embed|object)\b[^>]*>", page, re.I):
        for a in re.finditer(r"\b(src|href|data)\s*=\s*[\"']?\s*((?:https?:)?//[^\"'\s>]+)", m.group(0), re.I):
            found.append(a.group(2))
    for m in re.finditer(r"url\(\s*[\"']?\s*((?:https?:)?//[^)\"']+)", page, re.I):
        found.append(m.group(1))
    for m in re.finditer(r"@import\s+[\"']((?:https?:)?//[^\"']+)", page, re.I):
        found.append(m.group(1))
    return found


# ------------------------------------------------------------------ deterministic ids
@contextlib.contextmanager
def _numbered_ids():
    """Make branca/folium number element ids 1, 2, 3 ... instead of drawing random ones."""
    from branca.element import Element

    counter = itertools.count(1)
    saved = Element.__dict__["_generate_id"]
    Element._generate_id = classmethod(lambda cls: f"{next(counter):04d}")
    try:
        yield
    finally:
        Element._generate_id = saved


# ------------------------------------------------------------------ assets
def _asset(name: str) -> bytes:
    return resources.files("geo_reach.export").joinpath("assets", name).read_bytes()


def _leaflet_inline() -> str:
    css = _asset("leaflet.css").decode("utf-8")

    def data_uri(m):
        png = _asset(m.group(1))
        return "url(data:image/png;base64," + base64.b64encode(png).decode("ascii") + ")"

    css = re.sub(r"url\(images/([a-z0-9-]+\.png)\)", data_uri, css)
    js = _asset("leaflet.js").decode("utf-8")
    if "</script" in js.lower() or "</style" in css.lower():
        raise GeoReachError("vendored Leaflet holds a closing tag; it cannot be inlined")
    return f"<style>\n{css}\n</style>\n<script>\n{js}\n</script>\n"


# ------------------------------------------------------------------ layers to GeoJSON
def _to_wgs84(name: str, frame):
    import geopandas as gpd

    if not isinstance(frame, gpd.GeoDataFrame):
        raise OptionError(f"{where(layer=name)}expected a GeoDataFrame, got {type(frame).__name__}")
    if frame.crs is None:
        raise CRSError(f"{where(layer=name)}has no CRS; set it before drawing the map")
    keep = frame.geometry.notna() & ~frame.geometry.is_empty
    return frame[keep].to_crs(4326)


def _round_geom(g):
    import shapely

    return shapely.transform(g, lambda xy: np.round(xy, 6))


def _fields(frame, preferred: list[str]) -> list[str]:
    geom = frame.geometry.name
    cols = [c for c in frame.columns if c != geom]
    first = [c for c in preferred if c in cols]
    rest = [c for c in cols if c not in first and not c.startswith("_")]
    return (first + rest)[:POPUP_FIELDS]


def _label(field: str) -> str:
    return _LABELS.get(field, field)


def _features(frame, styles: list[dict], tip_fields: list[str], pop_fields: list[str]) -> dict:
    """A GeoJSON FeatureCollection whose properties hold only escaped display text and the style."""
    from shapely.geometry import mapping

    feats = []
    geoms = frame.geometry.to_numpy()
    cols = {f: frame[f].to_numpy(dtype=object) for f in set(tip_fields) | set(pop_fields)}
    for i in range(len(frame)):
        props = {"style": styles[i]}
        for k, f in enumerate(tip_fields):
            props[f"t{k}"] = _esc(_fmt(f, cols[f][i]), TOOLTIP_CHARS)
        for k, f in enumerate(pop_fields):
            props[f"p{k}"] = _esc(_fmt(f, cols[f][i]), POPUP_CHARS)
        feats.append({"type": "Feature", "geometry": mapping(_round_geom(geoms[i])), "properties": props})
    return {"type": "FeatureCollection", "features": feats}


def _geojson_layer(frame, styles, tip_fields, pop_fields, name, *, point=False, overlay=True, show=True,
                   control=True):
    import folium
    from folium.features import GeoJsonPopup, GeoJsonTooltip

    data = _features(frame, styles, tip_fields, pop_fields)
    tip = GeoJsonTooltip(fields=[f"t{k}" for k in range(len(tip_fields))],
                         aliases=[html.escape(_label(f)) for f in tip_fields], sticky=True,
                         class_name="gr-tip") if tip_fields else None
    pop = GeoJsonPopup(fields=[f"p{k}" for k in range(len(pop_fields))],
                       aliases=[html.escape(_label(f)) for f in pop_fields], localize=False,
                       class_name="gr-pop", max_width=360,
                       **{"maxHeight": 300, "autoPanPaddingTopLeft": [60, 70],
                          "autoPanPaddingBottomRight": [300, 50]}) if pop_fields else None
    # points are always drawn as circles: Leaflet's default marker would load an icon image
    point = point or bool(frame.geometry.geom_type.isin(["Point", "MultiPoint"]).any())
    marker = folium.CircleMarker(location=None, radius=6) if point else None
    return folium.GeoJson(data, name=html.escape(name), tooltip=tip, popup=pop, marker=marker,
                          overlay=overlay, show=show, control=control)


def _geom_family(frame) -> str:
    types = set(frame.geometry.geom_type.unique()) if len(frame) else set()
    if types <= {"Point", "MultiPoint"} and types:
        return "point"
    if types <= {"Polygon", "MultiPolygon"} and types:
        return "polygon"
    return "line"


def _need(name, frame, field):
    if field not in frame.columns:
        raise LayerError(f"{where(layer=name, field=field)}is missing; the map colours this layer by it")


# ------------------------------------------------------------------ legend
def _swatch(kind: str, colour: str, dash: bool = False) -> str:
    if kind == "line":
        style = f"border-top:{'3px dashed' if dash else '4px solid'} {colour}"
        return f'<span class="gr-sw gr-sw-line" style="{style}"></span>'
    if kind == "point":
        return f'<span class="gr-sw gr-sw-point" style="background:{colour}"></span>'
    return f'<span class="gr-sw gr-sw-fill" style="background:{colour}"></span>'


def _legend_section(layer_var: str | None, title: str, rows: list[tuple[str, str, bool]], kind: str,
                    shown: bool = True) -> str:
    items = "".join(f"<li>{_swatch(kind, c, d)}<span>{lab}</span></li>" for c, lab, d in rows)
    attr = (f' data-layer="{layer_var}"' if layer_var else "") + ("" if shown else ' style="display:none"')
    return f'<section class="gr-leg"{attr}><h3>{title}</h3><ul>{items}</ul></section>'


def _class_rows(classes, unit: str) -> list[tuple[str, str, bool]]:
    return [(c.colour, html.escape(f"{c.label} {unit}".strip()), False) for c in classes]


# ------------------------------------------------------------------ page furniture
_CSS = """
html, body {{ margin:0; padding:0; height:100%; font-family: system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }}
#{map_id} {{ position:absolute !important; top:0; left:0; right:0; bottom:34px; width:auto !important; height:auto !important; }}
.leaflet-container {{ background:{bg}; }}
.gr-title {{ position:fixed; top:10px; left:50%; transform:translateX(-50%); z-index:1000; background:#ffffffee;
  padding:4px 12px; border-radius:4px; font-size:15px; font-weight:600; color:#222; box-shadow:0 1px 4px #0004; max-width:50vw;
  white-space:nowrap; overflow:hidden; text-overflow:ellipsis; }}
.gr-caution {{ position:fixed; left:0; right:0; bottom:0; height:34px; z-index:1000; background:#2b2b2b; color:#fff;
  font-size:13px; line-height:34px; padding:0 12px; white-space:nowrap; overflow:hidden; text-overflow:ellipsis; }}
.gr-caution b {{ color:#f0e442; }}
.gr-legend {{ position:fixed; right:10px; bottom:44px; z-index:1000; background:#ffffffee; padding:6px 10px;
  border-radius:4px; box-shadow:0 1px 4px #0004; font-size:12px; max-height:60vh; overflow-y:auto; min-width:170px;
  max-width:250px; color:#222; }}
.gr-legend h2 {{ font-size:13px; margin:2px 0 4px; }}
.gr-leg h3 {{ font-size:12px; margin:6px 0 2px; font-weight:600; }}
.gr-leg ul {{ list-style:none; margin:0; padding:0; }}
.gr-leg li {{ display:flex; align-items:center; gap:6px; margin:1px 0; }}
.gr-sw {{ display:inline-block; flex:none; }}
.gr-sw-line {{ width:22px; height:0; }}
.gr-sw-fill {{ width:18px; height:12px; opacity:0.8; border:1px solid #1e1e1e55; }}
.gr-sw-point {{ width:11px; height:11px; border-radius:50%; border:1px solid #1e1e1e; }}
.gr-rank {{ background:#ffffff; border:2px solid #1e1e1e; border-radius:50%; font:bold 12px sans-serif; color:#1e1e1e;
  text-align:center; line-height:18px; width:18px !important; height:18px !important; }}
.gr-tip table, .gr-pop table {{ border-collapse:collapse; }}
.gr-tip th, .gr-pop th {{ text-align:left; padding:1px 8px 1px 0; color:#444; font-weight:600; }}
.gr-pop td {{ max-width:240px; overflow-wrap:anywhere; }}
"""


def _page_parts(map_id: str, title: str, caution: str, legend_sections: list[str], script: str):
    """Our own head (style), body (title, legend, caution) and closing script, as HTML text."""
    head = "<style>" + _CSS.format(map_id=map_id, bg=P.BACKGROUND) + "</style>\n"
    body = (
        f'<div class="gr-title" role="heading" aria-level="1">{html.escape(title)}</div>\n'
        f'<div class="gr-legend" role="complementary" aria-label="Legend"><h2>Legend</h2>{"".join(legend_sections)}</div>\n'
        f'<div class="gr-caution" role="note"><b>Caution:</b> {html.escape(caution)}</div>\n'
    )
    return head, body, f"<script>\n{script}\n</script>\n"


def _json_for_script(obj) -> str:
    """JSON safe to put inside a <script> element."""
    return (json.dumps(obj, ensure_ascii=False, separators=(",", ":"))
            .replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))


# ------------------------------------------------------------------ the map
def render_map(*, edges=None, hubs=None, bands=None, weak=None, diameter=None, issues=None,
               comparison: Comparison | None = None, caution: str = CAUTION, basemap: bool = False,
               title: str = "geo-reach: connectivity map") -> str:
    """Build the map page and return it as text (see :func:`write_map` for the parameters)."""
    import folium

    if edges is not None and comparison is not None:
        raise OptionError("give either edges or a comparison (whose before and after networks replace it), not both")
    if not caution or not str(caution).strip():
        raise OptionError("the caution line must not be empty")
    given = {"edges": edges, "hubs": hubs, "reach_bands": bands, "weak_regions": weak, "diameter": diameter,
             "issues": issues}
    if comparison is not None:
        given.update({"before": comparison.before, "after": comparison.after, "change": comparison.change})
    frames = {k: _to_wgs84(k, v) for k, v in given.items() if v is not None}
    frames = {k: v for k, v in frames.items() if len(v)}
    if not frames:
        raise OptionError("nothing to draw: every layer given is empty or missing")

    import pandas as pd

    # frame the layers shown at first (bands start hidden when a network is drawn over them)
    framed = [f for k, f in frames.items() if k != "reach_bands" or not ({"edges", "after"} & set(frames))]
    bounds = np.array([f.total_bounds for f in (framed or list(frames.values()))])
    west, south = bounds[:, 0].min(), bounds[:, 1].min()
    east, north = bounds[:, 2].max(), bounds[:, 3].max()
    n_feat = sum(len(f) for f in frames.values())

    legend: list[str] = []
    toggles: dict[str, str] = {}
    extra_js: list[str] = []

    with _numbered_ids():
        fmap = folium.Map(location=[(south + north) / 2, (west + east) / 2], zoom_start=11, tiles=None,
                          control_scale=True, prefer_canvas=n_feat > 4000, font_size="13px")
        fmap.default_js = []
        fmap.default_css = []
        root = fmap.get_root()
        root.title = html.escape(str(title))  # folium puts it in <title> unescaped
        root.header.add_child(folium.Element(_PLACE_HEAD), name="geo_reach_head")
        root.html.add_child(folium.Element(_PLACE_BODY), name="geo_reach_body")
        if basemap:
            folium.TileLayer("OpenStreetMap", name="Basemap (needs internet)", overlay=True, control=True,
                             show=True).add_to(fmap)

        # reach bands (bottom)
        if "reach_bands" in frames:
            f = frames["reach_bands"]
            _need("reach_bands", f, "band_minutes")
            classes = P.band_classes(f["band_minutes"])
            cols = P.band_colour(f["band_minutes"], classes)
            styles = [{"color": c, "weight": 0.6, "fillColor": c, "fillOpacity": 0.3, "opacity": 0.8} for c in cols]
            # bands and the network share the cost scale: show bands at first only when there is no network
            bands_shown = "edges" not in frames and "after" not in frames
            lay = _geojson_layer(f, styles, ["band_minutes"], _fields(f, ["band_minutes", "area_km2", "population"]),
                                 "Reach bands", show=bands_shown).add_to(fmap)
            legend.append(_legend_section(lay.get_name(), "Reach bands (minutes to nearest hub)",
                                          _class_rows(classes, "min"), "polygon", shown=bands_shown))
            toggles[lay.get_name()] = lay.get_name()

        # weak regions, with rank labels
        if "weak_regions" in frames:
            f = frames["weak_regions"]
            _need("weak_regions", f, "reason")
            if "rank" in f.columns:
                f = f.sort_values("rank", kind="stable")
            colours = P.category_colours(f["reason"])
            cols = [colours.get(str(r), P.NO_VALUE) if not _is_missing(r) else P.NO_VALUE for r in f["reason"]]
            styles = [{"color": P.OUTLINE, "weight": 2, "dashArray": "6 4", "fillColor": c, "fillOpacity": 0.45}
                      for c in cols]
            group = folium.FeatureGroup(name="Weak regions (ranked)").add_to(fmap)
            _geojson_layer(f, styles, [c for c in ("rank", "reason", "population") if c in f.columns],
                           _fields(f, ["rank", "reason", "population", "area_km2", "hub_minutes", "name"]),
                           "Weak regions", control=False).add_to(group)
            if "rank" in f.columns:
                pts = f.geometry.representative_point()
                labels = [[round(p.y, 6), round(p.x, 6), _esc(_fmt("rank", r), 6)]
                          for p, r in zip(pts, f["rank"]) if not _is_missing(r)]
                extra_js.append(
                    f"{_json_for_script(labels)}.forEach(function (r) {{ L.marker([r[0], r[1]], {{icon: L.divIcon("
                    f"{{className: 'gr-rank', html: r[2], iconSize: [22, 22]}}), interactive: false, keyboard: false}})"
                    f".addTo({group.get_name()}); }});")
            rows = [(c, html.escape(_shorten(k, 40)), False) for k, c in colours.items() if c != P.NO_VALUE]
            if any(c == P.NO_VALUE for c in colours.values()):
                rows.append((P.NO_VALUE, "other reasons", False))
            title_ = "Weak regions by reason" + (" (number: rank, 1 = weakest)" if "rank" in f.columns else "")
            legend.append(_legend_section(group.get_name(), title_, rows, "polygon"))
            toggles[group.get_name()] = group.get_name()

        # the network by cost to the nearest hub, or before/after views
        def network(frame, name, classes, overlay, show):
            _need(name, frame, "hub_minutes")
            cols = P.colour_of(frame["hub_minutes"], classes)
            miss = frame["hub_minutes"].isna().to_numpy()
            styles = [{"color": c, "weight": 1.5 if m else 3, "opacity": 0.95, **({"dashArray": "4 4"} if m else {})}
                      for c, m in zip(cols, miss)]
            tips = [c for c in ("hub_minutes", "mode", "name") if c in frame.columns]
            return _geojson_layer(frame, styles, tips,
                                  _fields(frame, ["hub_minutes", "minutes", "length_m", "mode", "name", "edge_id"]),
                                  name, overlay=overlay, show=show)

        net_layers = []
        if "edges" in frames:
            f = frames["edges"]
            _need("edges", f, "hub_minutes")
            classes = P.cost_classes(f["hub_minutes"])
            lay = network(f, "Network: minutes to nearest hub", classes, True, True).add_to(fmap)
            net_layers.append(lay)
            has_missing = bool(f["hub_minutes"].isna().any())
        elif comparison is not None and ("before" in frames or "after" in frames):
            both = pd.concat([frames[k]["hub_minutes"] for k in ("before", "after") if k in frames])
            classes = P.cost_classes(both)
            has_missing = bool(both.isna().any())
            for key, label, show in (("before", comparison.before_label, False),
                                     ("after", comparison.after_label, True)):
                if key in frames:
                    lay = network(frames[key], f"{label}: network, minutes to nearest hub", classes, False, show)
                    net_layers.append(lay.add_to(fmap))
        if net_layers:
            rows = _class_rows(classes, "min")
            if has_missing:
                rows.append((P.NO_VALUE, "no route to a hub", True))
            legend.insert(0, _legend_section(net_layers[0].get_name() if comparison is None else None,
                                             "Network: minutes to nearest hub", rows, "line"))
            if comparison is None:
                toggles[net_layers[0].get_name()] = net_layers[0].get_name()

        # change layer
        if "change" in frames:
            f = frames["change"]
            _need("change", f, "delta_minutes")
            classes = P.change_classes(f["delta_minutes"])
            cols = P.colour_of(f["delta_minutes"], classes)
            fam = _geom_family(f)
            miss = f["delta_minutes"].isna().to_numpy()
            if fam == "polygon":
                styles = [{"color": c, "weight": 0.3, "fillColor": c, "fillOpacity": 0.7} for c in cols]
            elif fam == "point":
                styles = [{"color": P.OUTLINE, "weight": 1, "fill": True, "fillColor": c, "fillOpacity": 0.95,
                           "radius": 6} for c in cols]
            else:
                styles = [{"color": c, "weight": 2 if m else 4, "opacity": 0.95, **({"dashArray": "4 4"} if m else {})}
                          for c, m in zip(cols, miss)]
            lay = _geojson_layer(f, styles, ["delta_minutes"],
                                 _fields(f, ["delta_minutes", "mode", "name", "edge_id"]),
                                 "Change (after \u2212 before)").add_to(fmap)
            rows = _class_rows(classes, "min")
            rows[0] = (rows[0][0], rows[0][1] + " (faster)", False)
            rows[-1] = (rows[-1][0], rows[-1][1] + " (slower)", False)
            if miss.any():
                rows.append((P.NO_VALUE, "no value before or after (new, closed or unreachable)", True))
            legend.append(_legend_section(lay.get_name(), "Change in minutes (after \u2212 before)", rows, fam))
            toggles[lay.get_name()] = lay.get_name()

        # diameter path
        if "diameter" in frames:
            f = frames["diameter"]
            styles = [{"color": P.PATH_COLOUR, "weight": 5, "opacity": 0.9, "dashArray": "10 6"}] * len(f)
            lay = _geojson_layer(f, styles, [c for c in ("minutes", "length_m") if c in f.columns],
                                 _fields(f, ["minutes", "length_m", "from_node", "to_node"]),
                                 "Diameter path (longest shortest trip)").add_to(fmap)
            legend.append(_legend_section(lay.get_name(), "Diameter path", [(P.PATH_COLOUR, "longest shortest trip", True)],
                                          "line"))
            toggles[lay.get_name()] = lay.get_name()

        # network issues
        if "issues" in frames:
            f = frames["issues"]
            fam = _geom_family(f)
            if fam == "point":
                styles = [{"color": P.OUTLINE, "weight": 1, "fill": True, "fillColor": P.ISSUE_COLOUR,
                           "fillOpacity": 0.9, "radius": 4.5}] * len(f)
            else:
                styles = [{"color": P.ISSUE_COLOUR, "weight": 4, "opacity": 0.9, "fillColor": P.ISSUE_COLOUR,
                           "fillOpacity": 0.4}] * len(f)
            tips = [c for c in ("issue", "kind", "detail") if c in f.columns][:2]
            lay = _geojson_layer(f, styles, tips, _fields(f, ["issue", "kind", "detail"]), "Network issues",
                                 point=fam == "point").add_to(fmap)
            legend.append(_legend_section(lay.get_name(), "Network issues", [(P.ISSUE_COLOUR, "issue found", False)],
                                          fam if fam != "polygon" else "polygon"))
            toggles[lay.get_name()] = lay.get_name()

        # hubs (top)
        if "hubs" in frames:
            f = frames["hubs"]
            kinds = f["kind"] if "kind" in f.columns else pd.Series(["hub"] * len(f), index=f.index)
            colours = P.category_colours(kinds)
            styles = [{"color": P.OUTLINE, "weight": 1.5, "fill": True, "fillColor": colours.get(str(k), P.NO_VALUE),
                       "fillOpacity": 0.95, "radius": 7} for k in kinds]
            tips = [c for c in ("name", "kind") if c in f.columns]
            lay = _geojson_layer(f, styles, tips, _fields(f, ["name", "kind", "hub_id"]), "Hubs",
                                 point=True).add_to(fmap)
            rows = [(c, html.escape(_shorten(k, 40)), False) for k, c in colours.items() if c != P.NO_VALUE]
            if any(c == P.NO_VALUE for c in colours.values()):
                rows.append((P.NO_VALUE, "other kinds", False))
            legend.append(_legend_section(lay.get_name(), "Hubs by kind", rows, "point"))
            toggles[lay.get_name()] = lay.get_name()

        folium.LayerControl(collapsed=False, position="topright").add_to(fmap)
        # keep the features clear of the legend and layer list on the right and the title on top
        fmap.fit_bounds([[south, west], [north, east]], padding_top_left=(50, 60), padding_bottom_right=(300, 50))

        map_id = fmap.get_name()
        layer_map = "{" + ",".join(f"{json.dumps(k)}:{v}" for k, v in toggles.items()) + "}"
        # drawing order = the order layers were added; a layer switched back on would land on top
        stack = [c.get_name() for c in fmap._children.values()
                 if isinstance(c, (folium.GeoJson, folium.FeatureGroup))]
        extra_js.append(
            "(function () {\n"
            f"  var map = {map_id}, layers = {layer_map}, stack = [{', '.join(stack)}];\n"
            "  function restack() {\n"
            "    stack.forEach(function (l) { if (map.hasLayer(l) && l.bringToFront) { l.bringToFront(); } });\n"
            "  }\n"
            "  map.on('overlayadd baselayerchange', restack);\n"
            "  function show(layer, on) {\n"
            "    for (var k in layers) { if (layers[k] === layer) {\n"
            "      var s = document.querySelector('.gr-leg[data-layer=\"' + k + '\"]');\n"
            "      if (s) { s.style.display = on ? '' : 'none'; } } }\n"
            "  }\n"
            "  map.on('overlayadd', function (e) { show(e.layer, true); });\n"
            "  map.on('overlayremove', function (e) { show(e.layer, false); });\n"
            "})();")
        page = root.render()

    head, body, script = _page_parts(map_id, str(title), str(caution), legend, "\n".join(extra_js))
    if page.count(_PLACE_HEAD) != 1 or page.count(_PLACE_BODY) != 1:
        raise GeoReachError("map page template changed: placeholders not found once each")
    page = page.replace(_PLACE_HEAD, _leaflet_inline() + head, 1)
    page = page.replace(_PLACE_BODY, body, 1)
    # our script must run after folium's, which defines the map and layers at the end of the page
    tail = "</script>\n</html>"
    cut = page.rstrip().rfind(tail)
    if cut < 0:
        raise GeoReachError("map page template changed: closing script not found")
    page = page[:cut] + "</script>\n" + script + "</html>\n"
    if not basemap:
        ext = external_references(page)
        if ext:
            raise GeoReachError(f"map page would load {ext[0]} from the network; it must work offline")
    return page


def write_map(path, *, edges=None, hubs=None, bands=None, weak=None, diameter=None, issues=None,
              comparison: Comparison | None = None, caution: str = CAUTION, basemap: bool = False,
              title: str = "geo-reach: connectivity map", overwrite: bool = False) -> Path:
    """Write a self-contained HTML map of the results, atomically.

    Parameters
    ----------
    path : str or Path
        The ``.html`` file to write.
    edges : GeoDataFrame of lines, optional
        The network with ``hub_minutes`` (minutes to the nearest hub; NaN = no
        route); coloured on the cost scale.  Not together with ``comparison``.
    hubs : GeoDataFrame of points, optional
        With ``kind`` (colour) and ``name`` (tooltip).
    bands : GeoDataFrame of polygons, optional
        Reach bands with ``band_minutes`` (upper bound of each band, minutes).
    weak : GeoDataFrame of polygons, optional
        Weak regions with ``reason`` (colour), ``rank`` (label, 1 = weakest)
        and ``population`` (popup).
    diameter : GeoDataFrame of lines, optional
        The diameter path (``minutes``, ``length_m``).
    issues : GeoDataFrame, optional
        Network issues (points or lines; ``issue``, ``detail``).
    comparison : Comparison, optional
        Before and after networks (a switch between the two views, on one
        colour scale) and the change layer (``delta_minutes``).
    caution : str
        The caution line shown along the bottom of the map.
    basemap : bool
        Add an OpenStreetMap basemap layer (needs the internet; off by default).
    title : str
        Shown at the top of the map and as the page title.
    overwrite : bool
        Replace an existing file.

    Every layer may be in any CRS (each must have one); the map draws them in
    EPSG:4326.  Any other fields of a layer are listed in its popups.

    Returns
    -------
    Path

    Raises
    ------
    OptionError
        Nothing to draw, both ``edges`` and ``comparison``, empty caution, not ``.html``.
    CRSError
        A layer without a CRS.
    LayerError
        A layer lacks the field it is coloured by.
    OutputExistsError, OutputError
        As :func:`geo_reach.export.atomic.check_output`.
    """
    path = Path(path)
    if path.suffix.lower() not in (".html", ".htm"):
        raise OptionError(f"{where(path)}an HTML map file name must end in .html; choose another name")
    check_output(path, overwrite, "map")
    page = render_map(edges=edges, hubs=hubs, bands=bands, weak=weak, diameter=diameter, issues=issues,
                      comparison=comparison, caution=caution, basemap=basemap, title=title)
    with atomic_path(path) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return path

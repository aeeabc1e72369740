"""The page: a fixed HTML skeleton, the vendored Leaflet, our own static script and style, and the data.

The page is put together by plain concatenation of fixed parts; no template
engine is involved anywhere.  The only part that depends on the study is the
data, which sits in ``<script type="application/json" id="gr-data">`` as JSON
whose ``<``, ``>``, ``&``, U+2028 and U+2029 are escaped (it can end no
element and is never run).  Our script (``assets/georeach-map.js``) reads it
with ``JSON.parse`` and puts every text on screen as a text node.

Everything is inside the one file, so the map works with no network access;
only the optional basemap loads tiles from the internet.
"""

from __future__ import annotations

import base64
import re
from functools import lru_cache
from importlib import resources
from pathlib import Path

from ...errors import GeoReachError, OptionError, where
from ..atomic import atomic_path, check_output
from .build import page_data
from .contract import MapInput
from .encode import json_for_script

__all__ = ["render_map", "write_map", "external_references", "BASEMAP"]

#: The optional basemap (needs the internet): tile URL and attribution.
BASEMAP = {"url": "https://tile.openstreetmap.org/{z}/{x}/{y}.png",
           "attribution": "\u00a9 OpenStreetMap contributors"}

_HEAD = ('<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
         '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
         '<title>geo-reach map</title>\n')
_BODY = ('</head>\n<body>\n'
         '<header id="gr-title" role="heading" aria-level="1"></header>\n'
         '<div id="gr-map" role="region" aria-label="Map"></div>\n'
         '<aside id="gr-panel" aria-label="Views, layers and legend"></aside>\n'
         '<footer id="gr-caution" role="note"><b>Caution:</b> <span id="gr-caution-text"></span></footer>\n'
         '<noscript><p>This map needs JavaScript switched on.</p></noscript>\n')


def _asset(name: str) -> str:
    return resources.files("geo_reach.export").joinpath("assets", name).read_bytes().decode("utf-8")


def _png(name: str) -> bytes:
    return resources.files("geo_reach.export").joinpath("assets", name).read_bytes()


@lru_cache(maxsize=1)
def _static() -> tuple[str, str]:
    """The fixed style and script parts (Leaflet and ours), checked to hold no closing tag."""
    css = _asset("leaflet.css")
    css = re.sub(r"url\(images/([a-z0-9-]+\.png)\)",
                 lambda m: "url(data:image/png;base64," + base64.b64encode(_png(m.group(1))).decode("ascii") + ")",
                 css)
    ours_css = _asset("georeach-map.css")
    js, ours_js = _asset("leaflet.js"), _asset("georeach-map.js")
    for text in (css, ours_css, js, ours_js):
        low = text.lower()
        if "</script" in low or "</style" in low or "<!--" in low:
            raise GeoReachError("a page asset holds a closing tag or comment opener; it cannot be inlined")
    style = f"<style>\n{css}\n</style>\n<style>\n{ours_css}</style>\n"
    return style, f"<script>\n{js}\n</script>\n<script>\n{ours_js}</script>\n"


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


def render_map(m: MapInput) -> str:
    """The map page for ``m`` as text (see :class:`~.contract.MapInput`).

    Raises
    ------
    OptionError, LayerError, CRSError
        As :meth:`MapInput.check`.
    """
    if not isinstance(m, MapInput):
        raise OptionError(f"render_map takes a MapInput, not {type(m).__name__}")
    data = page_data(m)
    if m.basemap:
        data["basemap"] = dict(BASEMAP)
    style, script = _static()
    page = (_HEAD + style + _BODY
            + '<script type="application/json" id="gr-data">' + json_for_script(data) + "</script>\n"
            + script + "</body>\n</html>\n")
    if not m.basemap:
        ext = external_references(page)
        if ext:  # pragma: no cover - the page is built from fixed parts
            raise GeoReachError(f"map page would load {ext[0]} from the network; it must work offline")
    return page


def write_map(path, m: MapInput, overwrite: bool = False) -> Path:
    """Write the map page for ``m`` to ``path`` (``.html``), atomically.

    Parameters
    ----------
    path : str or Path
    m : MapInput
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    Path

    Raises
    ------
    OptionError
        Not ``.html``, or as :meth:`MapInput.check`.
    OutputExistsError, OutputError
        As :func:`geo_reach.export.atomic.check_output`.
    """
    path = Path(path)
    if path.suffix.lower() not in (".html", ".htm"):
        raise OptionError(f"{where(path)}an HTML map file name must end in .html; choose another name")
    check_output(path, overwrite, "map")
    page = render_map(m)
    with atomic_path(path) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return path

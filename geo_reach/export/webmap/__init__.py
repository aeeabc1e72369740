"""The self-contained HTML map (Leaflet, offline), safe by construction.

Give a :class:`MapInput` (today's layers and one :class:`ScenarioView` per
scenario) to :func:`write_map`.  The page is fixed HTML, the vendored Leaflet
and our own static script and style (``export/assets/``), plus the study's
data as escaped JSON: no text from the data ever passes through a template
engine or becomes markup.  See :mod:`.contract` for the fields each layer is
read for, :mod:`.encode` for how geometry travels, :mod:`.build` for what is
drawn and :mod:`.page` for how the page is put together.
"""

from .build import page_data
from .contract import FIELDS, MapInput, NetworkLayer, ScenarioView
from .encode import MAP_PIXELS, json_for_script
from .page import BASEMAP, external_references, render_map, write_map

__all__ = ["MapInput", "NetworkLayer", "ScenarioView", "FIELDS", "render_map", "write_map", "page_data",
           "external_references", "json_for_script", "MAP_PIXELS", "BASEMAP"]

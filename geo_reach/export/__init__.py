"""Writers of everything the tool puts on disk: GeoPackage layers, cloud-optimised GeoTIFFs,
SLD style files and the offline HTML map.  All write atomically (see :mod:`.atomic`)."""

from .atomic import atomic_dir, atomic_path, check_output
from .gpkg import write_layers
from .webmap import MapInput, NetworkLayer, ScenarioView, render_map, write_map
from .raster import cog_problems, write_cog
from .styles import sld_for, style_path, write_styles

__all__ = [
    "atomic_dir", "atomic_path", "check_output",
    "write_layers",
    "write_cog", "cog_problems",
    "write_styles", "sld_for", "style_path",
    "write_map", "render_map", "MapInput", "NetworkLayer", "ScenarioView",
]

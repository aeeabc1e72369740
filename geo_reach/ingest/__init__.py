"""Reading the user's inputs: vector layers, point layers and rasters, validated and reprojected."""

from .layers import LayerRef, list_layers, parse_layer_ref, read_frame, read_layer
from .points import Points, read_points
from .rasters import Grid, read_raster, resample_to_grid

__all__ = ["LayerRef", "list_layers", "parse_layer_ref", "read_frame", "read_layer", "Points", "read_points",
           "Grid", "read_raster", "resample_to_grid"]

"""Reading the user's inputs: vector layers, point layers and rasters, validated and reprojected."""

#: Public name -> the module that defines it (imported on first use, so start-up stays fast).
_API = {
    "LayerRef": ".layers",
    "list_layers": ".layers",
    "parse_layer_ref": ".layers",
    "read_frame": ".layers",
    "read_layer": ".layers",
    "Points": ".points",
    "read_points": ".points",
    "Grid": ".rasters",
    "read_raster": ".rasters",
    "resample_to_grid": ".rasters",
}

__all__ = list(_API)


def __getattr__(name):
    if name in _API:
        import importlib

        value = getattr(importlib.import_module(_API[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_API))

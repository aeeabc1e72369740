"""Write a built network (edges, nodes, network_issues) to one GeoPackage, atomically."""

from __future__ import annotations

__all__ = ["write_network", "write_layers_atomic"]


def write_layers_atomic(path, layers: dict, overwrite: bool = False):
    """Write ``{name: GeoDataFrame}`` into one new GeoPackage via a temporary file.

    Delegates to :func:`geo_reach.export.gpkg.write_layers` when present (it
    adds the standard checks); falls back to plain pyogrio.
    """
    try:
        from ..export.gpkg import write_layers
    except ImportError:  # exporter not installed yet in this checkout
        write_layers = None
    if write_layers is not None:
        return write_layers(path, layers, overwrite=overwrite, descriptions=_descriptions(layers))
    import pyogrio

    from ..export.atomic import atomic_path, check_output

    check_output(path, overwrite)
    with atomic_path(path) as tmp:
        for name, frame in layers.items():
            pyogrio.write_dataframe(frame, tmp, layer=name, driver="GPKG", append=tmp.exists())
    return path


def write_network(path, result, overwrite: bool = False, extra_layers: dict | None = None):
    """Write ``edges``, ``nodes`` and ``network_issues`` of a :class:`BuildResult`."""
    layers = {"edges": result.network.edges_frame(), "nodes": result.network.nodes_frame(),
              "network_issues": result.issues}
    layers.update(extra_layers or {})
    return write_layers_atomic(path, layers, overwrite=overwrite)


def _descriptions(layers):
    from .. import CAUTION

    return {k: CAUTION for k in layers}

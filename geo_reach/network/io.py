"""Read a network GeoPackage written by ``geo-reach build`` (layers ``edges`` and ``nodes``).

Reading a built network is the network layer's job: the checks here are what
make a file routable (the layers exist, node ids are rows, cost fields hold
numbers, and the weight asked for has values).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from pandas.api.types import is_numeric_dtype

from ..errors import InputError, LayerError, MissingInputError, where
from ..ingest.layers import exists, list_layers, read_frame
from .model import EDGE_FIELDS, NODE_FIELDS, OLD_NODE_FIELDS, Network
from .weights import Weight, as_weight

__all__ = ["read_network"]

#: Edge fields that must hold numbers (or be empty) for the network to be routable.
_NUMERIC = ("length_m", "minutes", "latency_ms")


def read_network(path, weight: Weight | str | None = None, notes: list | None = None) -> Network:
    """Read a built network and, when ``weight`` is given, check it can be routed on it.

    Parameters
    ----------
    path : str or Path
        A GeoPackage with layers ``edges`` and ``nodes`` (from ``geo-reach build``).
    weight : Weight or str, optional
        The routing weight; its field must exist and hold at least one value.
    notes : list, optional
        What was read compatibly is appended here, one line each (a network
        written by an earlier version names the nodes' ``joinable`` flag
        ``entry``: it is read as ``joinable`` and said so).

    Returns
    -------
    Network

    Raises
    ------
    MissingInputError
        The file, a layer or the weight's field does not exist.
    LayerError
        A layer is empty or a cost field holds text.
    InputError
        Inconsistent layers or negative costs.
    """
    path = Path(path)
    if not exists(path):    # a file, or NAME.parquet standing for NAME.edges.parquet ... (build -o NAME.parquet)
        raise MissingInputError(f"file '{path}': not found; give the GeoPackage written by geo-reach build")
    if path.is_dir():
        raise InputError(f"file '{path}': is a folder; give the network GeoPackage written by geo-reach build")
    names = list_layers(path)
    for need in ("edges", "nodes"):
        if need not in names:
            raise InputError(f"file '{path}': has no layer '{need}' (layers: {', '.join(names) or 'none'}); "
                             "give the GeoPackage written by geo-reach build")
    edges = read_frame(path, "edges")
    nodes = read_frame(path, "nodes")
    if len(nodes) == 0 and len(edges) > 0:
        raise LayerError(f"{where(path, 'nodes')}the layer is empty but 'edges' has {len(edges)} features; "
                         "rebuild the network with geo-reach build")
    for old, new in OLD_NODE_FIELDS.items():
        if old in nodes.columns and new not in nodes.columns:
            nodes = nodes.rename(columns={old: new})
            if notes is not None:
                notes.append(f"{where(path, 'nodes', field=old)}read as '{new}' (earlier versions' name for the "
                             "same flag); rebuild the network with geo-reach build to write today's name")
    if len(edges) == 0:
        raise LayerError(f"{where(path, 'edges')}the layer is empty: there is no network to route on; "
                         "rebuild it from line layers with geo-reach build")
    for name in _NUMERIC:
        if name in edges.columns and not is_numeric_dtype(edges[name].dtype):   # object or (arrow) string
            col = edges[name]
            bad = col[col.notna() & ~col.map(lambda v: isinstance(v, (int, float)))]
            if len(bad):
                fid = bad.index[0]
                raise LayerError(f"{where(path, 'edges', fid, name)}value {bad.iloc[0]!r} is not a number; "
                                 f"the field must hold numbers (empty where the mode has none); rebuild the "
                                 "network with geo-reach build")
    try:
        net = Network.from_frames(edges, nodes)
    except InputError as err:
        raise err.with_message(f"file '{path}', {err}") from err
    if weight is None:
        return net
    weight = as_weight(weight)
    if weight.edge_field is not None:
        if weight.edge_field not in edges.columns:
            fields = [c for c in edges.columns if c != edges.geometry.name]
            raise MissingInputError(f"{where(path, 'edges')}has no field '{weight.edge_field}' for weight "
                                    f"{weight.name} (fields: {', '.join(map(str, fields))}); choose another "
                                    "weight or rebuild the network", key="weight")
        if np.isnan(net.cost(weight)).all():
            raise InputError(f"{where(path, 'edges', field=weight.edge_field)}no edge has a value; "
                             "choose another weight", key="weight")
    return net


assert set(_NUMERIC) <= set(EDGE_FIELDS)
assert set(OLD_NODE_FIELDS.values()) <= set(NODE_FIELDS)

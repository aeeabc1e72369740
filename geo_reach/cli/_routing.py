"""Options and input handling shared by the routing commands (access, route, od, metrics, profile).

One text per recurring option, one loader for the network (checking the
weight's column is there), one reader for point layers (hubs, origins,
destinations) with their ids and kinds.
"""

from __future__ import annotations

from ..analysis.access import kind_name  # noqa: F401  (re-exported for the CLI modules)

import json
import sys
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, LayerError, MissingInputError, OptionError, where
from ..network.model import WEIGHTS

__all__ = ["add_weight", "add_direction", "add_access", "load_network", "read_points", "Points", "note",
           "dump_json", "cost_field", "kind_name"]

WEIGHT_HELP = ("cost each edge counts: minutes, length_m, latency_ms or hops (1 per link); "
               "edges with no value for it are left out and counted (default minutes)")


def add_weight(p):
    p.add_argument("--weight", choices=WEIGHTS, default="minutes", help=WEIGHT_HELP)


def add_direction(p):
    p.add_argument("--direction", choices=["to-hub", "from-hub"], default="to-hub",
                   help="to-hub: the trip from a place to its hub (default); from-hub: the trip from the hub")


def add_access(p):
    p.add_argument("--max-access-m", type=float, default=5000.0, metavar="M",
                   help="points farther than this from the network are reported and left out (default 5000)")
    p.add_argument("--walk-kmh", type=float, default=5.0, metavar="KMH",
                   help="off-network speed of the access leg, km/h (default 5, common practice for walking)")


def note(msg: str) -> None:
    """One report line on stderr."""
    print(f"geo-reach: {msg}", file=sys.stderr)


def _json_default(o):
    if isinstance(o, np.integer):
        return int(o)
    if isinstance(o, np.floating):
        return float(o) if np.isfinite(o) else None
    if isinstance(o, np.ndarray):
        return o.tolist()
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")


def clean(obj):
    """Replace non-finite floats by None, recursively (JSON has no inf/NaN)."""
    if isinstance(obj, dict):
        return {k: clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean(v) for v in obj]
    if isinstance(obj, (float, np.floating)):
        return float(obj) if np.isfinite(obj) else None
    if isinstance(obj, np.integer):
        return int(obj)
    return obj


def dump_json(obj) -> str:
    return json.dumps(clean(obj), indent=2, default=_json_default)


def cost_field(weight: str) -> str:
    """The field suffix for a weight: minutes, length_m, hops, latency_ms."""
    return weight


def load_network(path, weight: str):
    """Read a network GeoPackage and check it can be routed on ``weight``.

    Raises
    ------
    InputError
        Missing file or layers, negative costs (from :meth:`Network.read`), the
        weight's column missing from layer ``edges``, or no edge with a value.
    """
    import pyogrio

    from ..network.model import Network

    net = Network.read(path)
    if weight != "hops":
        fields = [str(f) for f in pyogrio.read_info(path, layer="edges")["fields"]]
        if weight not in fields:
            raise MissingInputError(f"{where(path, 'edges')}has no field '{weight}' for --weight {weight} "
                                    f"(fields: {', '.join(fields)}); choose another --weight or rebuild the network")
        if net.n_edges and np.isnan(net.cost(weight)).all():
            raise InputError(f"{where(path, 'edges', field=weight)}no edge has a value; "
                             "choose another --weight")
    return net


@dataclass
class Points:
    """Points read from a layer, in the network's CRS."""

    xy: np.ndarray          # (p, 2), working CRS
    ids: np.ndarray         # (p,) object: id per point
    kinds: np.ndarray | None  # (p,) object, or None
    label: str              # for messages
    src_crs: object


def read_points(ref, network, *, id_field=None, kind_field=None, what="hubs", id_option="--hub-id-field") -> Points:
    """Read a point layer (hubs, origins, destinations), reprojected to the network's CRS.

    Ids: the ``id_field`` values (duplicates refused), else the row number
    from 1.  Multi-points become one point per part sharing the id.  Features
    without geometry are reported and left out.
    """
    from ..ingest.layers import parse_layer_ref, read_layer

    ref = parse_layer_ref(ref)
    gdf = read_layer(ref, expect="points")
    loc = where(ref.path, ref.layer)
    row_ids = np.arange(1, len(gdf) + 1, dtype=np.int64)
    if id_field is not None:
        if id_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{id_field}' for the {what} ids "
                                    f"(fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))}); "
                                    f"check {id_option}")
        col = gdf[id_field]
        if col.isna().any():
            fid = gdf.index[col.isna().to_numpy()][0]
            raise LayerError(f"{where(ref.path, ref.layer, fid, id_field)}has no id; give every feature an id")
        dup = col[col.duplicated(keep=False)]
        if len(dup):
            fids = list(gdf.index[col.duplicated(keep=False).to_numpy()][:2])
            raise LayerError(f"{where(ref.path, ref.layer, field=id_field)}id {dup.iloc[0]!r} is used by "
                             f"features {fids[0]} and {fids[1]}; ids must be unique")
        ids = col.to_numpy(object)
    else:
        ids = row_ids.astype(object)
    kinds = None
    if kind_field is not None:
        if kind_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{kind_field}' for the hub kinds "
                                    f"(fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))}); "
                                    "check --hub-kind-field")
        kinds = gdf[kind_field].to_numpy(object)
    geom = gdf.geometry
    empty = (geom.isna() | geom.is_empty).to_numpy().copy()
    if kinds is not None:
        nokind = np.array([k is None or (isinstance(k, float) and np.isnan(k)) for k in kinds])
        if nokind.any():
            note(f"{loc}{int(nokind.sum())} {what} without a kind in '{kind_field}' are left out "
                 f"(first: id {ids[nokind][0]})")
        empty |= nokind
    if empty.any():
        note(f"{loc}{int(empty.sum())} {what} without a point are left out (first: id {ids[empty][0]})")
    gdf = gdf.loc[~empty]
    ids = ids[~empty]
    kinds = kinds[~empty] if kinds is not None else None
    if len(gdf) == 0:
        raise LayerError(f"{loc}no {what} with a point are left; give a layer of points")
    src_crs = gdf.crs
    gdf = gdf.to_crs(network.crs)
    # one point per part
    import shapely

    parts = shapely.get_parts(gdf.geometry.values, return_index=True)
    pts, owner = parts
    xy = shapely.get_coordinates(pts)
    return Points(xy, ids[owner], kinds[owner] if kinds is not None else None, loc, src_crs)


def report_left_out(att, ids, what: str, max_access_m: float) -> int:
    """Report the points farther than ``max_access_m`` from the network; return how many."""
    out = ~att.attached
    k = int(out.sum())
    if k:
        first = np.nonzero(out)[0][:3]
        sample = ", ".join(f"id {ids[i]} ({att.access_m[i]:,.0f} m)" if np.isfinite(att.access_m[i])
                           else f"id {ids[i]} (no network to join)" for i in first)
        note(f"{k} {what} farther than --max-access-m {max_access_m:g} m from the network are left out: "
             f"{sample}{' ...' if k > 3 else ''}")
    return k


def report_excluded(net, weight: str) -> int:
    from ..analysis.routing import excluded_edges

    k = excluded_edges(net, weight)
    if k:
        note(f"{k} of {net.n_edges} edges have no {weight} value and are left out of this routing")
    return k


def check_positive(value, name):
    if value is not None and (not np.isfinite(value) or value <= 0):
        raise OptionError(f"{name} {value}: give a positive number")

"""Options and input handling shared by the routing commands (access, route, od, metrics, profile).

One text per recurring option, one loader for the network (checking the
weight's column is there), one reader for point layers (hubs, origins,
destinations) with their ids and kinds.
"""

from __future__ import annotations

from ..analysis.access import kind_name  # noqa: F401  (re-exported for the CLI modules)

import json
import sys

import numpy as np

from ..errors import OptionError
from ..network.model import WEIGHTS

__all__ = ["add_weight", "add_direction", "add_access", "load_network", "read_points", "note",
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
    """Read a network GeoPackage and check it can be routed on ``weight`` (see :mod:`geo_reach.ingest.points`)."""
    from ..ingest.points import load_network as _load

    return _load(path, weight)


def read_points(ref, network, *, id_field=None, kind_field=None, what="hubs", id_option="--hub-id-field"):
    """Read a point layer in the network's CRS and report what was left out on stderr."""
    from ..ingest.points import read_points as _read

    pts = _read(ref, network.crs, id_field=id_field, kind_field=kind_field, what=what, id_option=id_option)
    for msg in pts.notes:
        note(msg)
    return pts


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

"""Options and helpers shared by the subcommands: one text per option, defaults from the option classes.

Defaults are read from the typed option classes
(:class:`~geo_reach.network.build.BuildOptions`,
:class:`~geo_reach.analysis.options.RoutingOptions`, ...), never written
here; a value the user typed is validated once, where it enters (argparse
``type=`` or the option class).
"""

from __future__ import annotations

import argparse
import sys

import numpy as np

from ..analysis.options import DIRECTIONS, RoutingOptions, SurfaceOptions
from ..errors import OptionError
from ..network.build import BuildOptions
from ..network.weights import WEIGHT_NAMES, as_weight

__all__ = ["add_layer_options", "add_output_options", "add_weight", "add_direction", "add_access", "add_friction",
           "routing_options", "study_from_layer_args", "emit_json", "print_json", "parse_class_speeds",
           "parse_landcover_speeds", "friction_table", "friction_inputs", "travel_model_for_points",
           "note", "report_excluded", "report_left_out", "read_network_arg", "read_points_arg", "check_layer_io",
           "crs_arg"]

_R = RoutingOptions()
_B = BuildOptions()
_S = SurfaceOptions()


def note(msg: str) -> None:
    """One report line on stderr."""
    print(f"geo-reach: {msg}", file=sys.stderr)


# ------------------------------------------------------------------ routing options
def _weight_arg(text):
    try:
        return as_weight(text)
    except OptionError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a weight; choose one of {', '.join(WEIGHT_NAMES)}") \
            from None


def add_weight(p, choices=WEIGHT_NAMES):
    """``--weight``: a :class:`~geo_reach.network.weights.Weight` (validated here, once)."""
    p.add_argument("--weight", type=_weight_arg, default=as_weight(_R.weight), metavar="{" + ",".join(choices) + "}",
                   help=f"what a trip's cost counts: {', '.join(choices)} (1 per link); edges with no value "
                        f"for it are left out and counted (default {_R.weight})")


def add_direction(p):
    p.add_argument("--direction", choices=DIRECTIONS, default=_R.direction,
                   help="to-hub: the trip from each place to its hub (default); from-hub: the trip from the hub")


def add_access(p, what="points"):
    p.add_argument("--max-access-m", type=float, default=_R.max_access_m, metavar="M",
                   help=f"{what} farther than this from the network are reported and left out "
                        f"(default {_R.max_access_m:g})")
    p.add_argument("--walk-kmh", type=float, default=_R.walk_kmh, metavar="KMH",
                   help=f"off-network walking speed on flat open ground, km/h (default {_R.walk_kmh:g}, "
                        "common practice for walking)")


def add_friction(p):
    """``--terrain``, ``--landcover``, ``--landcover-speeds``, ``--barriers`` and ``--cell-m``: what slows a walk."""
    g = p.add_argument_group("walking off the network (as the travel-time surface walks)")
    g.add_argument("--terrain", metavar="DEM.tif", help="elevation raster (slopes by Tobler's hiking function)")
    g.add_argument("--landcover", metavar="LC.tif", help="land-cover classes raster (needs --landcover-speeds)")
    g.add_argument("--landcover-speeds", metavar="TABLE",
                   help="class-to-speed table: a CSV file (class,speed_kmh) or CLASS=KMH,... (0 = impassable)")
    g.add_argument("--barriers", metavar="LAYER", help="impassable polygons (water, restricted land)")
    g.add_argument("--cell-m", type=float, default=_S.cell_m,
                   help=f"cell side of the grid walks cross, metres (default {_S.cell_m:g}; used with the "
                        "options above)")
    g.add_argument("--neighbours", type=int, choices=(8, 16), default=_S.neighbours,
                   help=f"moves of the grid walk: 8 (axes, diagonals) or 16 (also knight moves, within 2.75 %% of "
                        f"straight walking) (default {_S.neighbours})")


def parse_landcover_speeds(text) -> dict:
    """A class-to-speed table from a CSV file (class,speed_kmh) or ``CLASS=KMH,...``: {"class": km/h}."""
    import csv
    from pathlib import Path

    p = Path(text)
    out = {}
    if p.is_file():
        with open(p, newline="") as f:
            for row in csv.reader(f):
                if not row or not row[0].strip() or row[0].strip().lower() in ("class", "code"):
                    continue
                try:
                    out[str(int(float(row[0])))] = float(row[1])
                except (ValueError, IndexError):
                    raise OptionError(f"file '{p}': row {row!r} is not class,speed_kmh") from None
        return out
    for item in filter(None, (t.strip() for t in str(text).split(","))):
        k, _, v = item.partition("=")
        try:
            out[str(int(k))] = float(v)
        except ValueError:
            raise OptionError(f"--landcover-speeds: '{item}' is not CLASS=KMH; or give a CSV file") from None
    return out


def friction_inputs(args) -> list:
    """The friction files a command line names (for the input guard)."""
    from pathlib import Path

    speeds = getattr(args, "landcover_speeds", None)
    speeds = speeds if speeds and Path(speeds).is_file() else None
    return [getattr(args, "terrain", None), getattr(args, "landcover", None), speeds, getattr(args, "barriers", None)]


def friction_table(args, margin_m: float) -> dict | None:
    """The ``[surface]`` table of a command's in-memory study for its friction options (None without any)."""
    from pathlib import Path

    from ..ingest.layers import parse_layer_ref

    if not any(getattr(args, k, None) for k in ("terrain", "landcover", "barriers")):
        if getattr(args, "landcover_speeds", None):
            raise OptionError("--landcover-speeds needs --landcover (the land-cover raster)")
        return None
    if args.landcover and not args.landcover_speeds:
        raise OptionError("--landcover needs --landcover-speeds (a class-to-speed table)")
    t = {"cell_m": float(args.cell_m), "margin_m": float(margin_m),
         "neighbours": int(getattr(args, "neighbours", _S.neighbours))}
    for key in ("terrain", "landcover"):
        if getattr(args, key):
            t[key] = str(Path(getattr(args, key)))
    if args.landcover_speeds:
        t["landcover_speeds"] = parse_landcover_speeds(args.landcover_speeds)
    if args.barriers:
        ref = parse_layer_ref(args.barriers)
        t["barriers"] = str(ref.path)
        if ref.layer:
            t["barriers_layer"] = ref.layer
    return t


def travel_model_for_points(args, net, xy, opt: RoutingOptions):
    """The travel model of ``route`` or ``od``: the command's routing options and friction inputs.

    The friction grid covers the points and ``max_access_m`` around them
    (every walk stays within that).
    """
    from pathlib import Path

    from ..analysis.travel import TravelModel
    from ..pipeline.inputs import friction_for_points
    from ..pipeline.steps import travel_model
    from ..study import study_from_dict

    table = friction_table(args, opt.max_access_m)
    if table is None:
        return TravelModel(opt)
    raw = {"network": {"prebuilt": str(args.network)}, "surface": table,
           "routing": {"weight": opt.weight.name, "direction": opt.direction,
                       "max_access_m": float(opt.max_access_m), "walk_kmh": float(opt.walk_kmh)}}
    study = study_from_dict(raw, Path("."), check_files=False)
    return travel_model(study, friction_for_points(study, net, xy))


def routing_options(args) -> RoutingOptions:
    """The command's :class:`RoutingOptions` (options it does not take keep their defaults)."""
    return RoutingOptions(weight=getattr(args, "weight", _R.weight),
                          direction=getattr(args, "direction", _R.direction),
                          max_access_m=getattr(args, "max_access_m", _R.max_access_m),
                          walk_kmh=getattr(args, "walk_kmh", _R.walk_kmh))


# ------------------------------------------------------------------ inputs
def read_network_arg(path, weight=None):
    """Read the NETWORK.gpkg argument (see :func:`geo_reach.network.io.read_network`)."""
    from ..network.io import read_network

    notes: list[str] = []
    net = read_network(path, weight, notes)
    for msg in notes:
        note(msg)
    return net


def read_points_arg(ref, network, *, id_field=None, kind_field=None, what="hubs", id_key="hub_id_field"):
    """Read a point layer in the network's CRS and report what was left out on stderr."""
    from ..ingest.points import read_points

    pts = read_points(ref, network.crs, id_field=id_field, kind_field=kind_field, what=what, id_key=id_key)
    for msg in pts.notes:
        note(msg)
    return pts


def report_left_out(att, ids, what: str, max_access_m: float) -> int:
    """Report the points left out (farther than ``max_access_m`` from the network, or walled in); return how many."""
    out = ~att.attached & ~att.blocked
    k = int(out.sum())
    if k:
        first = np.nonzero(out)[0][:3]
        sample = ", ".join(f"id {ids[i]} ({att.access_m[i]:,.0f} m)" if np.isfinite(att.access_m[i])
                           else f"id {ids[i]} (no network to join)" for i in first)
        note(f"{k} {what} farther than --max-access-m {max_access_m:g} m from the network are left out: "
             f"{sample}{' ...' if k > 3 else ''}")
    shut = np.nonzero(att.blocked)[0]
    if len(shut):
        note(f"{len(shut)} {what} cannot walk to any place to join the network within --max-access-m "
             f"{max_access_m:g} m (barriers, impassable ground or the edge of the grid all round) and are left out: "
             + ", ".join(f"id {ids[i]}" for i in shut[:3]) + (" ..." if len(shut) > 3 else ""))
    return k + len(shut)


def report_excluded(net, weight) -> int:
    from ..analysis.routing import excluded_edges

    k = excluded_edges(net, weight)
    if k:
        note(f"{k} of {net.n_edges} edges have no {weight} value and are left out of this routing")
    return k


# ------------------------------------------------------------------ build options
def crs_arg(text):
    """argparse ``type=`` for a CRS option: checked with pyproj here, kept as typed."""
    from ..errors import CRSError
    from ..ingest.layers import parse_crs

    try:
        parse_crs(text)
    except CRSError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a coordinate reference system pyproj knows; give one "
                                         "such as EPSG:32633") from None
    return text


def add_layer_options(p):
    g = p.add_argument_group("network layers (options apply to every LAYER given)")
    g.add_argument("layers", nargs="+", metavar="LAYER", help="line layer: path or path:layername")
    g.add_argument("--mode", choices=["road", "rail", "cable"], default="road", help="mode of the layers (default road)")
    g.add_argument("--speed-field", help="field holding the speed in km/h")
    g.add_argument("--class-field", help="field holding a road class, looked up in the class-to-speed table")
    g.add_argument("--class-speeds", metavar="CLASS=KMH,...", type=parse_class_speeds,
                   help="override or extend the class-to-speed table, e.g. main=60,track=12")
    g.add_argument("--speed-kmh", type=float, help="one speed for the layers, and the fallback for bad values")
    g.add_argument("--oneway-field", help="field marking one-way lines (yes/true/1 forward, -1 reverse)")
    g.add_argument("--level-field", help="field with the vertical level; crossings of different levels stay unjoined")
    g.add_argument("--all-season-field", help="field flagging all-season roads (1/0, yes/no)")
    g.add_argument("--stations", metavar="LAYER", help="rail stations / cable access nodes (point layer)")
    g.add_argument("--boarding-minutes", type=float, default=0.0, help="rail boarding penalty in minutes (default 0)")
    g.add_argument("--assume-crs", metavar="EPSG:NNNN", type=crs_arg, help="CRS for layers that have none")
    t = p.add_argument_group("topology (metres on the ground)")
    t.add_argument("--crs", metavar="EPSG:NNNN", type=crs_arg, help="metric working CRS (default: UTM zone of the data's centre)")
    t.add_argument("--snap-m", type=float, default=_B.snap_m,
                   help=f"join line ends closer than this (default {_B.snap_m:g})")
    t.add_argument("--dangle-m", type=float, help="report dead ends shorter than this (default 10 x --snap-m)")
    t.add_argument("--access-snap-m", type=float, default=_B.access_snap_m,
                   help=f"stations/access nodes farther than this from their line are reported, not attached "
                        f"(default {_B.access_snap_m:g})")
    t.add_argument("--transfer-max-m", type=float, default=_B.transfer_max_m,
                   help=f"longest walk between a station and the nearest road (default {_B.transfer_max_m:g})")
    t.add_argument("--transfer-walk-kmh", type=float, default=_B.transfer_walk_kmh,
                   help=f"walking speed on that link, km/h (default {_B.transfer_walk_kmh:g}, common practice)")


def add_output_options(p, metavar):
    """-o/--output, --overwrite, --report and --json, as build and check take them."""
    p.add_argument("-o", "--output", required=True, metavar=metavar,
                   help="output GeoPackage (.gpkg); NAME.parquet (GeoParquet, for large networks), NAME.fgb, "
                        "NAME.geojson or NAME.shp write one file per layer: NAME.edges.parquet, NAME.nodes.parquet, "
                        "NAME.network_issues.parquet")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")
    p.add_argument("--report", metavar="FILE.json", help="write the report as JSON")
    p.add_argument("--json", action="store_true", help="print the report as JSON")


def parse_class_speeds(text):
    out = {}
    for item in filter(None, (s.strip() for s in text.split(","))):
        k, sep, v = item.partition("=")
        try:
            out[k.strip()] = float(v)
        except ValueError:
            raise argparse.ArgumentTypeError(f"'{item}' is not CLASS=KMH") from None
        if not sep or not out[k.strip()] > 0:
            raise argparse.ArgumentTypeError(f"'{item}' is not CLASS=KMH with a positive speed")
    return out


def check_layer_io(args, what: str, issues_only: bool = False) -> None:
    """``build``/``check``: the layers (and stations) are inputs; the files ``-o`` stands for and ``--report``
    outputs."""
    from ..export.gpkg import network_files
    from ..export.guard import check_io

    files = [(f, what) for f in network_files(args.output, issues_only)]
    check_io(inputs=[*args.layers, args.stations], files=[*files, (args.report, "report")],
             overwrite=args.overwrite)


def study_from_layer_args(args):
    """The study a ``build`` or ``check`` command line stands for (one code path with ``run``)."""
    from pathlib import Path

    import re

    from ..errors import InputError
    from ..ingest.layers import parse_layer_ref
    from ..study import study_from_dict

    lines = []
    for layer in args.layers:
        ref = parse_layer_ref(layer)
        t = {"path": str(ref.path), "mode": args.mode, "boarding_minutes": float(args.boarding_minutes)}
        if ref.layer:
            t["layer"] = ref.layer
        for k in ("speed_field", "class_field", "oneway_field", "level_field", "all_season_field", "assume_crs"):
            if getattr(args, k) is not None:
                t[k] = getattr(args, k)
        if args.speed_kmh is not None:
            t["speed_kmh"] = float(args.speed_kmh)
        if args.class_speeds:
            t["class_speeds"] = dict(args.class_speeds)
        if args.stations:
            sref = parse_layer_ref(args.stations)
            t["stations"] = str(sref.path)
            if sref.layer:
                t["stations_layer"] = sref.layer
        lines.append(t)
    network = {"snap_m": float(args.snap_m), "access_snap_m": float(args.access_snap_m),
               "transfer_max_m": float(args.transfer_max_m), "transfer_walk_kmh": float(args.transfer_walk_kmh)}
    if args.crs:
        network["crs"] = args.crs
    if args.dangle_m is not None:
        network["dangle_m"] = float(args.dangle_m)
    try:
        return study_from_dict({"lines": lines, "network": network}, Path("."), check_files=False)
    except InputError as err:   # the study's dotted key (lines[0].speed_kmh) is the flag the user typed
        m = re.match(r"(lines\[\d+\]|network)\.(\w+)(\[[^\]]*\]|\.\w+)*", str(err))
        flag = getattr(args, "_flags", {}).get(m.group(2)) if m else None
        if flag is None:
            raise
        raise err.with_message(flag + str(err)[m.end():]) from err


# ------------------------------------------------------------------ JSON
def print_json(obj) -> None:
    """``obj`` as JSON on stdout (the one encoder: :mod:`geo_reach.export.jsonout`)."""
    from ..export.jsonout import dumps

    sys.stdout.write(dumps(obj) + "\n")


def emit_json(obj, path=None, stdout=False):
    """Write ``obj`` as JSON to ``path`` (atomically) and/or stdout."""
    from ..export.atomic import atomic_path
    from ..export.jsonout import dumps

    if path:
        with atomic_path(path) as tmp:
            tmp.write_text(dumps(obj) + "\n", encoding="utf-8")
    if stdout:
        print_json(obj)

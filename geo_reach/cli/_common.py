"""Option definitions shared by several subcommands (one text per option)."""

from __future__ import annotations

import json
import sys

__all__ = ["add_layer_options", "add_output_options", "study_from_layer_args", "emit_json", "parse_class_speeds"]


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
    g.add_argument("--assume-crs", metavar="EPSG:NNNN", help="CRS for layers that have none")
    t = p.add_argument_group("topology (metres on the ground)")
    t.add_argument("--crs", metavar="EPSG:NNNN", help="metric working CRS (default: UTM zone of the data's centre)")
    t.add_argument("--snap-m", type=float, default=1.0, help="join line ends closer than this (default 1.0)")
    t.add_argument("--dangle-m", type=float, help="report dead ends shorter than this (default 10 x --snap-m)")
    t.add_argument("--access-snap-m", type=float, default=100.0,
                   help="stations/access nodes farther than this from their line are reported, not attached (default 100)")
    t.add_argument("--transfer-max-m", type=float, default=1000.0,
                   help="longest walk between a station and the nearest road (default 1000)")
    t.add_argument("--transfer-walk-kmh", type=float, default=5.0,
                   help="walking speed on that link, km/h (default 5, common practice)")


def add_output_options(p, metavar):
    """-o/--output, --overwrite, --report and --json, as build and check take them."""
    p.add_argument("-o", "--output", required=True, metavar=metavar, help="output GeoPackage")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")
    p.add_argument("--report", metavar="FILE.json", help="write the report as JSON")
    p.add_argument("--json", action="store_true", help="print the report as JSON")


def parse_class_speeds(text):
    import argparse

    out = {}
    for item in filter(None, (s.strip() for s in text.split(","))):
        k, sep, v = item.partition("=")
        try:
            out[k.strip()] = float(v)
        except ValueError:
            raise argparse.ArgumentTypeError(f"'{item}' is not CLASS=KMH") from None
        if not sep or out[k.strip()] <= 0:
            raise argparse.ArgumentTypeError(f"'{item}' is not CLASS=KMH with a positive speed")
    return out


def study_from_layer_args(args):
    """The study a ``build`` or ``check`` command line stands for (one code path with ``run``)."""
    from pathlib import Path

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
    return study_from_dict({"lines": lines, "network": network}, Path("."), check_files=False)


def emit_json(obj, path=None, stdout=False):
    """Write ``obj`` as JSON to ``path`` (atomically) and/or stdout."""
    from ..export.atomic import atomic_path

    text = json.dumps(obj, indent=2, sort_keys=False, default=_default)
    if path:
        with atomic_path(path) as tmp:
            tmp.write_text(text + "\n")
    if stdout:
        sys.stdout.write(text + "\n")


def _default(o):
    import numpy as np

    if isinstance(o, np.integer):
        return int(o)
    if isinstance(o, np.floating):
        return None if np.isnan(o) else float(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    return str(o)

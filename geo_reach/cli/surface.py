"""``geo-reach surface``: off-network travel, reach bands, population and weak regions.

A shortcut that builds a study in memory around a built network and runs the
same pipeline as ``geo-reach run``.
"""

from __future__ import annotations

import csv
from pathlib import Path

from ..analysis.options import SurfaceOptions
from ._common import add_access, add_direction

__all__ = ["register", "study_from_args", "run"]

_S = SurfaceOptions()


def register(sub):
    p = sub.add_parser("surface", help="travel-time surface, reach bands, population and weak regions",
                       description="Carry access from the network to every cell: hub_minutes.tif, nearest_hub.tif, "
                                   "reach.gpkg (reach_bands, weak_regions, settlements, zones) and summary.json.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--hubs", required=True, metavar="LAYER", help="hub points: path or path:layername")
    p.add_argument("--hub-id-field", metavar="F", help="field with unique hub ids (default: row number from 1)")
    p.add_argument("--hub-kind-field", metavar="F", help="field with the hub kind: one surface per kind too")
    p.add_argument("-o", "--output", required=True, metavar="OUTDIR", help="output folder (new or empty)")
    p.add_argument("--overwrite", action="store_true", help="replace a folder that already holds results")
    p.add_argument("--cell-m", type=float, default=_S.cell_m, help=f"cell side in metres (default {_S.cell_m:g})")
    p.add_argument("--margin-m", type=float, default=_S.margin_m,
                   help=f"margin around the study area, metres (default {_S.margin_m:g})")
    p.add_argument("--extent", metavar="XMIN,YMIN,XMAX,YMAX", help="grid extent in the network's CRS")
    p.add_argument("--neighbours", type=int, choices=(8, 16), default=_S.neighbours,
                   help=f"moves of the walk across the grid: 16 (also knight moves, within 2.75 %% of straight "
                        f"walking) or 8 (within 8.24 %%) (default {_S.neighbours})")
    add_access(p, "hubs")
    add_direction(p)
    p.add_argument("--terrain", metavar="DEM.tif", help="elevation raster (slopes by Tobler's hiking function)")
    p.add_argument("--landcover", metavar="LC.tif", help="land-cover classes raster (needs --landcover-speeds)")
    p.add_argument("--landcover-speeds", metavar="TABLE",
                   help="class-to-speed table: a CSV file (class,speed_kmh) or CLASS=KMH,... (0 = impassable)")
    p.add_argument("--barriers", metavar="LAYER", help="impassable polygons (water, restricted land)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--population", metavar="POP.tif", help="population raster (people per cell)")
    g.add_argument("--settlements", metavar="LAYER", help="settlement points with a population field")
    p.add_argument("--population-field", help="population field of --settlements")
    p.add_argument("--zones", metavar="LAYER", help="district polygons for per-zone tables")
    p.add_argument("--zone-id-field", metavar="F", help="field naming each zone")
    p.add_argument("--bands", default=",".join(f"{b:g}" for b in _S.bands),
                   help=f"band limits in minutes (default {','.join(f'{b:g}' for b in _S.bands)})")
    p.add_argument("--weak-minutes", type=float, help="weak-region threshold (default: the largest band)")
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    p.set_defaults(func=run)


def _split(ref):
    from ..ingest.layers import parse_layer_ref

    r = parse_layer_ref(ref)
    out = {"path": str(Path(r.path).resolve())}
    if r.layer:
        out["layer"] = r.layer
    return out


def _speeds(text):
    from ..errors import OptionError

    p = Path(text)
    out = {}
    if p.exists():
        with open(p, newline="") as f:
            for row in csv.reader(f):
                if not row or not row[0].strip() or row[0].strip().lower() in ("class", "code"):
                    continue
                try:
                    out[str(int(float(row[0])))] = float(row[1])
                except (ValueError, IndexError):
                    raise OptionError(f"file '{p}': row {row!r} is not class,speed_kmh") from None
        return out
    for item in filter(None, (s.strip() for s in text.split(","))):
        k, _, v = item.partition("=")
        try:
            out[str(int(k))] = float(v)
        except ValueError:
            raise OptionError(f"--landcover-speeds: '{item}' is not CLASS=KMH; or give a CSV file") from None
    return out


def study_from_args(args):
    """The study this command stands for (one code path with ``geo-reach run``)."""
    from ..errors import OptionError
    from ..study import study_from_dict

    if args.settlements and not args.population_field:
        raise OptionError("--settlements needs --population-field naming the population field")
    if args.landcover and not args.landcover_speeds:
        raise OptionError("--landcover needs --landcover-speeds (a class-to-speed table)")
    try:
        bands = [float(b) for b in str(args.bands).split(",") if b.strip()]
    except ValueError:
        raise OptionError(f"--bands {args.bands}: give minutes separated by commas, e.g. 30,60,120") from None
    hubs = {**_split(args.hubs)}
    if args.hub_id_field:
        hubs["id_field"] = args.hub_id_field
    if args.hub_kind_field:
        hubs["kind_field"] = args.hub_kind_field
    surface = {"cell_m": args.cell_m, "margin_m": args.margin_m, "bands": bands, "neighbours": args.neighbours}
    if args.extent:
        try:
            surface["extent"] = [float(v) for v in args.extent.split(",")]
        except ValueError:
            raise OptionError("--extent: give XMIN,YMIN,XMAX,YMAX in metres") from None
    for key in ("terrain", "landcover", "population"):
        if getattr(args, key):
            surface[key] = str(Path(getattr(args, key)).resolve())
    if args.landcover_speeds:
        surface["landcover_speeds"] = _speeds(args.landcover_speeds)
    if args.barriers:
        b = _split(args.barriers)
        surface["barriers"] = b["path"]
        if "layer" in b:
            surface["barriers_layer"] = b["layer"]
    if args.weak_minutes is not None:
        surface["weak_minutes"] = args.weak_minutes
    raw = {"network": {"prebuilt": str(Path(args.network).resolve())}, "hubs": hubs, "surface": surface,
           "routing": {"walk_kmh": args.walk_kmh, "max_access_m": args.max_access_m, "direction": args.direction},
           "outputs": {"map": False, "profile_png": False}}
    if args.settlements:
        raw["settlements"] = {**_split(args.settlements), "population_field": args.population_field}
    if args.zones:
        raw["zones"] = {**_split(args.zones)}
        if args.zone_id_field:
            raw["zones"]["id_field"] = args.zone_id_field
    return study_from_dict(raw, Path.cwd())


def run(args):
    from ..pipeline import run_surface
    from ._progress import StepDisplay

    from ..export.guard import check_io

    speeds = args.landcover_speeds if args.landcover_speeds and Path(args.landcover_speeds).is_file() else None
    check_io(inputs=[args.network, args.hubs, args.terrain, args.landcover, speeds, args.barriers, args.population,
                     args.settlements, args.zones], folder=args.output, overwrite=args.overwrite)
    study = study_from_args(args)
    show = StepDisplay(not args.quiet)
    s = run_surface(study, Path(args.output), overwrite=args.overwrite, progress=show)
    show.close()
    if s.get("population_total") is not None:
        largest = max(s["population_by_band"], key=float)
        print(f"people: {s['population_total']:,.0f}; within {largest} min: {s['population_by_band'][largest]:,.0f}; "
              f"beyond: {s['population_beyond']:,.0f}; weighted mean {s['mean_hub_minutes']:.1f} min")
    print(f"outputs: {args.output} (hub_minutes.tif, nearest_hub.tif, reach.gpkg, summary.json)")
    print(s["caution"])
    return 0

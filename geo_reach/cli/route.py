"""``geo-reach route``: the least-cost trip between two points, as GeoJSON."""

from __future__ import annotations

import numpy as np

from ..errors import InputError, OptionError
from ._common import (add_access, add_friction, add_weight, friction_inputs, note, print_json, read_network_arg,
                      report_excluded, routing_options, travel_model_for_points)

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser("route", help="least-cost trip between two points (GeoJSON)",
                       description="The least-cost trip between two points: cost, length and the path as a "
                                   "GeoJSON Feature (RFC 7946, longitude/latitude) on stdout or in a file. "
                                   "The walks to and from the network (or straight between the points when "
                                   "cheaper) follow the same model as a study's settlements. "
                                   "Results are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--from", dest="origin", required=True, metavar="X,Y", type=_xy, help="start point")
    p.add_argument("--to", dest="destination", required=True, metavar="X,Y", type=_xy, help="end point")
    p.add_argument("--crs", metavar="EPSG:NNNN",
                   help="CRS of the coordinates (default: longitude,latitude in EPSG:4326)")
    add_weight(p)
    add_access(p)
    add_friction(p)
    p.add_argument("-o", "--output", metavar="ROUTE.geojson", help="write the GeoJSON here instead of stdout")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")
    p.set_defaults(func=run)


def _xy(text):
    import argparse

    parts = text.split(",")
    try:
        if len(parts) != 2:
            raise ValueError
        x, y = float(parts[0]), float(parts[1])
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not X,Y (two numbers separated by a comma)") from None
    if not (np.isfinite(x) and np.isfinite(y)):
        raise argparse.ArgumentTypeError(f"'{text}' is not a finite X,Y")
    return x, y


def run(args):
    import shapely
    from pyproj import CRS, Transformer
    from pyproj.exceptions import CRSError as ProjCRSError

    from .._meta import CAUTION
    from ..errors import CRSError
    from ..export.atomic import atomic_path
    from ..export.guard import check_io

    check_io(inputs=[args.network, *friction_inputs(args)], files=[(args.output, "route file")],
             overwrite=args.overwrite)
    try:
        src = CRS.from_user_input(args.crs) if args.crs else CRS.from_epsg(4326)
    except ProjCRSError as err:
        raise CRSError(f"--crs {args.crs}: not a CRS pyproj knows ({err}); give e.g. EPSG:32633") from err
    opt = routing_options(args)
    net = read_network_arg(args.network, opt.weight)
    report_excluded(net, opt.weight)
    if src.is_geographic:
        for (lon, lat), flag in ((args.origin, "--from"), (args.destination, "--to")):
            if not (-180 <= lon <= 180 and -90 <= lat <= 90):
                raise OptionError(f"{flag} {lon},{lat}: not a longitude,latitude; give --crs for projected "
                                  "coordinates")
    to_net = Transformer.from_crs(src, net.crs, always_xy=True)
    xy = np.array(to_net.transform(*np.array([args.origin, args.destination]).T)).T
    model = travel_model_for_points(args, net, xy, opt)
    ends = (model.attach(net, xy[:1], roles=("leave",)), model.attach(net, xy[1:], roles=("arrive",)))
    for att, flag, pt in zip(ends, ("--from", "--to"), (args.origin, args.destination)):
        if att.blocked[0]:
            raise InputError(f"{flag} {pt[0]},{pt[1]}: no walk from the point reaches a place to join the network "
                             f"within --max-access-m {args.max_access_m:g} (barriers, impassable ground or the edge "
                             "of the grid all round); check the coordinates and the barriers")
        if not att.attached[0]:
            far = (f"{att.access_m[0]:,.0f} m from the nearest place to join the network"
                   if np.isfinite(att.access_m[0]) else "where no network edge can be joined")
            raise InputError(f"{flag} {pt[0]},{pt[1]}: the point is {far}, beyond --max-access-m "
                             f"{args.max_access_m:g}; check the coordinates (X,Y order, --crs) or raise --max-access-m")
    r = model.route(net, *ends, exact=True)
    props = {
        "weight": opt.weight.name,
        "unit": opt.weight.unit,
        "cost": r.cost,
        "length_m": r.length_m,
        "access_m": r.access_m,
        "edge_ids": r.edges.tolist(),
        "reachable": r.found,
        "caution": CAUTION,
    }
    geom = None
    if r.found:
        to_ll = Transformer.from_crs(net.crs, CRS.from_epsg(4326), always_xy=True)
        c = shapely.get_coordinates(r.geometry)
        lon, lat = to_ll.transform(c[:, 0], c[:, 1])
        geom = {"type": "LineString", "coordinates": np.round(np.column_stack([lon, lat]), 7).tolist()}
    else:
        note("the two points are in parts of the network that no trip joins on this weight "
             "(cost and geometry null)")
    feature = {"type": "Feature", "geometry": geom, "properties": props}
    if args.output:
        from ..export.jsonout import dumps

        with atomic_path(args.output) as tmp:
            tmp.write_text(dumps(feature) + "\n", encoding="utf-8")
        note(f"route: {opt.weight.format(r.cost, 2)}, {r.length_m / 1000:.3f} km -> {args.output}" if r.found
             else f"route: no path -> {args.output}")
    else:
        print_json(feature)
    return 0

"""``geo-reach init``: write a commented starter study for the user's own layers.

Each LAYER is read and sorted by its geometry: line layers become
``[[lines]]`` tables (mode and cost fields suggested from the layer's name and
fields), point layers become the hubs, the settlements or the stations of a
rail or cable layer, polygon layers the zones (or barriers, when the name
says water), and GeoTIFFs the population or terrain of ``[surface]``.  Every
suggestion carries a comment saying why it was made, so the analyst can check
it before the first run.  The file is validated with the study schema before
it is put in place, and written atomically.

Only names and values are guessed; nothing is measured.  The study is a
starting point: the analyst decides every speed, field and layer.
"""

from __future__ import annotations

import sys
from pathlib import Path

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser(
        "init", help="write a commented starter study for your own layers",
        description="Read the layers, sort them by geometry and write a study file with every suggested "
                    "setting commented with the reason for it. LAYER is path or path:layername; a GeoPackage "
                    "given without a layer name stands for all its layers; .tif files are rasters.")
    p.add_argument("layers", nargs="+", metavar="LAYER", help="a vector layer (path or path:layername) or a .tif")
    p.add_argument("-o", "--output", required=True, metavar="STUDY.toml", help="the study file to write")
    p.add_argument("--overwrite", action="store_true", help="replace an existing study file")
    p.set_defaults(func=run)


def run(args):
    from ..export.guard import check_io
    from ..pipeline.starter import starter_study, write_checked

    out = Path(args.output)
    check_io(inputs=args.layers, files=[(out, "study file")], overwrite=args.overwrite)
    text, notes = starter_study(args.layers, out)
    write_checked(out, text)
    print(f"wrote {out}", file=sys.stdout)
    for n in notes:
        print(f"  {n}", file=sys.stdout)
    print(f"check every suggestion in the file, then: geo-reach run {out}", file=sys.stdout)
    return 0

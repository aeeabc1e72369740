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

import json
import math
import os
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["register", "run", "starter_study", "classify_points", "line_suggestions"]

#: Raster file suffixes given as LAYER (read as [surface] rasters).
RASTER_SUFFIXES = (".tif", ".tiff")

# Field names that suggest a role, matched case-insensitively, in order of preference.
SPEED_FIELDS = ("speed_kmh", "speed", "maxspeed", "max_speed", "speed_limit", "speedlimit", "vel", "velocity")
CLASS_FIELDS = ("class", "road_class", "highway", "fclass", "type", "category", "roadclass", "road_type")
ONEWAY_FIELDS = ("oneway", "one_way", "direction", "dir")
LEVEL_FIELDS = ("level", "z_level", "zlevel", "layer", "bridge")
ALL_SEASON_FIELDS = ("all_season", "allseason", "all_weather", "paved", "surface")
KIND_FIELDS = ("kind", "type", "category", "service", "facility_type")
POPULATION_FIELDS = ("population", "pop", "people", "inhabitants", "pop_total", "residents")
NAME_FIELDS = ("name", "title", "label")
ID_FIELDS = ("id", "code", "ref", "key")

# Words in a layer's file or layer name (whole tokens or their starts).
RAIL_WORDS = ("rail", "train", "railroad")
CABLE_WORDS = ("fibre", "fiber", "cable")
HUB_WORDS = ("hub", "clinic", "facilit", "hospital", "health", "school", "market", "service", "amenit", "poi",
             "shelter", "depot", "port")
SETTLEMENT_WORDS = ("settlement", "village", "town", "place", "localit", "communit", "hamlet", "household")
STATION_WORDS = ("station", "stop", "halt", "access", "node")
PROPOSAL_WORDS = ("propos", "plan", "future")
BARRIER_WORDS = ("water", "lake", "river", "sea", "barrier", "wetland", "swamp", "reservoir", "lagoon")
POPULATION_RASTER_WORDS = ("pop",)
TERRAIN_RASTER_WORDS = ("dem", "dtm", "terrain", "elev", "height", "srtm", "relief")

#: At most this many class values are listed in a [lines.class_speeds] table.
MAX_CLASSES = 30
#: The suggested grid keeps below about this many cells (each takes ~100 bytes at peak).
TARGET_CELLS = 4_000_000
_CELL_CHOICES = (100, 200, 250, 500, 1000, 2000, 5000)

# Values that parse_oneway reads as "both ways" without being an error.
_BOTH_WAYS = {"no", "false", "0", "n", "both", "none", "", "two-way", "twoway", "b", "f"}
_YES_NO = {"yes", "no", "true", "false", "y", "n", "t", "f"}


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
    from ..export.atomic import check_output

    out = Path(args.output)
    check_output(out, args.overwrite, "study file")
    text, notes = starter_study(args.layers, out)
    _write_checked(out, text)
    print(f"wrote {out}", file=sys.stdout)
    for n in notes:
        print(f"  {n}", file=sys.stdout)
    print(f"check every suggestion in the file, then: geo-reach run {out}", file=sys.stdout)
    return 0


def _write_checked(out: Path, text: str):
    """Validate the study text against the schema, then write it atomically."""
    import tomllib

    from ..errors import GeoReachError
    from ..export.atomic import atomic_path
    from ..study import study_from_dict

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:  # a bug here, never the user's data
        raise GeoReachError(f"init wrote TOML that does not parse ({err}); please report it") from err
    study_from_dict(raw, out.parent if str(out.parent) else Path("."), out, text)
    with atomic_path(out) as tmp:
        tmp.write_text(text, encoding="utf-8")


# ============================================================================ reading
@dataclass
class Source:
    """One input: a vector layer (with its frame) or a raster."""

    arg: str
    path: Path
    layer: str | None
    family: str                 # 'lines', 'points', 'polygons', 'raster', or 'none'
    frame: object = None        # GeoDataFrame for vector layers
    crs: object = None
    bounds_lonlat: tuple | None = None
    note: str = ""

    @property
    def label(self) -> str:
        return self.layer if self.layer else self.path.stem

    @property
    def words(self) -> list[str]:
        """Lower-case tokens of the file stem and the layer name."""
        return _tokens(f"{self.path.stem} {self.layer or ''}")


def _tokens(text: str) -> list[str]:
    text = re.sub(r"([a-z])([A-Z])", r"\1 \2", str(text))
    return [t for t in re.split(r"[^0-9a-z]+", text.lower()) if t]


def _says(tokens, words) -> str | None:
    """The first token starting with one of ``words`` (None if none)."""
    for t in tokens:
        for w in words:
            if t.startswith(w):
                return t
    return None


def _lonlat_bounds(bounds, crs):
    try:
        from rasterio.warp import transform_bounds

        b = transform_bounds(crs, "EPSG:4326", *bounds)
        return b if all(math.isfinite(v) for v in b) else None
    except Exception:  # bounds only size the suggested grid; a failure just drops the estimate
        return None


def read_sources(args) -> list[Source]:
    """Read every LAYER argument (a multi-layer GeoPackage without a layer name gives all its layers)."""
    from ..errors import MissingInputError, where
    from ..ingest.layers import list_layers, parse_layer_ref

    out = []
    for arg in args:
        ref = parse_layer_ref(arg)
        if not ref.path.exists():
            raise MissingInputError(f"{where(ref.path)}not found; check the path")
        if ref.path.suffix.lower() in RASTER_SUFFIXES:
            out.append(_read_raster_source(arg, ref.path))
            continue
        if ref.layer is None:
            names = list_layers(ref.path)
            layers = names if len(names) > 1 else [None]
        else:
            layers = [ref.layer]
        for layer in layers:
            out.append(_read_vector_source(arg if layer == ref.layer else f"{ref.path}:{layer}", ref.path, layer))
    return out


def _read_raster_source(arg, path: Path) -> Source:
    import rasterio
    from rasterio.errors import RasterioIOError

    from ..errors import InputError, MissingInputError, where

    if not path.exists():
        raise MissingInputError(f"{where(path)}not found; check the path")
    try:
        with rasterio.open(path) as ds:
            crs, bounds = ds.crs, tuple(ds.bounds)
    except RasterioIOError as err:
        raise InputError(f"{where(path)}is not a raster GDAL can read; give a GeoTIFF") from err
    s = Source(arg, path, None, "raster", crs=crs)
    if crs is None:
        s.note = "the raster has no CRS; set one (e.g. gdal_edit.py -a_srs EPSG:NNNN) before running"
    else:
        s.bounds_lonlat = _lonlat_bounds(bounds, crs)
    return s


def _read_vector_source(arg, path: Path, layer) -> Source:
    from ..ingest.layers import GEOM_FAMILIES, read_frame

    gdf = read_frame(path, layer)
    s = Source(arg, path, layer, "none", frame=gdf, crs=getattr(gdf, "crs", None))
    geoms = gdf.geometry if hasattr(gdf, "geometry") and gdf.geometry is not None else None
    if geoms is None:
        s.note = "no geometry column; left out"
        return s
    present = geoms[~(geoms.isna() | geoms.is_empty)]
    if len(present) == 0:
        s.note = "no feature has a geometry; left out"
        return s
    types = present.geom_type.value_counts()
    counts = {fam: int(types[[t for t in types.index if t in kinds]].sum()) for fam, kinds in GEOM_FAMILIES.items()}
    fam = max(counts, key=counts.get)
    if counts[fam] == 0:
        s.note = f"geometry type {types.index[0]} is not lines, points or polygons; left out"
        return s
    s.family = fam
    if s.crs is None:
        s.note = "the layer has no CRS: set assume_crs to its EPSG code before running"
    else:
        s.bounds_lonlat = _lonlat_bounds(tuple(present.total_bounds), s.crs)
    return s


# ============================================================================ fields
def _field(frame, names):
    """The first column (case-insensitive) matching ``names`` in their order of preference."""
    cols = {str(c).lower(): c for c in frame.columns if c != getattr(frame.geometry, "name", "geometry")}
    for n in names:
        if n in cols:
            return cols[n]
    return None


def _fields(frame, names):
    cols = {str(c).lower(): c for c in frame.columns if c != getattr(frame.geometry, "name", "geometry")}
    return [cols[n] for n in names if n in cols]


def _norm_values(series):
    """Non-empty values as stripped lower-case strings (how the builder matches classes)."""
    s = series.dropna().astype(str).str.strip().str.lower()
    return s[s != ""]


def _positive_share(series) -> tuple[float, float | None, int]:
    import pandas as pd

    vals = series.dropna()
    n = len(vals)
    if n == 0:
        return 0.0, None, 0
    num = pd.to_numeric(vals, errors="coerce")
    ok = num[(num > 0) & num.notna()]
    return len(ok) / n, (float(ok.median()) if len(ok) else None), n


def _safe(text, limit=60) -> str:
    """User text fit for a one-line comment."""
    t = re.sub(r"[\x00-\x1f\x7f\s]+", " ", str(text)).strip()
    return t if len(t) <= limit else t[: limit - 3] + "..."


def _examples(values, k=4) -> str:
    return ", ".join(repr(_safe(v, 24)) for v in list(values)[:k])


def _q(text) -> str:
    """A TOML basic string."""
    return json.dumps(str(text), ensure_ascii=False).replace("\x7f", "\\u007f")


def _key(text) -> str:
    t = str(text)
    return t if re.fullmatch(r"[A-Za-z0-9_-]+", t) else _q(t)


def _n(k, word) -> str:
    return f"{k} {word}{'' if k == 1 else 's'}"


def _num(v) -> str:
    v = float(v)
    return f"{int(v)}" if v.is_integer() else f"{v:g}"


# ============================================================================ lines
@dataclass
class LineTable:
    """One [[lines]] table being written: settings, each with its reason."""

    source: Source
    mode: str
    mode_why: str
    name: str | None = None
    entries: list = field(default_factory=list)      # (key, toml value, comment, active); key '#' = a note
    class_rows: list = field(default_factory=list)   # (class, speed, active, comment)
    class_note: str = ""
    stations: Source | None = None


def _mode_of(src: Source) -> tuple[str, str]:
    """Mode and why, from the layer/file name, then field names and class-like values."""
    w = _says(src.words, CABLE_WORDS)
    if w:
        return "cable", f"the name says '{w}'"
    w = _says(src.words, RAIL_WORDS)
    if w:
        return "rail", f"the name says '{w}'"
    frame = src.frame
    n = max(len(frame), 1)
    for c in frame.columns:
        if c == frame.geometry.name:
            continue
        ct = _tokens(c)
        for words, mode in ((CABLE_WORDS, "cable"), (RAIL_WORDS, "rail")):
            w = _says(ct, words)
            if w and frame[c].notna().sum() >= n / 2:
                return mode, f"field '{_safe(c)}' is named '{w}' and is filled for most features"
    for c in _fields(frame, CLASS_FIELDS + ("mode",)):
        vals = _norm_values(frame[c])
        if len(vals) == 0:
            continue
        for words, mode in ((CABLE_WORDS, "cable"), (RAIL_WORDS, "rail")):
            hit = vals.map(lambda v: _says(_tokens(v), words) is not None)
            if hit.mean() >= 0.5:
                return mode, f"most values of field '{_safe(c)}' say {mode} (e.g. {_examples(vals[hit].unique(), 2)})"
    return "road", "no rail, train, fibre or cable word in the name or fields"


def _class_guess(value: str, mode: str):
    """Speed guess for a class missing from the default table: a known class word inside it, else the default."""
    from ..network.costs import DEFAULT_CLASS_SPEEDS_KMH, DEFAULT_SPEED_KMH

    for known in sorted(DEFAULT_CLASS_SPEEDS_KMH, key=len, reverse=True):
        if known in value:
            return DEFAULT_CLASS_SPEEDS_KMH[known], f"guess: contains '{known}'"
    d = DEFAULT_SPEED_KMH.get(mode, 40.0)
    return d, f"guess: the {mode} default"


def line_suggestions(src: Source) -> LineTable:
    """Mode and cost settings for one line layer, each with the reason for it."""
    from ..network.costs import DEFAULT_CLASS_SPEEDS_KMH, DEFAULT_SPEED_KMH, parse_oneway

    mode, why = _mode_of(src)
    t = LineTable(src, mode, why)
    frame = src.frame
    n = len(frame)
    if mode == "cable":
        t.entries.append(("#", None, "cable links cost signal latency (ms), not speed: no speed fields needed", None))
        return t
    # ---- speed
    speed_note = None
    for c in _fields(frame, SPEED_FIELDS):
        share, med, filled = _positive_share(frame[c])
        if share >= 0.5:
            t.entries.append(("speed_field", _q(c), f"field '{_safe(c)}' looks like a speed: {share:.0%} of "
                              f"{filled} filled values are positive numbers (median {_num(med)}), read as km/h", True))
            break
        speed_note = (c, f"field '{_safe(c)}' is named like a speed but only {share:.0%} of its {filled} filled "
                         "values are positive numbers")
    else:
        if speed_note:
            t.entries.append(("speed_field", _q(speed_note[0]), speed_note[1], False))
    # ---- class
    table = {k.lower(): v for k, v in DEFAULT_CLASS_SPEEDS_KMH.items()}
    best = None
    for c in _fields(frame, CLASS_FIELDS):
        vals = _norm_values(frame[c])
        if len(vals) == 0:
            continue
        known = float(vals.isin(table.keys()).mean())
        distinct = vals.nunique()
        if best is None or known > best[1]:
            best = (c, known, distinct, vals)
    if mode == "road" and best is not None:
        c, known, distinct, vals = best
        usable = distinct <= MAX_CLASSES or known >= 0.5
        if usable:
            t.entries.append(("class_field", _q(c), f"field '{_safe(c)}' looks like a road class: {distinct} "
                              f"value{'s' if distinct != 1 else ''} found, {known:.0%} of features in the default "
                              "speed table", True))
            counts = vals.value_counts()
            order = sorted(counts.index, key=lambda v: (-counts[v], v))
            for v in order[:MAX_CLASSES]:
                if v in table:
                    t.class_rows.append((v, table[v], True, f"{_n(counts[v], 'feature')}; the default table's speed"))
                else:
                    g, gw = _class_guess(v, mode)
                    t.class_rows.append((v, g, False, f"{_n(counts[v], 'feature')}; {gw}, not in the default table: "
                                                      "uncomment and set"))
            if len(order) > MAX_CLASSES:
                rest = int(counts[order[MAX_CLASSES:]].sum())
                t.class_note = (f"{len(order) - MAX_CLASSES} more values ({rest} features) not listed: they use "
                                "the default table if it knows them, else speed_kmh or the road default")
        else:
            t.entries.append(("class_field", _q(c), f"field '{_safe(c)}' is named like a class but has {distinct} "
                              f"different values, only {known:.0%} of features in the default table", False))
    elif mode == "rail" and best is not None:
        t.entries.append(("#", None, f"field '{_safe(best[0])}' may be a rail class; rail speeds are best set as "
                          "speed_kmh or a speed field", None))
    if not any(k in ("speed_field", "class_field") and active for k, _, _, active in t.entries):
        d = DEFAULT_SPEED_KMH[mode]
        t.entries.append(("speed_kmh", _num(d), f"no usable speed or class field: every feature gets the {mode} "
                          f"default of {_num(d)} km/h unless you set speed_kmh"
                          + ("; for rail give the average speed with stops" if mode == "rail" else ""), False))
    # ---- one-way
    c = _field(frame, ONEWAY_FIELDS)
    if c is not None:
        vals = _norm_values(frame[c])
        parsed = parse_oneway(vals.tolist()) if len(vals) else []
        known = [p != 0 or v in _BOTH_WAYS for v, p in zip(vals, parsed)]
        share = (sum(known) / len(known)) if known else 1.0
        oneway_n = int((parsed != 0).sum()) if len(vals) else 0
        if share >= 0.9:
            extra = ""
            t.entries.append(("oneway_field", _q(c), f"field '{_safe(c)}' looks like a one-way flag: {oneway_n} "
                              f"one-way of {n} features (yes/1 forward, -1 reverse){extra}", True))
        else:
            odd = sorted({v for v, k in zip(vals, known) if not k})
            t.entries.append(("oneway_field", _q(c), f"field '{_safe(c)}' is named like a one-way flag but values "
                              f"such as {_examples(odd)} are not yes/no/1/-1", False))
    # ---- level
    c = _field(frame, LEVEL_FIELDS)
    if c is not None:
        import pandas as pd

        vals = frame[c].dropna()
        num = pd.to_numeric(vals, errors="coerce")
        share = float(num.notna().mean()) if len(vals) else 0.0
        if share >= 0.9 and len(vals):
            lv = sorted(num.dropna().unique())
            t.entries.append(("level_field", _q(c), f"field '{_safe(c)}' looks like a vertical level: numbers "
                              f"({', '.join(_num(x) for x in lv[:6])}{'...' if len(lv) > 6 else ''}); crossings "
                              "at different levels stay unjoined", True))
        else:
            t.entries.append(("level_field", _q(c), f"field '{_safe(c)}' is named like a level but holds words "
                              f"(e.g. {_examples(_norm_values(vals).unique())}); levels must be numbers", False))
    # ---- all-season (roads)
    c = _field(frame, ALL_SEASON_FIELDS) if mode == "road" else None
    if c is not None:
        import pandas as pd

        vals = _norm_values(frame[c])
        ok = pd.to_numeric(vals, errors="coerce").notna() | vals.isin(_YES_NO)
        share = float(ok.mean()) if len(vals) else 0.0
        if share >= 0.9:
            t.entries.append(("all_season_field", _q(c), f"field '{_safe(c)}' looks like an all-season flag "
                              f"(1/0 or yes/no): {share:.0%} of {len(vals)} filled values", True))
        else:
            t.entries.append(("all_season_field", _q(c), f"field '{_safe(c)}' is named like an all-season flag but "
                              f"holds words (e.g. {_examples(vals[~ok].unique())}); the flag needs 1/0 or yes/no", False))
    return t


# ============================================================================ points and polygons
def classify_points(src: Source, have_rail: bool, have_cable: bool) -> tuple[str, str]:
    """Role of a point layer and why: 'stations:rail', 'stations:cable', 'hubs', 'settlements' or 'unknown'.

    The layer's name decides first (station, hub or settlement words); then a
    population-like field makes it settlements and a kind-like field hubs.
    """
    frame = src.frame
    w = _says(src.words, STATION_WORDS)
    if w:
        cw = _says(src.words, CABLE_WORDS)
        if cw and have_cable:
            return "stations:cable", f"the name says '{w}' and '{cw}'"
        if have_rail:
            return "stations:rail", f"the name says '{w}' and a rail layer is given"
        if have_cable:
            return "stations:cable", f"the name says '{w}' and a cable layer is given"
    w = _says(src.words, HUB_WORDS)
    if w:
        return "hubs", f"the name says '{w}'"
    w = _says(src.words, SETTLEMENT_WORDS)
    if w:
        return "settlements", f"the name says '{w}'"
    c = _pop_field(frame)
    if c is not None:
        return "settlements", f"field '{_safe(c)}' looks like a population"
    c = _field(frame, KIND_FIELDS)
    if c is not None:
        return "hubs", f"field '{_safe(c)}' looks like a kind of hub"
    return "unknown", "no station, hub or settlement word in the name, and no kind or population field"


def _pop_field(frame):
    for c in _fields(frame, POPULATION_FIELDS):
        share, _, filled = _positive_share(frame[c])
        if filled and share >= 0.5:
            return c
    return None


def _id_field(frame, prefer=()):
    """A field with unique, filled values, named like an id."""
    geom = frame.geometry.name
    cands = [c for c in frame.columns if c != geom and (str(c).lower() in prefer or str(c).lower() in ID_FIELDS
                                                         or str(c).lower().endswith("id"))]
    cands.sort(key=lambda c: (str(c).lower() not in prefer, str(c).lower() not in ID_FIELDS, str(c)))
    for c in cands:
        col = frame[c]
        if col.notna().all() and not col.astype(str).duplicated().any():
            return c
    return None


# ============================================================================ the study text
class _Writer:
    def __init__(self):
        self.lines: list[str] = []

    def add(self, line=""):
        self.lines.append(line)

    def setting(self, key, value, why, commented=False):
        body = f"{key} = {value}"
        self.add(f"# {body}" if commented else body)
        if why:
            self.lines[-1] = f"{self.lines[-1]:<40}  # {why}"

    def note(self, text):
        self.add(f"# {text}")

    def text(self) -> str:
        return "\n".join(self.lines).rstrip() + "\n"


def _rel(path: Path, base: Path) -> str:
    """``path`` relative to the study's folder (absolute when they share nothing but the root)."""
    p, b = Path(path).resolve(), base.resolve()
    if Path(os.path.commonpath([p, b])) == Path(p.anchor):
        return p.as_posix()
    return Path(os.path.relpath(p, b)).as_posix()


def _suggest_cell(bounds_list, margin_m) -> tuple[int, str]:
    b = [x for x in bounds_list if x is not None]
    if not b:
        return 100, "100 m cells (the extent could not be estimated)"
    w, s, e, n = min(x[0] for x in b), min(x[1] for x in b), max(x[2] for x in b), max(x[3] for x in b)
    lat = math.radians((s + n) / 2)
    # Degree lengths on the sphere of 6371 km (common practice for a rough extent).
    width = (e - w) * 111_195 * math.cos(lat) + 2 * margin_m
    height = (n - s) * 111_195 + 2 * margin_m
    for cell in _CELL_CHOICES:
        cells = width * height / cell ** 2
        if cells <= TARGET_CELLS:
            break
    return cell, (f"the layers span about {width / 1000:.0f} x {height / 1000:.0f} km with the margin: "
                  f"about {cells:,.0f} cells of {cell} m")


def starter_study(layer_args, out) -> tuple[str, list[str]]:
    """The starter study text for ``layer_args`` and notes for the terminal.

    Parameters
    ----------
    layer_args : list of str
        ``path``, ``path:layername`` or a ``.tif`` path each.
    out : path
        Where the study will be written (paths are made relative to its folder).

    Raises
    ------
    InputError
        A file is missing or unreadable, or no layer holds lines.
    """
    from .. import CAUTION
    from ..errors import InputError

    out = Path(out)
    base = out.parent if str(out.parent) else Path(".")
    sources = read_sources(layer_args)
    notes = [f"{s.arg}: {s.note}" for s in sources if s.note and s.family == "none"]
    lines = [s for s in sources if s.family == "lines"]
    if not lines:
        given = ", ".join(f"{s.arg} ({s.family if s.family != 'none' else 'no geometry'})" for s in sources)
        raise InputError(f"no line layer among the layers given ({given}); give at least one road, rail or "
                         "cable layer (path or path:layername)")
    tables = [line_suggestions(s) for s in lines]
    labels = [s.label for s in lines]
    for i, t in enumerate(tables):
        if labels.count(labels[i]) > 1:
            t.name = f"{labels[i]}_{labels[:i + 1].count(labels[i])}"
    proposals = [t for t in tables if _says(t.source.words, PROPOSAL_WORDS)]
    if len(proposals) == len(tables):
        proposals = []          # with nothing else to build on, a proposal is the network itself
    tables = [t for t in tables if t not in proposals]
    have_rail = any(t.mode == "rail" for t in tables)
    have_cable = any(t.mode == "cable" for t in tables)

    hubs, settlements, zones, barriers, extra_points = [], [], [], [], []
    for s in sources:
        if s.family == "points":
            role, why = classify_points(s, have_rail, have_cable)
            if role.startswith("stations:"):
                mode = role.split(":")[1]
                target = next((t for t in tables if t.mode == mode and t.stations is None), None)
                if target is not None:
                    target.stations = (s, why)
                    continue
                role, why = "unknown", f"{why}, but every {mode} layer already has its stations"
            {"hubs": hubs, "settlements": settlements}.get(role, extra_points).append((s, why))
        elif s.family == "polygons":
            w = _says(s.words, BARRIER_WORDS)
            (barriers if w else zones).append((s, f"the name says '{w}': impassable on foot" if w else
                                               "a polygon layer: population and minutes are summed per zone"))
    rasters = [s for s in sources if s.family == "raster"]
    pop_r, ter_r, other_r = [], [], []
    for s in rasters:
        tok = _tokens(s.path.stem)
        if _says(tok, POPULATION_RASTER_WORDS):
            pop_r.append(s)
        elif _says(tok, TERRAIN_RASTER_WORDS) or any(t in TERRAIN_RASTER_WORDS for t in tok):
            ter_r.append(s)
        else:
            other_r.append(s)

    w = _Writer()
    stems = ", ".join(dict.fromkeys(s.label for s in sources))
    w.note("A starter study written by geo-reach init. Every setting below is a suggestion made from layer")
    w.note("names and fields only; the comment beside it says why. Check each one, then run:")
    w.note(f"    geo-reach run {_safe(out, 200)}")
    w.note("Paths are relative to this file. " + CAUTION)
    w.add(f"title = {_q('Starter study: ' + _safe(stems, 120))}")
    w.add()
    w.add("[network]")
    w.setting("snap_m", "1.0", "join line ends closer than this, metres (raise for sloppy digitising)")
    w.setting("crs", _q("EPSG:NNNN"), "metric working CRS; default: the UTM zone of the data's centre",
              commented=True)
    w.add()

    # ---------------------------------------------------------------- lines
    for t in tables:
        s = t.source
        w.add("[[lines]]")
        w.setting("path", _q(_rel(s.path, base)), None)
        if s.layer:
            w.setting("layer", _q(s.layer), None)
        if t.name:
            w.setting("name", _q(t.name), f"another layer is also called '{_safe(s.label)}'")
        w.setting("mode", _q(t.mode), t.mode_why)
        if s.crs is None:
            w.setting("assume_crs", _q("EPSG:NNNN"), "the layer has no CRS: give its EPSG code", commented=True)
            notes.append(f"{s.arg}: no CRS; set assume_crs in the study")
        for key, value, why, active in t.entries:
            if key == "#":
                w.note(why)
            else:
                w.setting(key, value, why, commented=not active)
        if t.stations is not None:
            st, why = t.stations
            w.setting("stations", _q(_rel(st.path, base)), f"points where trips {'board' if t.mode == 'rail' else 'join'}"
                      f" this layer ({why})")
            if st.layer:
                w.setting("stations_layer", _q(st.layer), None)
        elif t.mode in ("rail", "cable"):
            w.setting("stations", _q("stations.gpkg"), f"no station layer given: without one the {t.mode} is not "
                      "joined to the roads", commented=True)
        if t.mode == "rail":
            w.setting("boarding_minutes", "10", "waiting and boarding at each station, minutes (our guess)",
                      commented=True)
        if t.class_rows:
            w.add("[lines.class_speeds]")
            w.note("km/h per class value; values left out use the default table, else speed_kmh or the "
                   "road default")
            for v, sp, active, why in t.class_rows:
                w.setting(_key(v), _num(sp), why, commented=not active)
            if t.class_note:
                w.note(t.class_note)
        w.add()

    # ---------------------------------------------------------------- hubs
    def points_table(name, src, why):
        frame = src.frame
        w.add(f"[{name}]")
        w.setting("path", _q(_rel(src.path, base)), why)
        if src.layer:
            w.setting("layer", _q(src.layer), None)
        prefer = {"hubs": ("hub_id",), "settlements": ("settlement_id",), "zones": ("zone_id", "district_id")}[name]
        idf = _id_field(frame, prefer)
        if idf is not None:
            w.setting("id_field", _q(idf), f"field '{_safe(idf)}' is unique and filled for every feature")
        if name == "hubs":
            kf = _field(frame, KIND_FIELDS)
            if kf is not None:
                kinds = sorted(map(str, _norm_values(frame[kf]).unique()))
                w.setting("kind_field", _q(kf), f"kinds found: {_safe(', '.join(kinds), 80)}; each kind also "
                          "gets its own minutes")
        if name == "settlements":
            pf = _pop_field(frame)
            if pf is None:
                w.setting("population_field", _q("population"), "no population-like field found: name the field "
                          "holding each settlement's population")
            else:
                share, med, filled = _positive_share(frame[pf])
                w.setting("population_field", _q(pf), f"field '{_safe(pf)}' looks like a population: "
                          f"{share:.0%} of {filled} filled values are positive numbers")
        nf = _field(frame, NAME_FIELDS)
        if nf is not None:
            w.setting("name_field", _q(nf), None)
        if src.crs is None:
            if name == "hubs":
                w.setting("assume_crs", _q("EPSG:NNNN"), "the layer has no CRS: give its EPSG code", commented=True)
            else:
                w.note("the layer has no CRS: give it one in a GIS before running")
            notes.append(f"{src.arg}: no CRS; see the study file")
        w.add()

    if hubs:
        points_table("hubs", *hubs[0])
        for s, why in hubs[1:]:
            w.note(f"{s.arg} also looks like hubs ({why}) but a study has one [hubs] table: merge the layers, or")
            w.note("add it in a scenario as add_hubs = { path = ..., layer = ... }")
            notes.append(f"{s.arg}: a second hubs layer; not used (see the comment in the study)")
    else:
        w.note("No hub layer found: add a [hubs] table (path, layer, id_field, kind_field) to route to hubs")
        w.note("and to draw the travel-time surface.")
        w.add()
        notes.append("no hub layer found: the study routes nowhere until you add [hubs]")
    for s, why in extra_points:
        w.note(f"{_safe(s.arg, 120)}: a point layer left out ({why}).")
        w.note("It can be used as [hubs] or [settlements], or as stations of a rail or cable layer.")
        w.add()
        notes.append(f"{s.arg}: a point layer left out ({why})")

    # ---------------------------------------------------------------- surface
    margin = 2000
    cell, cell_why = _suggest_cell([s.bounds_lonlat for s in sources], margin)
    w.add("[surface]")
    w.setting("cell_m", str(cell), cell_why)
    w.setting("margin_m", str(margin), "walking room around the network, metres")
    w.setting("bands", "[30, 60, 120]", "reach bands, minutes")
    for i, s in enumerate(pop_r):
        why = f"raster '{_safe(s.path.name)}': the name says population"
        if s.crs is None:
            why += "; it has no CRS: set one before running"
        w.setting("population", _q(_rel(s.path, base)), why if i == 0 else why + " (only one is used)",
                  commented=i > 0 or s.crs is None)
    for i, s in enumerate(ter_r):
        why = f"raster '{_safe(s.path.name)}': the name says terrain (elevation, metres; slopes slow walking)"
        if s.crs is None:
            why += "; it has no CRS: set one before running"
        w.setting("terrain", _q(_rel(s.path, base)), why if i == 0 else why + " (only one is used)",
                  commented=i > 0 or s.crs is None)
    for s in other_r:
        w.setting("population", _q(_rel(s.path, base)), f"raster '{_safe(s.path.name)}': the name says neither "
                  "population nor terrain; use it as one of them or as landcover", commented=True)
        notes.append(f"{s.arg}: a raster whose name says neither population nor terrain; left commented out")
    if not pop_r and settlements:
        w.note("no population raster: the settlements' population is put on the grid")
    for i, (s, why) in enumerate(barriers):
        w.setting("barriers", _q(_rel(s.path, base)), why + (" (only one is used)" if i else ""), commented=i > 0)
        if s.layer:
            w.setting("barriers_layer", _q(s.layer), None, commented=i > 0)
    w.setting("weak_minutes", "120", "cells beyond this many minutes form weak regions (default: the largest band)",
              commented=True)
    w.add()

    # ---------------------------------------------------------------- settlements and zones
    if settlements:
        points_table("settlements", *settlements[0])
        for s, why in settlements[1:]:
            w.note(f"{_safe(s.arg, 120)} also looks like settlements ({why}); a study has one [settlements] table.")
            w.add()
    for i, (s, why) in enumerate(zones):
        if i == 0:
            points_table("zones", s, why)
        else:
            w.note(f"{_safe(s.arg, 120)}: another polygon layer ({why}); a study has one [zones] table.")
            w.add()

    # ---------------------------------------------------------------- scenarios
    for t in proposals:
        s = t.source
        label = t.name or s.label
        w.note(f"Line layer '{_safe(label)}' looks like a proposal (the name says "
               f"'{_says(s.words, PROPOSAL_WORDS)}'), so it is a scenario, not part of today's network.")
        w.note(f"mode: {t.mode_why}")
        parts = [f"path = {_q(_rel(s.path, base))}"]
        if s.layer:
            parts.append(f"layer = {_q(s.layer)}")
        if t.name:
            parts.append(f"name = {_q(t.name)}")
        parts.append(f"mode = {_q(t.mode)}")
        for key, value, why, active in t.entries:
            if key != "#" and active:
                parts.append(f"{key} = {value}")
                w.note(f"{key}: {why}")
        active = [(v, sp) for v, sp, a, _ in t.class_rows if a]
        if active:
            parts.append("class_speeds = { " + ", ".join(f"{_key(v)} = {_num(sp)}" for v, sp in active) + " }")
            w.note("class_speeds: the default table's speeds of the classes found")
        unknown = [v for v, _, a, _ in t.class_rows if not a]
        if unknown:
            w.note(f"classes not in the default table (add them to class_speeds): {_examples(unknown, 8)}")
        if s.crs is None:
            w.note("the layer has no CRS: add assume_crs = \"EPSG:NNNN\" to the table below")
        w.add(f"[scenarios.{_key(label)}]")
        w.setting("description", _q(f"adds the line layer {_safe(label)}"), None)
        w.add("add_lines = [{ " + ", ".join(parts) + " }]")
        w.add()
        notes.append(f"{s.arg}: looks like a proposal; written as scenario '{label}'")
    first = tables[0]
    label = first.name or first.source.label
    fids = [int(f) for f in list(first.source.frame.index[:3])]
    w.note("A scenario changes the baseline and is compared with it. Uncomment and adapt, e.g.:")
    w.note("[scenarios.example]")
    w.note('description = "what the change is"')
    w.note('add_lines = [{ path = "proposed.gpkg", layer = "new_road", mode = "road", speed_kmh = 60 }]')
    w.note(f"close = [{{ layer = {_q(label)}, fids = {fids[:2]} }}]")
    if len(fids) > 2:
        w.note(f"upgrade = [{{ layer = {_q(label)}, fids = {fids[2:3]}, speed_kmh = 80 }}]")
    w.note('add_hubs = { path = "new_hubs.geojson", id_field = "hub_id" }')
    w.note("(fids are the feature ids shown as src_fid in the edges layer of a run)")
    return w.text(), notes

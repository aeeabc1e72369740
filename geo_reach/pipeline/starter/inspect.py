"""Inspect the user's layers for a starter study: sort them by geometry and guess roles and fields.

Only names and values are read; nothing is measured.  Fields are proposed by
their content as well as their names (a road class field is known by its
values, an id by unique filled codes, a name field by distinct words, a
population by non-negative counts that are not row numbers); where two fields
fit equally the starter file says it could not tell.  Every layer's fields are
listed with type, filled and distinct counts and sample values
(:func:`describe_fields`), and every guess carries the reason it was made.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from .fields import (ID_FIELDS, MAX_CLASSES, NAME_FIELDS, POPULATION_FIELDS, FieldInfo, _examples, _field,  # noqa: F401
                     _fields, _key, _n, _norm_values, _num, _positive_share, _q, _safe, _says, _tokens, class_candidates,
                     describe_fields, field_infos, field_list, id_candidates, name_candidates, population_candidates)

__all__ = ["Source", "read_sources", "line_suggestions", "classify_points", "LineTable", "FieldInfo", "field_infos",
           "describe_fields", "field_list", "id_candidates", "name_candidates", "population_candidates",
           "class_candidates"]

#: Raster file suffixes given as LAYER (read as [surface] rasters).
RASTER_SUFFIXES = (".tif", ".tiff")

# Field names that suggest a role, matched case-insensitively, in order of preference.
SPEED_FIELDS = ("speed_kmh", "speed", "maxspeed", "max_speed", "speed_limit", "speedlimit", "vel", "velocity")
CLASS_FIELDS = ("class", "road_class", "highway", "fclass", "type", "category", "roadclass", "road_type")
ONEWAY_FIELDS = ("oneway", "one_way", "direction", "dir")
LEVEL_FIELDS = ("level", "z_level", "zlevel", "layer", "bridge")
ALL_SEASON_FIELDS = ("all_season", "allseason", "all_weather", "paved", "surface")
KIND_FIELDS = ("kind", "type", "category", "service", "facility_type")

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

#: The suggested grid keeps below about this many cells (each takes ~100 bytes at peak).
TARGET_CELLS = 4_000_000
_CELL_CHOICES = (100, 200, 250, 500, 1000, 2000, 5000)

# Values that parse_oneway reads as "both ways" without being an error.
_BOTH_WAYS = {"no", "false", "0", "n", "both", "none", "", "two-way", "twoway", "b", "f"}
_YES_NO = {"yes", "no", "true", "false", "y", "n", "t", "f"}


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


def _lonlat_bounds(bounds, crs):
    try:
        from rasterio.warp import transform_bounds

        b = transform_bounds(crs, "EPSG:4326", *bounds)
        return b if all(math.isfinite(v) for v in b) else None
    except Exception:  # bounds only size the suggested grid; a failure just drops the estimate
        return None


def read_sources(args) -> list[Source]:
    """Read every LAYER argument (a multi-layer GeoPackage without a layer name gives all its layers)."""
    from ...errors import MissingInputError, where
    from ...ingest.layers import list_layers, parse_layer_ref

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

    from ...errors import InputError, MissingInputError, where

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
    from ...ingest.layers import GEOM_FAMILIES, read_frame

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
    from ...network.costs import DEFAULT_CLASS_SPEEDS_KMH, DEFAULT_SPEED_KMH

    for known in sorted(DEFAULT_CLASS_SPEEDS_KMH, key=len, reverse=True):
        if known in value:
            return DEFAULT_CLASS_SPEEDS_KMH[known], f"guess: contains '{known}'"
    d = DEFAULT_SPEED_KMH.get(mode, 40.0)
    return d, f"guess: the {mode} default"


def _class_rows(t: LineTable, vals, mode: str, table: dict) -> None:
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


def line_suggestions(src: Source) -> LineTable:
    """Mode and cost settings for one line layer, each with the reason for it."""
    from ...network.costs import DEFAULT_CLASS_SPEEDS_KMH, DEFAULT_SPEED_KMH, parse_oneway

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
    by_content = None
    if mode == "road" and (best is None or not (best[2] <= MAX_CLASSES or best[1] >= 0.5)):
        speed_fields = {k for k, _, _, a in t.entries if k == "speed_field" and a}
        found = [x for x in class_candidates(frame) if x[0] != (best[0] if best else None)]
        confident = [x for x in found if x[1] >= 0.5]
        if confident:
            by_content = confident[0]
        elif len(found) == 1 and not speed_fields:
            by_content = found[0]
        elif len(found) > 1 and not speed_fields:
            t.entries.append(("#", None, "could not tell which field holds the road class; fields that repeat a "
                              f"few values: {', '.join(_safe(x[0]) for x in found[:6])} (all fields are listed "
                              "above): set class_field and a class_speeds table", None))
    if mode == "road" and by_content is not None:
        c, known, distinct, vals = by_content
        confident = known >= 0.5
        t.entries.append(("class_field", _q(c), f"field '{_safe(c)}' is not named like a class but its values "
                          + (f"are road classes: {known:.0%} of features in the default speed table"
                             if confident else f"repeat {distinct} values like a class (e.g. "
                             f"{_examples(vals.value_counts().index, 3)}); set their speeds below"), True))
        _class_rows(t, vals, mode, table)
    elif mode == "road" and best is not None:
        c, known, distinct, vals = best
        usable = distinct <= MAX_CLASSES or known >= 0.5
        if usable:
            t.entries.append(("class_field", _q(c), f"field '{_safe(c)}' looks like a road class: {distinct} "
                              f"value{'s' if distinct != 1 else ''} found, {known:.0%} of features in the default "
                              "speed table", True))
            _class_rows(t, vals, mode, table)
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
    """A field named like a population holding mostly positive numbers (the name decides here)."""
    for c in _fields(frame, POPULATION_FIELDS):
        share, _, filled = _positive_share(frame[c])
        if filled and share >= 0.5:
            return c
    return None


def _id_field(frame, prefer=()):
    """The best field with unique, filled values (:func:`id_candidates`), or None."""
    found = id_candidates(frame, prefer)
    return found[0][0] if found else None



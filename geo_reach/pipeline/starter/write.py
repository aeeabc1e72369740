"""Write a commented starter study for the user's layers (``geo-reach init``).

Each layer is read and sorted by its geometry (:mod:`.inspect`): line layers
become ``[[lines]]`` tables, point layers the hubs, settlements or stations,
polygon layers the zones (or barriers, when the name says water), and
GeoTIFFs the population or terrain of ``[surface]``.  Every suggestion
carries a comment saying why it was made, so the analyst can check it before
the first run.  The study is a starting point: the analyst decides every
speed, field and layer.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

from .inspect import (_CELL_CHOICES, BARRIER_WORDS, KIND_FIELDS, POPULATION_RASTER_WORDS, PROPOSAL_WORDS,
                      TARGET_CELLS, TERRAIN_RASTER_WORDS, _examples, _field, _key, _norm_values, _num, _q, _safe, _says,
                      _tokens, class_candidates, classify_points, describe_fields, field_list, id_candidates,
                      line_suggestions, name_candidates, population_candidates, read_sources)

__all__ = ["starter_study", "write_checked"]

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
    from ..._meta import CAUTION
    from ...errors import InputError

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
    w.note("A starter study written by geo-reach init. Every setting below is a suggestion made from the layers'")
    w.note("names, field names and field values (listed above each table); the comment beside it says why.")
    w.note("Check each one, then run:")
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
        for line in describe_fields(s.frame, s.label):
            w.note(line)
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
        for line in describe_fields(frame, src.label):
            w.note(line)
        fields = field_list(frame)
        w.add(f"[{name}]")
        w.setting("path", _q(_rel(src.path, base)), why)
        if src.layer:
            w.setting("layer", _q(src.layer), None)
        prefer = {"hubs": ("hub_id",), "settlements": ("settlement_id",), "zones": ("zone_id", "district_id")}[name]
        ids = id_candidates(frame, prefer)
        idf = ids[0][0] if ids else None
        if idf is not None:
            w.setting("id_field", _q(idf), ids[0][1])
            if len(ids) > 1:
                w.note(f"also unique and filled: {', '.join(_safe(c) for c, _ in ids[1:6])}")
        else:
            w.note(f"no field is unique and filled for every feature, so features are numbered from 1; fields "
                   f"found: {_safe(fields, 200)}")
        if name == "hubs":
            kf = _field(frame, KIND_FIELDS)
            kwhy = None
            if kf is None:
                reps = [x for x in class_candidates(frame, exclude=[idf]) if 1 < x[2] <= 12]
                if len(reps) == 1:
                    kf = reps[0][0]
                    kwhy = f"field '{_safe(kf)}' is not named like a kind but repeats {reps[0][2]} values"
                elif reps:
                    w.note(f"could not tell which field holds the kind of hub ({', '.join(_safe(x[0]) for x in reps)}"
                           " repeat a few values): set kind_field to give each kind its own minutes")
            if kf is not None:
                kinds = sorted(map(str, _norm_values(frame[kf]).unique()))
                w.setting("kind_field", _q(kf), (kwhy + "; " if kwhy else "") + f"kinds found: "
                          f"{_safe(', '.join(kinds), 80)}; each kind also gets its own minutes")
        if name == "settlements":
            pops = population_candidates(frame)
            if not pops:
                w.setting("population_field", _q("population"), "no population-like field found: name the field "
                          f"holding each settlement's population (fields found: {_safe(fields, 160)})")
            else:
                w.setting("population_field", _q(pops[0][0]), pops[0][1])
                if len(pops) > 1:
                    w.note(f"other fields that may hold people: {', '.join(_safe(c) for c, _ in pops[1:6])}")
        names = name_candidates(frame, exclude=[idf])
        if names:
            w.setting("name_field", _q(names[0][0]), names[0][1])
        else:
            w.note(f"no field reads as names (text, mostly distinct); set name_field to label the {name} in tables "
                   f"and maps (fields found: {_safe(fields, 160)})")
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
        for line in describe_fields(s.frame, s.label):
            w.note(line)
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
        for line in describe_fields(s.frame, s.label):
            w.note(line)
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
        for line in describe_fields(s.frame, s.label):
            w.note(line)
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


def write_checked(out: Path, text: str) -> None:
    """Validate the study text against the schema, then write it atomically."""
    import tomllib

    from ...errors import GeoReachError
    from ...export.atomic import atomic_path
    from ...study import study_from_dict

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:  # a bug here, never the user's data
        raise GeoReachError(f"init wrote TOML that does not parse ({err}); please report it") from err
    study_from_dict(raw, out.parent if str(out.parent) else Path("."), out, text)
    with atomic_path(out) as tmp:
        tmp.write_text(text, encoding="utf-8")

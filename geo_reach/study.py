"""Study files: the whole analysis described in one TOML file, validated before any work.

A study names the line layers with their cost rules, the hubs, the rasters
or settlements, zones, barriers, the grid, the thresholds and the scenarios.
Paths are relative to the study file.  :func:`load_study` validates
everything up front: an unknown key at any level, a wrong type or a missing
file is one :class:`~geo_reach.errors.InputError` naming the dotted key and,
where the text shows it, its line.

Example (the invented demo region ships one as ``data_samples/study.toml``)::

    title = "Example study"

    [network]
    snap_m = 1.0

    [[lines]]
    path = "region.gpkg"
    layer = "roads"
    mode = "road"
    class_field = "class"

    [hubs]
    path = "hubs.geojson"
    id_field = "hub_id"
    kind_field = "kind"

    [surface]
    cell_m = 100
    bands = [30, 60, 120]

    [criticality]              # every link closed in turn (layer link_criticality)
    links = "all"              # or a file of edge ids, or [12, 40, 41]

    [indices]                  # accessibility indices (layer access_index)
    measures = ["2sfca", "gravity"]
    within_minutes = 60
    decay = "exponential"
    decay_param = 0.05

    [compute]                  # where the sections' independent work runs (default: here)
    workers = 2                # a local cluster; or scheduler = "tcp://host:8786"
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from .analysis.indices.measures import DECAYS as _DECAYS
from .analysis.indices.measures import MEASURES as _MEASURES
from .analysis.options import (DIRECTIONS, ComputeOptions, CriticalityOptions, IndicesOptions, MetricsOptions,
                               RoutingOptions, SurfaceOptions)
from .errors import GeoReachError, InputError, MissingInputError
from .network.build import BuildOptions
from .network.weights import WEIGHT_NAMES

__all__ = ["Study", "OutputOptions", "load_study", "study_from_dict", "SCHEMA", "DOTTED_KEYS"]

# --------------------------------------------------------------------------- schema
# A schema entry is a type (str, float, int, bool), a ("file", family) pair for
# a path that must exist, a dict (a table with these keys), [dict] (an array
# of such tables), ("list", type), ("map", type) (a table of free keys with
# values of that type), or ("choice", options).
_FILE = ("file", None)
_LINE_TABLE = {
    "path": _FILE, "layer": str, "mode": ("choice", ("road", "rail", "cable")), "name": str,
    "speed_field": str, "class_field": str, "class_speeds": ("map", float), "speed_kmh": float,
    "oneway_field": str, "level_field": str, "all_season_field": str,
    "stations": _FILE, "stations_layer": str, "boarding_minutes": float, "assume_crs": str,
}
_POINTS_TABLE = {"path": _FILE, "layer": str, "id_field": str, "kind_field": str, "name_field": str,
                 "assume_crs": str}
SCHEMA: dict = {
    "title": str,
    "network": {"crs": str, "snap_m": float, "dangle_m": float, "access_snap_m": float, "prebuilt": _FILE,
                "transfer_max_m": float, "transfer_walk_kmh": float},
    "lines": [_LINE_TABLE],
    "hubs": _POINTS_TABLE,
    "routing": {"weight": ("choice", WEIGHT_NAMES),
                "direction": ("choice", DIRECTIONS),
                "max_access_m": float, "walk_kmh": float},
    "metrics": {"samples": int, "seed": int, "exact": bool, "profile_sources": int, "node_figures": bool},
    "surface": {"cell_m": float, "margin_m": float, "extent": ("list", float), "terrain": _FILE,
                "landcover": _FILE, "landcover_speeds": ("map", float), "barriers": _FILE,
                "barriers_layer": str, "population": _FILE, "bands": ("list", float),
                "weak_minutes": float, "neighbours": int},
    "settlements": {"path": _FILE, "layer": str, "id_field": str, "name_field": str,
                    "population_field": str},
    "zones": {"path": _FILE, "layer": str, "id_field": str, "name_field": str},
    "outputs": {"map": bool, "basemap": bool, "profile_png": bool},
    "criticality": {"links": ("links",), "hazard": _FILE, "hazard_layer": str, "hazard_raster": _FILE,
                    "hazard_above": float, "closes_bridges": bool},
    "indices": {"measure": ("choice", _MEASURES), "measures": ("list", ("choice", _MEASURES)), "within_minutes": float,
                "decay": ("choice", _DECAYS), "decay_param": float, "capacity_field": str,
                "zone_minutes": ("list", float), "zone_weights": ("list", float)},
    "compute": {"workers": int, "scheduler": str, "timeout_s": float},
    "scenarios": ("map", {
        "description": str,
        "add_lines": [_LINE_TABLE],
        "add_hubs": _POINTS_TABLE,
        "remove_hubs": ("list", str),
        "close": [{"layer": str, "fids": ("list", int), "within": _FILE, "within_layer": str}],
        "upgrade": [{"layer": str, "fids": ("list", int), "within": _FILE, "within_layer": str,
                     "speed_kmh": float, "speed_factor": float}],
    }),
}


def _type_name(t) -> str:
    if isinstance(t, type):
        return {"str": "a string", "float": "a number", "int": "an integer", "bool": "true or false"}[t.__name__]
    if isinstance(t, dict):
        return "a table"
    if isinstance(t, list):
        return "an array of tables ([[...]])"
    kind = t[0]
    if kind == "file":
        return "a file path (string)"
    if kind == "list":
        return f"an array of {_type_name(t[1]).split(' ', 1)[1]}s"
    if kind == "map":
        return "a table"
    if kind == "choice":
        return "one of " + ", ".join(repr(o) for o in t[1])
    if kind == "links":
        return '"all", a file of edge ids, or an array of edge ids'
    return str(t)


class _Locator:
    """Find the line of a dotted key in the TOML text (best effort; tomllib keeps no positions)."""

    def __init__(self, text: str):
        self.lines = text.splitlines()

    def line_of(self, dotted: str) -> int | None:
        parts = [p for p in re.split(r"\.", re.sub(r"\[\d+\]", "", dotted))]
        key = parts[-1]
        table = ".".join(parts[:-1])
        current = ""
        candidates = []
        for i, raw in enumerate(self.lines, 1):
            s = raw.strip()
            m = re.match(r"^\[\[?\s*([^\]]+?)\s*\]\]?", s)
            if m:
                current = m.group(1).replace('"', "")
                if current == ".".join(parts) or (not table and current == key):
                    candidates.append(i)
                continue
            m = re.match(r'^"?([A-Za-z0-9_\-]+)"?\s*=', s)
            if m and m.group(1) == key and current == table:
                candidates.append(i)
        return candidates[0] if candidates else None


#: Where each option of the typed option classes sits in a study file (for messages).
DOTTED_KEYS = {
    **{k: f"network.{k}" for k in ("crs", "snap_m", "dangle_m", "access_snap_m", "transfer_max_m",
                                   "transfer_walk_kmh", "prebuilt")},
    **{k: f"routing.{k}" for k in ("weight", "direction", "max_access_m", "walk_kmh")},
    **{k: f"metrics.{k}" for k in ("samples", "seed", "exact", "profile_sources", "node_figures")},
    **{k: f"surface.{k}" for k in ("cell_m", "margin_m", "bands", "weak_minutes", "extent", "terrain",
                                   "landcover", "landcover_speeds", "barriers", "population", "neighbours")},
    "hub_id_field": "hubs.id_field", "hub_kind_field": "hubs.kind_field", "hub_name_field": "hubs.name_field",
    "population_field": "settlements.population_field", "zone_id_field": "zones.id_field",
    **{k: f"compute.{k}" for k in ("workers", "scheduler", "timeout_s")},
    **{k: f"criticality.{k}" for k in ("links", "hazard", "hazard_raster", "hazard_above")},
    **{k: f"indices.{k}" for k in ("measure", "measures", "within_minutes", "decay", "decay_param", "capacity_field",
                                   "zone_minutes", "zone_weights")},
}

#: Keys of the ``[surface]`` table that name input files rather than options.
SURFACE_FILES = ("terrain", "landcover", "landcover_speeds", "barriers", "barriers_layer", "population")


@dataclass(frozen=True)
class OutputOptions:
    """Which optional outputs a run writes.

    Attributes
    ----------
    map : bool
        The self-contained HTML map.
    basemap : bool
        A web basemap under the map (needs the internet to show).
    profile_png : bool
        The reach profile chart.
    """

    map: bool = True
    basemap: bool = False
    profile_png: bool = True


@dataclass
class Study:
    """A validated study: the TOML as read (``raw``), typed options with defaults applied, and paths.

    Options are the typed classes that hold the one set of defaults
    (:class:`~geo_reach.network.build.BuildOptions`,
    :class:`~geo_reach.analysis.options.RoutingOptions` ...); input tables
    (``lines``, ``hubs``, ``settlements``, ``zones``, ``scenarios``) stay as
    read, with paths relative to ``base``.
    """

    path: Path | None
    raw: dict
    base: Path
    title: str = "geo-reach study"
    build: BuildOptions = field(default_factory=BuildOptions)
    prebuilt: str | None = None
    lines: list = field(default_factory=list)
    hubs: dict | None = None
    routing: RoutingOptions = field(default_factory=RoutingOptions)
    metrics: MetricsOptions = field(default_factory=MetricsOptions)
    surface: SurfaceOptions | None = None
    surface_files: dict = field(default_factory=dict)
    settlements: dict | None = None
    zones: dict | None = None
    outputs: OutputOptions = field(default_factory=OutputOptions)
    scenarios: dict = field(default_factory=dict)
    compute: ComputeOptions = field(default_factory=ComputeOptions)
    criticality: CriticalityOptions | None = None
    indices: IndicesOptions | None = None

    @property
    def name(self) -> str:
        return self.path.stem if self.path else "study"

    def blame(self, err: GeoReachError) -> GeoReachError:
        """``err`` with its option named as the study file's dotted key (and line), for a file study.

        An error about an option (its ``key`` set) raised anywhere while this
        study runs is shown where the user wrote the value: ``file 's.toml':
        routing.walk_kmh (line 12): ...``.  Errors without a key, and studies
        made in memory by a command (the command line names its flags),
        are returned unchanged.
        """
        if self.path is None or getattr(err, "key", None) not in DOTTED_KEYS:
            return err
        dotted = DOTTED_KEYS.get(err.key, err.key)
        line = _Locator(self._text).line_of(dotted) if getattr(self, "_text", None) else None
        msg = str(err)
        name = f"{dotted}{f' (line {line})' if line else ''}"
        msg = msg[len(err.key):].lstrip(" :") if msg.startswith(err.key) else msg
        out = err.with_message(f"file '{self.path}': {name}: {msg}")
        out.key = None
        return out

    def input_files(self) -> list[Path]:
        """Every file the study reads (for checksums in the summary)."""
        out = []

        def walk(node, schema):
            if isinstance(schema, dict) and isinstance(node, dict):
                for k, v in node.items():
                    walk(v, schema.get(k))
            elif isinstance(schema, list) and isinstance(node, list):
                for v in node:
                    walk(v, schema[0])
            elif isinstance(schema, tuple) and schema[0] == "map" and isinstance(node, dict):
                for v in node.values():
                    walk(v, schema[1])
            elif (schema == _FILE or schema == ("links",)) and isinstance(node, str) and node != "all":
                out.append(self.resolve(node))

        walk(self.raw, SCHEMA)
        return sorted(set(out))

    def resolve(self, p: str) -> Path:
        q = Path(p)
        return q if q.is_absolute() else (self.base / q)


def _check(node, schema, dotted, errors, base, loc):
    def fail(msg, key=dotted):
        line = loc.line_of(key) if loc else None
        errors.append(f"{key}{f' (line {line})' if line else ''}: {msg}")

    if isinstance(schema, dict):
        if not isinstance(node, dict):
            return fail(f"must be {_type_name(schema)}")
        for k, v in node.items():
            sub = f"{dotted}.{k}" if dotted else k
            if k not in schema:
                return fail(f"unknown key; expected one of {', '.join(sorted(schema))}", sub)
            _check(v, schema[k], sub, errors, base, loc)
        return None
    if isinstance(schema, list):
        if not isinstance(node, list) or not all(isinstance(x, dict) for x in node):
            return fail(f"must be {_type_name(schema)}")
        for i, v in enumerate(node):
            _check(v, schema[0], f"{dotted}[{i}]", errors, base, loc)
        return None
    if isinstance(schema, tuple):
        kind = schema[0]
        if kind == "file":
            if not isinstance(node, str):
                return fail("must be a file path (string)")
            if base is None:   # a study built in memory by a command: files are checked as they are read
                return None
            q = Path(node)
            q = q if q.is_absolute() else base / q
            if not q.exists():
                return fail(f"file '{node}' not found (paths are relative to the study file)")
            return None
        if kind == "links":
            if isinstance(node, list):
                if not all(isinstance(v, int) and not isinstance(v, bool) for v in node):
                    return fail("give edge ids as whole numbers (edge_id of the edges layer)")
                return None
            if not isinstance(node, str):
                return fail(f"must be {_type_name(schema)}")
            if node == "all" or base is None:
                return None
            q = Path(node)
            q = q if q.is_absolute() else base / q
            if not q.is_file():
                return fail(f"file '{node}' not found; give \"all\", a file of edge ids (paths are relative to the "
                            "study file) or an array of edge ids")
            return None
        if kind == "choice":
            if node not in schema[1]:
                return fail(f"{node!r} is not {_type_name(schema)}")
            return None
        if kind == "list":
            if not isinstance(node, list):
                return fail(f"must be {_type_name(schema)}")
            for i, v in enumerate(node):
                _check(v, schema[1], f"{dotted}[{i}]", errors, base, loc)
            return None
        if kind == "map":
            if not isinstance(node, dict):
                return fail("must be a table")
            for k, v in node.items():
                _check(v, schema[1], f"{dotted}.{k}", errors, base, loc)
            return None
    if schema is float:
        if isinstance(node, bool) or not isinstance(node, (int, float)):
            return fail("must be a number")
        return None
    if schema is int:
        if isinstance(node, bool) or not isinstance(node, int):
            return fail("must be an integer")
        return None
    if schema is bool:
        if not isinstance(node, bool):
            return fail("must be true or false")
        return None
    if schema is str:
        if not isinstance(node, str):
            return fail("must be a string")
        return None
    return fail("unsupported value")


#: Keys whose numbers must be positive (> 0) or not negative (>= 0), wherever they appear.
_POSITIVE = {"speed_kmh", "speed_factor"}
_NOT_NEGATIVE = {"boarding_minutes"}


def _check_ranges(node, dotted, errors, loc):
    """Numbers out of range (a zero speed would make every trip infinite), with the dotted key."""
    if isinstance(node, dict):
        for k, v in node.items():
            sub = f"{dotted}.{k}" if dotted else k
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                bad = (k in _POSITIVE and not v > 0) or (k in _NOT_NEGATIVE and not v >= 0) or \
                      (dotted.endswith("class_speeds") and not v > 0)
                if bad:
                    line = loc.line_of(sub) if loc else None
                    need = "zero or more" if k in _NOT_NEGATIVE else "a positive number"
                    errors.append(f"{sub}{f' (line {line})' if line else ''}: {v} must be {need}")
                    return
            _check_ranges(v, sub, errors, loc)
    elif isinstance(node, list):
        for i, v in enumerate(node):
            _check_ranges(v, f"{dotted}[{i}]", errors, loc)


def study_from_dict(raw: dict, base: Path, path: Path | None = None, text: str | None = None,
                    check_files: bool = True) -> Study:
    """Validate ``raw`` (a parsed study) and return a :class:`Study`.

    Commands build their study in memory with ``check_files=False``: the files
    are then checked as they are read, with messages naming the file as the
    user typed it.

    Raises
    ------
    InputError
        The first problem found, naming the dotted key (and its line when
        ``text`` is given).
    """
    errors: list[str] = []
    loc = _Locator(text) if text is not None else None
    _check(raw, SCHEMA, "", errors, base if check_files else None, loc)
    if not errors:
        _check_ranges(raw, "", errors, loc)
    where_ = f"file '{path}': " if path else ""
    if errors:
        raise InputError(f"{where_}{errors[0]}")
    if not raw.get("lines") and not raw.get("network", {}).get("prebuilt"):
        raise InputError(f"{where_}lines: the study names no line layer; add a [[lines]] table with a path")
    for i, ln in enumerate(raw.get("lines", [])):
        if "path" not in ln:
            raise InputError(f"{where_}lines[{i}].path: missing; every [[lines]] table needs a path")
    for key in ("hubs", "settlements", "zones"):
        if key in raw and "path" not in raw[key]:
            raise InputError(f"{where_}{key}.path: missing; the [{key}] table needs a path")
    if "settlements" in raw and "population_field" not in raw["settlements"]:
        raise InputError(f"{where_}settlements.population_field: missing; name the field holding each "
                         "settlement's population")
    for name, sc in raw.get("scenarios", {}).items():
        for i, ln in enumerate(sc.get("add_lines", [])):
            if "path" not in ln:
                raise InputError(f"{where_}scenarios.{name}.add_lines[{i}].path: missing")
        for key in ("close", "upgrade"):
            for i, item in enumerate(sc.get(key, [])):
                at = f"{where_}scenarios.{name}.{key}[{i}]"
                if "layer" not in item:
                    raise InputError(f"{at}.layer: missing; name the line layer (its [[lines]] name or layer)")
                if ("fids" in item) == ("within" in item):
                    raise InputError(f"{at}: give either fids (source feature ids) or within (a polygon layer)")
                if key == "upgrade" and ("speed_kmh" in item) == ("speed_factor" in item):
                    raise InputError(f"{at}: give either speed_kmh or speed_factor (e.g. 0.5 for a wet-season slowdown)")
                for k in ("speed_kmh", "speed_factor"):
                    if k in item and item[k] <= 0:
                        raise InputError(f"{at}.{k}: must be positive; close the features instead")
    _check_names_and_crs(raw, where_, loc)
    _check_sections(raw, where_, loc)
    study = Study(path=path, raw=raw, base=base, title=raw.get("title", path.stem if path else "geo-reach study"),
                  lines=list(raw.get("lines", [])), hubs=raw.get("hubs"), settlements=raw.get("settlements"),
                  zones=raw.get("zones"), scenarios=dict(raw.get("scenarios", {})))
    study._text = text
    surface = raw.get("surface")
    network = dict(raw.get("network", {}))
    try:
        study.prebuilt = network.pop("prebuilt", None)
        study.build = BuildOptions(**network)
        study.routing = RoutingOptions(**raw.get("routing", {}))
        study.metrics = MetricsOptions(**raw.get("metrics", {}))
        if surface is not None:
            study.surface = SurfaceOptions(**{k: v for k, v in surface.items() if k not in SURFACE_FILES})
            study.surface_files = {k: v for k, v in surface.items() if k in SURFACE_FILES}
        study.outputs = OutputOptions(**raw.get("outputs", {}))
        study.compute = ComputeOptions(**raw.get("compute", {}))
        if "criticality" in raw:
            c = dict(raw["criticality"])
            if isinstance(c.get("links"), list):
                c["links"] = tuple(c["links"])
            study.criticality = CriticalityOptions(**c)
        if "indices" in raw:
            t = dict(raw["indices"])
            one = t.pop("measure", None)
            t["measures"] = tuple(t.get("measures", ())) or (one,)
            for k in ("zone_minutes", "zone_weights"):
                if k in t:
                    t[k] = tuple(float(v) for v in t[k])
            study.indices = IndicesOptions(**t)
    except GeoReachError as err:
        blamed = study.blame(err)
        if blamed is err and path is not None:
            raise err.with_message(f"{where_}{err}") from err
        raise blamed from err
    return study


#: Scenario names: they become layer, raster and sheet names, so letters, digits, '_' and '-' only.
SCENARIO_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_-]{0,39}$")


def _check_names_and_crs(raw: dict, where_: str, loc) -> None:
    """Scenario names usable as layer names, and every CRS string one pyproj knows (before any work)."""
    from .ingest.layers import parse_crs

    def line(dotted):
        n = loc.line_of(dotted) if loc else None
        return f" (line {n})" if n else ""

    for name in raw.get("scenarios", {}):
        if not SCENARIO_NAME.match(name):
            shown = name if len(name) <= 40 else name[:40] + "..."
            raise InputError(f"{where_}scenarios.{shown!r}{line('scenarios.' + name)}: a scenario name must start "
                             "with a letter and hold only letters, digits, '_' and '-' (at most 40); it names "
                             "layers and files. Put a longer text in its description")
    checks = [("network.crs", raw.get("network", {}).get("crs"))]
    for i, t in enumerate(raw.get("lines", [])):
        checks.append((f"lines[{i}].assume_crs", t.get("assume_crs")))
    for key in ("hubs", "settlements", "zones"):
        if isinstance(raw.get(key), dict):
            checks.append((f"{key}.assume_crs", raw[key].get("assume_crs")))
    for name, sc in raw.get("scenarios", {}).items():
        for i, t in enumerate(sc.get("add_lines", [])):
            checks.append((f"scenarios.{name}.add_lines[{i}].assume_crs", t.get("assume_crs")))
        if isinstance(sc.get("add_hubs"), dict):
            checks.append((f"scenarios.{name}.add_hubs.assume_crs", sc["add_hubs"].get("assume_crs")))
    for dotted, value in checks:
        if value is not None:
            try:
                parse_crs(value, dotted)
            except InputError as err:
                raise InputError(f"{where_}{dotted}{line(dotted)}: {str(err)[len(dotted) + 1:]}") from err


def _check_sections(raw: dict, where_: str, loc) -> None:
    """``[compute]``, ``[criticality]`` and ``[indices]``: keys that only make sense together (before any work)."""

    def fail(dotted, msg):
        n = loc.line_of(dotted) if loc else None
        if n is None and loc and "." in dotted:          # a missing key: the line of its table
            n = loc.line_of(dotted.rsplit(".", 1)[0])
        raise InputError(f"{where_}{dotted}{f' (line {n})' if n else ''}: {msg}")

    comp = raw.get("compute", {})
    if "workers" in comp and "scheduler" in comp:
        fail("compute.scheduler", "give either workers (a local cluster) or scheduler (a running one), not both")
    if "workers" in comp and comp["workers"] < 1:
        fail("compute.workers", f"{comp['workers']}: give 1 or more worker processes (leave it out to run here)")
    if "timeout_s" in comp and not comp["timeout_s"] > 0:
        fail("compute.timeout_s", f"{comp['timeout_s']}: give a positive number of seconds")
    crit = raw.get("criticality")
    if crit is not None:
        if "hubs" not in raw:
            fail("criticality", "needs hubs: add a [hubs] table")
    if crit is not None:
        if "hazard" in crit and "hazard_raster" in crit:
            fail("criticality.hazard_raster", "give either hazard (polygons) or hazard_raster, not both")
        if "hazard_raster" in crit and "hazard_above" not in crit:
            fail("criticality.hazard_raster", "needs hazard_above, the value above which a cell is hazard")
        if "hazard_above" in crit and "hazard_raster" not in crit:
            fail("criticality.hazard_above", "is used with hazard_raster; give the raster too")
        if "hazard_layer" in crit and "hazard" not in crit:
            fail("criticality.hazard_layer", "is used with hazard; give the hazard file too")
        hazard = "hazard" in crit or "hazard_raster" in crit
        if "closes_bridges" in crit and not hazard:
            fail("criticality.closes_bridges", "is used with hazard or hazard_raster; give a hazard too")
        if hazard and crit.get("links", "all") != "all":
            fail("criticality.links", "examines links one at a time; a hazard closes its links together - give "
                                      "one or the other")
    ind = raw.get("indices")
    if ind is not None:
        for need in ("hubs", "settlements"):
            if need not in raw:
                fail("indices", f"needs {need}: add a [{need}] table")
        if "measure" in ind and "measures" in ind:
            fail("indices.measures", "give either measure (one) or measures (an array), not both")
        measures = list(ind.get("measures", [])) or ([ind["measure"]] if "measure" in ind else [])
        if not measures:
            fail("indices", f"name the measure: measure = one of {', '.join(repr(m) for m in _MEASURES)}")
        t = ind.get("within_minutes")
        if t is not None and not t > 0:
            fail("indices.within_minutes", f"{t}: give a positive number of minutes")
        for m in measures:
            if t is None and m not in ("gravity",) and not (m == "e2sfca" and "zone_minutes" in ind):
                fail("indices.within_minutes", f"missing; measure {m} needs the catchment in minutes, e.g. 30")
        if "gravity" in measures:
            if "decay" not in ind or "decay_param" not in ind:
                fail("indices.decay", "measure gravity needs decay (exponential, power or gaussian) and "
                                      "decay_param B")
            if not ind["decay_param"] > 0:
                fail("indices.decay_param", f"{ind['decay_param']}: give a positive number")
        elif "decay" in ind or "decay_param" in ind:
            fail("indices.decay", "decay and decay_param apply to measure gravity only")
        if ("zone_minutes" in ind or "zone_weights" in ind) and "e2sfca" not in measures:
            fail("indices.zone_minutes", "zone_minutes and zone_weights apply to measure e2sfca only")
        if "e2sfca" in measures and ("zone_minutes" in ind or "zone_weights" in ind):
            from .analysis.indices.measures import E2SFCA_WEIGHTS, E2SFCA_ZONE_FRACTIONS, check_zones
            from .errors import OptionError

            zw = ind.get("zone_weights", list(E2SFCA_WEIGHTS))
            tt = t if t is not None else ind["zone_minutes"][-1]
            zm = ind.get("zone_minutes", [f * tt for f in E2SFCA_ZONE_FRACTIONS])
            try:
                check_zones(zm, zw, tt)
            except OptionError as err:
                fail("indices.zone_minutes", str(err).replace("--zone-minutes", "zone_minutes")
                     .replace("--zone-weights", "zone_weights").replace("--within-minutes", "within_minutes"))


def load_study(path) -> Study:
    """Read and validate a study TOML file.

    Raises
    ------
    MissingInputError
        The file does not exist.
    InputError
        Not valid TOML (with its line), or a key problem (dotted key and line).
    """
    path = Path(path)
    if not path.exists():
        raise MissingInputError(f"file '{path}': study file not found; check the path or run geo-reach init")
    if path.is_dir():
        raise InputError(f"file '{path}': is a folder, not a study file; give the study's .toml file")
    try:
        text = path.read_bytes().decode("utf-8")
    except UnicodeDecodeError as err:
        line = path.read_bytes()[: err.start].count(b"\n") + 1
        raise InputError(f"file '{path}': line {line}: not UTF-8 text (byte 0x{err.object[err.start]:02x}); "
                         "save the study file as UTF-8") from None
    except OSError as err:
        raise InputError(f"file '{path}': cannot be read ({err.strerror}); check its permissions") from None
    if text.startswith("\ufeff"):   # some editors write one; TOML (and tomllib) reads it as a stray character
        raise InputError(f"file '{path}': line 1: starts with a byte-order mark (U+FEFF, invisible in most "
                         "editors); save the study file as UTF-8 without BOM")
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise InputError(f"file '{path}': not valid TOML ({err}); fix the line shown") from err
    return study_from_dict(raw, path.parent, path, text)

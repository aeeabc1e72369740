"""Planner-ready tables: settlements, districts (zones) and scenario changes, rounded as reports print them.

The GeoPackage layers keep every figure at full precision.  These tables are
what a planner pastes into a report: one row per settlement or district,
named with the glossary's names (:mod:`geo_reach.glossary`), with hub names
beside hub ids, no repeated columns, and figures rounded as the trade
reports them (common practice): minutes and kilometres to 0.1, people to
whole numbers, shares as percent to 0.1.  Figures are rounded one by one,
so a change may differ by 0.1 from after minus before as printed.

Tables
------
``settlements``
    ``settlement_id``, ``name``, ``population``, ``hub_minutes``,
    ``nearest_hub``, ``nearest_hub_name``, ``network_length_km``, then for
    each hub kind ``hub_minutes_<kind>``, ``nearest_hub_<kind>``,
    ``nearest_hub_name_<kind>``; ``hub_cost`` (the routing weight's unit)
    when the study routes on a weight other than minutes.
``zones``
    ``zone_id``, ``name``, ``population``, ``share_within_<band>_pct`` per
    band, ``population_beyond``, ``mean_hub_minutes``.
``<scenario>_settlements``
    One row per settlement and hub kind (``hub_kind``: ``any`` then each
    kind): ``hub_minutes_before``/``_after``/``_change`` and the nearest
    hub (id and name) before and after; ``hub_cost_before``/``_after``/
    ``_change`` on the ``any`` rows when the weight is not minutes.
``<scenario>_zones``
    One row per district and hub kind: ``population``, then
    ``share_within_<band>_pct``, ``population_beyond`` and
    ``mean_hub_minutes``, each ``_before``/``_after``/``_change``.

The CSV files carry the caution on their first line, as one quoted cell,
and the column names on the second (see :func:`write_csv`).

The inputs are the pipeline's layers, read by field name; both the names
the layers carry today and the glossary's names are understood
(:data:`ALIASES`), so these tables do not change when the layers are renamed.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np
import pandas as pd

from .._meta import CAUTION
from .atomic import atomic_path

__all__ = ["settlement_table", "zone_table", "change_tables", "results_tables", "planner_round", "round_rule",
           "term_for", "unit_of", "write_csv", "read_csv", "CSV_SKIP_ROWS", "ANY_KIND"]

#: Rows before the header in every CSV table (the caution line).
CSV_SKIP_ROWS = 1
#: ``hub_kind`` of the rows about the nearest hub of whatever kind.
ANY_KIND = "any"

#: Field names the layers may carry for one figure, the glossary's name first.
ALIASES = {
    "hub_minutes": ("hub_minutes", "minutes"),
    "nearest_hub": ("nearest_hub", "hub_id"),
    "network_length_m": ("network_length_m",),
    "network_length_km": ("network_km",),
    "mean_hub_minutes": ("mean_hub_minutes", "mean_minutes"),
    "zone_id": ("zone_id", "zone"),
}


def _kind_aliases(kind: str) -> dict:
    return {"hub_minutes": (f"hub_minutes_{kind}", f"{kind}_minutes"),
            "nearest_hub": (f"nearest_hub_{kind}", f"nearest_{kind}")}


def _pick(frame, names):
    for n in names:
        if n in frame.columns:
            return frame[n]
    return None


def _floats(s) -> np.ndarray:
    return pd.to_numeric(pd.Series(s), errors="coerce").to_numpy(dtype=float)


def _ids(s) -> pd.Series:
    """Ids as written (numbers stay numbers, missing stays missing), numbered from 0."""
    s = pd.Series(s).reset_index(drop=True)
    return s.astype(object).where(s.notna(), None)


# ------------------------------------------------------------------ glossary, units and rounding
def term_for(name: str):
    """The glossary term of a column: exact names first, then the most specific pattern.

    ``nearest_hub_name_clinic`` matches both ``nearest_hub_<kind>`` and
    ``nearest_hub_name_<kind>``; the one with more fixed text wins.

    >>> term_for("nearest_hub_name_clinic").name
    'nearest_hub_name_<kind>'
    >>> term_for("hub_minutes_change").name
    '<field>_change'
    """
    import re

    from ..glossary import TERMS

    for t in TERMS:
        if t.name == name:
            return t
    base = _base_name(name)
    if base != name and term_for(base) is not None:
        return next(t for t in TERMS if t.name == "<field>" + name[len(base):])
    matches = [t for t in TERMS if "<" in t.name and not t.name.startswith("<field>") and t.pattern.match(name)]
    return max(matches, key=lambda t: len(re.sub(r"<[^>]+>", "", t.name))) if matches else None


def _base_name(name: str) -> str:
    for suffix in ("_before", "_after", "_change"):
        if name.endswith(suffix):
            return name[: -len(suffix)]
    return name


def unit_of(name: str) -> str:
    """The unit of a table column, from the glossary (``_before``/``_after``/``_change`` as the field).

    >>> unit_of("hub_minutes_change"), unit_of("share_within_30_pct"), unit_of("population_beyond_after")
    ('minutes', '%', 'people')
    """
    t = term_for(_base_name(name))
    return t.unit if t is not None else ""


def round_rule(name: str) -> int | None:
    """Decimals a column is printed with (None: not a rounded figure).

    Minutes and kilometres 0.1, percent 0.1, people whole numbers, costs in the routing weight's unit 0.001 (common
    practice in access reports).
    """
    unit = unit_of(name)
    if unit in ("minutes", "km", "%"):
        return 1
    if unit in ("people", "person-minutes", "m"):
        return 0
    if unit == "weight unit":     # metres, links or milliseconds: kept to the thousandth (a latency is small)
        return 3
    return None


def planner_round(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy with every figure rounded by :func:`round_rule` (whole numbers as nullable integers)."""
    out = frame.copy()
    for c in out.columns:
        d = round_rule(c)
        if d is None:
            continue
        # round() is correctly rounded (half to even on the exact binary value); + 0.0 turns -0.0 into 0.0
        v = [round(float(x), d) + 0.0 if np.isfinite(x) else np.nan for x in _floats(out[c])]
        if d == 0:
            out[c] = pd.array([int(x) if np.isfinite(x) else pd.NA for x in v], dtype="Int64")
        else:
            out[c] = np.asarray(v, dtype=float)
    return out


# ------------------------------------------------------------------ baseline tables
def _hub_names(hubs) -> dict:
    frame = getattr(hubs, "frame", None)
    if frame is None or "name" not in frame.columns or "hub_id" not in frame.columns:
        return {}
    return {str(h): (None if pd.isna(n) else str(n)) for h, n in zip(frame["hub_id"], frame["name"])}


def _names_of(ids: pd.Series, names: dict) -> pd.Series:
    return pd.Series([names.get(str(h)) if h is not None and not pd.isna(h) else None for h in ids], dtype=object)


def _table_fields(study, key: str) -> tuple[str | None, str | None]:
    t = getattr(study, key, None) or {}
    return t.get("id_field"), t.get("name_field")


def _kinds(a) -> list[str]:
    return sorted(getattr(a, "kind_surfaces", {}) or {})


def settlement_table(a, study) -> pd.DataFrame | None:
    """The settlements of one analysis (glossary names, full precision); None without settlements.

    Parameters
    ----------
    a : Analysis
        With ``settlements`` (the layer), ``hubs`` and ``kind_surfaces``.
    study : Study
        Its ``settlements`` table names the id and name fields.
    """
    layer = getattr(a, "settlements", None)
    if layer is None:
        return None
    id_field, name_field = _table_fields(study, "settlements")
    names = _hub_names(a.hubs)
    n = len(layer)
    out = pd.DataFrame(index=range(n))
    sid = _pick(layer, [c for c in (id_field, "settlement_id") if c])
    out["settlement_id"] = _ids(sid) if sid is not None else np.arange(1, n + 1)
    nm = _pick(layer, [c for c in (name_field, "name") if c])
    if nm is not None:
        out["name"] = _ids(nm)
    if "population" in layer.columns:
        out["population"] = _floats(layer["population"])
    out["hub_minutes"] = _floats(_pick(layer, ALIASES["hub_minutes"]))
    hub = _pick(layer, ALIASES["nearest_hub"])
    out["nearest_hub"] = _ids(hub)
    if names:
        out["nearest_hub_name"] = _names_of(out["nearest_hub"], names)
    metres, km = _pick(layer, ALIASES["network_length_m"]), _pick(layer, ALIASES["network_length_km"])
    if metres is not None:
        out["network_length_km"] = _floats(metres) / 1000.0
    elif km is not None:
        out["network_length_km"] = _floats(km)
    if "hub_cost" in layer.columns:        # a study routed on a weight other than minutes: its own cost too
        out["hub_cost"] = _floats(layer["hub_cost"])
    for kind in _kinds(a):
        al = _kind_aliases(kind)
        mins = _pick(layer, al["hub_minutes"])
        if mins is None:
            continue
        out[f"hub_minutes_{kind}"] = _floats(mins)
        out[f"nearest_hub_{kind}"] = _ids(_pick(layer, al["nearest_hub"]))
        if names:
            out[f"nearest_hub_name_{kind}"] = _names_of(out[f"nearest_hub_{kind}"], names)
    return out


def _band_keys(study) -> list[str]:
    s = getattr(study, "surface", None)
    return [f"{b:g}" for b in sorted(s.bands)] if s is not None else []


def _suffix(key: str) -> str:
    return key.replace(".", "_").replace("-", "_")


def zones_frame(a):
    """The zones of an analysis as a frame (``a.zones`` is the layer, or a zone summary holding it)."""
    z = getattr(a, "zones", None)
    if z is None or isinstance(z, pd.DataFrame):
        return z
    return getattr(z, "zones", None)


def _zone_figures(frame, keys) -> pd.DataFrame:
    """population, shares (%), people beyond and mean minutes of a zone-table frame, by position."""
    out = pd.DataFrame(index=range(len(frame)))
    pop = _floats(frame["population"])
    out["population"] = pop
    for key in keys:
        sfx = _suffix(key)
        pct = _pick(frame, (f"share_within_{sfx}_pct", f"share_within_{key}_pct"))
        if pct is not None:
            out[f"share_within_{sfx}_pct"] = _floats(pct)
        else:
            out[f"share_within_{sfx}_pct"] = _floats(_pick(frame, (f"share_within_{sfx}", f"share_within_{key}"))) \
                * 100.0
    if "population_beyond" in frame.columns:
        out["population_beyond"] = _floats(frame["population_beyond"])
    mean = _pick(frame, ALIASES["mean_hub_minutes"])
    if mean is not None:
        out["mean_hub_minutes"] = _floats(mean)
    return out


def _zone_keys(a, study) -> pd.DataFrame:
    zs = zones_frame(a)
    id_field, name_field = _table_fields(study, "zones")
    out = pd.DataFrame(index=range(len(zs)))
    zid = _pick(zs, ALIASES["zone_id"]) if id_field else None
    out["zone_id"] = _ids(zid) if zid is not None else np.arange(1, len(zs) + 1)
    nm = _pick(zs, [c for c in (name_field, "name") if c])
    if nm is not None:
        out["name"] = _ids(nm)
    return out


def zone_table(a, study) -> pd.DataFrame | None:
    """The districts of one analysis (glossary names, shares in %, full precision); None without zones."""
    if zones_frame(a) is None:
        return None
    keys = _zone_keys(a, study)
    return pd.concat([keys, _zone_figures(zones_frame(a), _band_keys(study))], axis=1)


def _zones_by_kind(a, study) -> dict:
    """``{'any': figures, kind: figures ...}`` per zone (kinds from each kind's travel-time surface)."""
    from ..analysis.bands import zone_table as _zt

    keys = _band_keys(study)
    zs = zones_frame(a)
    out = {ANY_KIND: _zone_figures(zs, keys)}
    if a.population is None or a.grid is None:
        return out
    import geopandas as gpd

    polys = gpd.GeoDataFrame(geometry=zs.geometry.values, crs=zs.crs)
    for kind in _kinds(a):
        z = _zt(a.kind_surfaces[kind].minutes, a.population, a.grid, polys, keys).zones
        out[kind] = _zone_figures(z, keys)
    return out


# ------------------------------------------------------------------ scenario tables
def _settlements_long(a, study) -> pd.DataFrame | None:
    t = settlement_table(a, study)
    if t is None:
        return None
    head = [c for c in ("settlement_id", "name", "population") if c in t.columns]
    parts = []
    for kind in [ANY_KIND] + _kinds(a):
        sfx = "" if kind == ANY_KIND else f"_{kind}"
        if f"hub_minutes{sfx}" not in t.columns:
            continue
        p = t[head].copy()
        p["hub_kind"] = kind
        p["hub_minutes"] = t[f"hub_minutes{sfx}"]
        p["nearest_hub"] = t[f"nearest_hub{sfx}"]
        if f"nearest_hub_name{sfx}" in t.columns:
            p["nearest_hub_name"] = t[f"nearest_hub_name{sfx}"]
        if "hub_cost" in t.columns:     # the routing weight's cost: to the nearest hub of any kind only
            p["hub_cost"] = t["hub_cost"] if kind == ANY_KIND else np.nan
        parts.append(p)
    return pd.concat(parts, ignore_index=True)


def change_tables(study, base, scen) -> dict:
    """Before, after and change per settlement and per district, for each hub kind.

    Parameters
    ----------
    study : Study
    base, scen : Analysis
        The baseline and the scenario (the same settlements and zones, in the
        same order; the grid and population are shared).

    Returns
    -------
    dict
        ``settlements`` and ``zones`` (DataFrame or None), full precision,
        glossary names; change = after minus before (negative: faster, fewer);
        ``figures``: the scenario's key figures for the report
        (:func:`geo_reach.export.report.key_figures`).
    """
    from .report import key_figures

    out = {"settlements": None, "zones": None, "figures": key_figures(study, scen)}
    b, s = _settlements_long(base, study), _settlements_long(scen, study)
    if b is not None and s is not None and len(b) == len(s):
        head = [c for c in ("settlement_id", "name", "population", "hub_kind") if c in b.columns]
        t = b[head].copy()
        t["hub_minutes_before"] = b["hub_minutes"].to_numpy()
        t["hub_minutes_after"] = s["hub_minutes"].to_numpy()
        t["hub_minutes_change"] = t["hub_minutes_after"] - t["hub_minutes_before"]
        if "hub_cost" in b.columns and "hub_cost" in s.columns:
            t["hub_cost_before"] = b["hub_cost"].to_numpy(float)
            t["hub_cost_after"] = s["hub_cost"].to_numpy(float)
            t["hub_cost_change"] = t["hub_cost_after"] - t["hub_cost_before"]
        for when, src in (("before", b), ("after", s)):
            t[f"nearest_hub_{when}"] = src["nearest_hub"].to_numpy()
            if "nearest_hub_name" in src.columns:
                t[f"nearest_hub_name_{when}"] = src["nearest_hub_name"].to_numpy()
        out["settlements"] = t
    if zones_frame(base) is not None and zones_frame(scen) is not None:
        keys = _zone_keys(base, study)
        zb, za = _zones_by_kind(base, study), _zones_by_kind(scen, study)
        parts = []
        for kind in zb:
            if kind not in za:
                continue
            p = keys.copy()
            p["hub_kind"] = kind
            p["population"] = zb[kind]["population"].to_numpy()
            for c in zb[kind].columns:
                if c == "population":
                    continue
                p[f"{c}_before"] = zb[kind][c].to_numpy()
                p[f"{c}_after"] = za[kind][c].to_numpy()
                p[f"{c}_change"] = p[f"{c}_after"] - p[f"{c}_before"]
            parts.append(p)
        out["zones"] = pd.concat(parts, ignore_index=True) if parts else None
    return out


def results_tables(study, base, scenarios: dict | None = None, *, baseline: bool = True) -> dict:
    """Every table of a results folder, rounded: ``{file stem: DataFrame}`` in writing order.

    ``scenarios`` maps a scenario name to the :func:`change_tables` result
    (the ``tables`` entry of the pipeline's comparison).
    """
    out = {}
    if baseline:
        for name, t in (("settlements", settlement_table(base, study)), ("zones", zone_table(base, study))):
            if t is not None:
                out[name] = planner_round(t)
    for sname, tables in (scenarios or {}).items():
        for what in ("settlements", "zones"):
            t = (tables or {}).get(what)
            if t is not None:
                out[f"{sname}_{what}"] = planner_round(t)
    return out


# ------------------------------------------------------------------ CSV
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _cell(v):
    """A text cell a spreadsheet shows as text: a leading = + - @ gets a ' (OWASP, "CSV Injection")."""
    if isinstance(v, str) and v.startswith(_FORMULA_START):
        return "'" + v
    return v


def write_csv(path, table: pd.DataFrame) -> Path:
    """Write a table as CSV, atomically: the caution on line 1, the column names on line 2.

    The format is RFC 4180 (comma, double quotes, CRLF line ends), UTF-8
    with a byte-order mark so that spreadsheets read names with accents
    right.  Line 1 is one quoted cell holding :data:`geo_reach.CAUTION`:
    a spreadsheet shows it in the first cell above the table; a program
    skips it (``pandas.read_csv(path, skiprows=1)``, or :func:`read_csv`).
    Text cells that a spreadsheet would take for a formula (starting with
    ``=``, ``+``, ``-``, ``@``) are written with a leading ``'``.  Missing
    values are empty cells.

    References
    ----------
    .. [1] Shafranovich, Y. (2005). RFC 4180: Common Format and MIME Type for
       Comma-Separated Values (CSV) Files.
    .. [2] OWASP Foundation. CSV Injection (formula injection), community page.
    """
    path = Path(path)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL)
    buf.write('"' + CAUTION.replace('"', '""') + '"\r\n')
    w.writerow([str(c) for c in table.columns])
    cols = [table[c].tolist() for c in table.columns]
    for row in zip(*cols):
        w.writerow(["" if (v is None or v is pd.NA or (isinstance(v, float) and np.isnan(v))) else _cell(v)
                     for v in row])
    with atomic_path(path, suffix=path.suffix) as tmp:
        Path(tmp).write_bytes(buf.getvalue().encode("utf-8-sig"))
    return path


def read_csv(path) -> pd.DataFrame:
    """Read a table written by :func:`write_csv` (the caution line skipped)."""
    return pd.read_csv(path, skiprows=CSV_SKIP_ROWS, encoding="utf-8-sig", keep_default_na=True)

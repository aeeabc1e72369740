"""``report.html``: one offline, printable page a planner can hand on or paste from.

It holds the title and the caution; key figures today and with each scenario;
people per reach band as a bar chart; the reach profile; the district table;
the weakest regions where people live; the scenario ranking; and a static
overview map (matplotlib, no basemap).  Images are PNG data URIs and the
style sheet is inline, so the file opens and prints with no network (its
Content-Security-Policy forbids any request).

No template engine is used: the page is assembled from elements whose text
and attribute values all pass through :func:`html.escape` (:func:`el`), so a
name such as ``<script>`` in the user's data shows as text.  Figures are
rounded as the tables round them (:mod:`geo_reach.export.tables`).  Laid out
for A4 (``@page``), the demo prints on at most three pages.

References
----------
.. [1] W3C (2021). HTML Living Standard, "Named character references" and
   escaping (html.escape follows it for &, <, >, " and ').
.. [2] W3C (2018). CSS Paged Media Module Level 3 (``@page size: A4``).
"""

from __future__ import annotations

import base64
import html
import io
import math
from pathlib import Path

import numpy as np
import pandas as pd

from .._meta import CAUTION, TOOL, __version__
from ..glossary import reason_words
from .atomic import atomic_path

__all__ = ["Html", "el", "write_report", "render_report", "key_figures", "MAX_DISTRICT_ROWS", "MAX_WEAK_ROWS"]

#: Districts listed in the report (the most people beyond the largest band first when there are more).
MAX_DISTRICT_ROWS = 25
#: Weak regions listed (by rank, where people live).
MAX_WEAK_ROWS = 8
_DASH = "\u2013"


class Html(str):
    """Markup built by :func:`el` (already escaped); a plain ``str`` is always text."""


def _text(v) -> Html:
    return v if isinstance(v, Html) else Html(html.escape(str(v), quote=True))


def el(tag: str, *children, cls: str | None = None, **attrs) -> Html:
    """An element: ``children`` that are plain strings are escaped, :class:`Html` ones kept.

    Attribute values are escaped too; ``tag`` and attribute names are the code's own.

    >>> el("td", "<b>", cls="x")
    '<td class="x">&lt;b&gt;</td>'
    """
    if cls:
        attrs["class"] = cls
    a = "".join(f' {k.rstrip("_").replace("_", "-")}="{html.escape(str(v), quote=True)}"' for k, v in attrs.items()
                if v is not None)
    if tag in ("img", "meta", "br", "col"):
        return Html(f"<{tag}{a}>")
    return Html(f"<{tag}{a}>" + "".join(_text(c) for c in children if c is not None) + f"</{tag}>")


def _join(*parts) -> Html:
    return Html("".join(_text(p) for p in parts if p is not None))


# ------------------------------------------------------------------ numbers
def _fmt(v, decimals: int = 1, pct: bool = False, sign: bool = False) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)) or v is pd.NA:
        return _DASH
    v = round(float(v), decimals) + 0.0
    text = f"{v:+,.{decimals}f}" if sign else f"{v:,.{decimals}f}"
    return text + (" %" if pct else "")


def _people(v, sign=False) -> str:
    return _fmt(v, 0, sign=sign)


# ------------------------------------------------------------------ key figures
def key_figures(study, a) -> dict:
    """The figures of one analysis the report compares (people, minutes, network), full precision.

    Keys: ``population_total``, ``within`` (band text -> people), ``beyond``,
    ``unreachable``, ``mean_minutes``, ``rai_pct``, ``network_km``,
    ``diameter``, ``mean_path``, ``unit``, ``hubs``, ``hubs_joined``.
    """
    out: dict = {}
    ps = getattr(a, "pop_stats", None)
    if ps is not None:
        out.update(population_total=ps.population_total, within=dict(ps.population_by_band),
                   beyond=ps.population_beyond, unreachable=ps.population_unreachable,
                   mean_minutes=ps.population_weighted_minutes)
    rai = getattr(a, "rai", None)
    if rai is not None and math.isfinite(rai.share):
        out["rai_pct"] = 100.0 * rai.share
    net = a.build.network
    out["network_km"] = float(np.sum(net.edge_length_m)) / 1000.0
    m = getattr(a, "metrics", None) or {}
    if m:
        out["diameter"] = (m.get("diameter") or {}).get("value")
        out["mean_path"] = (m.get("mean_path") or {}).get("value")
        out["unit"] = m.get("unit", "")
    if getattr(a, "hub_table", None) is not None:
        out["hubs"] = int(len(a.hub_table))
        out["hubs_joined"] = int(np.asarray(a.hub_table["joined"]).astype(bool).sum()) if "joined" in a.hub_table \
            else None
    return out


def _band_keys(study) -> list[str]:
    s = getattr(study, "surface", None)
    return [f"{b:g}" for b in sorted(s.bands)] if s is not None else []


def _key_table(study, base_fig: dict, scen_figs: dict) -> Html:
    bands = _band_keys(study)
    cols = ["Today"] + [f"With {n}" for n in scen_figs]
    rows = []

    def row(label, getter, fmt, change=True, unit=""):
        cells = [el("th", label, el("span", unit, cls="unit") if unit else None, scope="row")]
        base = getter(base_fig)
        cells.append(el("td", fmt(base)))
        for f in scen_figs.values():
            v = getter(f)
            text = fmt(v)
            if change and v is not None and base is not None and text != _DASH:
                d = float(v) - float(base)
                text = f"{text} ({fmt(d, sign=True)})"
            cells.append(el("td", text))
        rows.append(el("tr", *cells))

    def people(v, sign=False):
        return _people(v, sign)

    def minutes(v, sign=False):
        return _fmt(v, 1, sign=sign)

    def pct(v, sign=False):
        return _fmt(v, 1, pct=True, sign=sign)

    if "population_total" in base_fig:
        total = base_fig["population_total"]
        row("People in the study area", lambda f: f.get("population_total"), people, change=False, unit="people")
        for b in bands:
            row(f"Within {b} min of a hub", lambda f, b=b: (f.get("within") or {}).get(b), people, unit="people")
            row(f"Within {b} min of a hub", lambda f, b=b: 100.0 * (f.get("within") or {}).get(b, np.nan) / total
                if total else None, pct, unit="% of people")
        if bands:
            row(f"Beyond {bands[-1]} min or no hub reachable", lambda f: f.get("beyond"), people, unit="people")
        row("No hub reachable at all", lambda f: f.get("unreachable"), people, unit="people")
        row("Mean minutes to the nearest hub", lambda f: f.get("mean_minutes"), minutes,
            unit="minutes, population-weighted")
    if "rai_pct" in base_fig:
        row("Within 2 km of an all-season road", lambda f: f.get("rai_pct"), pct, unit="% of people (Rural Access Index)")
    row("Network length", lambda f: f.get("network_km"), minutes, unit="km")
    if base_fig.get("diameter") is not None:
        u = base_fig.get("unit", "")
        row("Network diameter (longest cheapest trip)", lambda f: f.get("diameter"), minutes, unit=u)
        row("Mean cheapest trip between nodes", lambda f: f.get("mean_path"), minutes, unit=u)
    if base_fig.get("hubs") is not None:
        row("Hubs", lambda f: f.get("hubs"), people)
        if base_fig.get("hubs_joined") is not None:
            row("Hubs joined to the network", lambda f: f.get("hubs_joined"), people)
    head = el("tr", el("th", "Figure", scope="col"), *(el("th", c, scope="col") for c in cols))
    note = el("p", "In brackets: the change from today (negative: fewer people or faster). Figures are rounded "
                   "one by one.", cls="note") if scen_figs else None
    return _join(el("table", el("thead", head), el("tbody", *rows), cls="figures"), note)


# ------------------------------------------------------------------ charts
def _png(fig) -> str:
    import matplotlib.pyplot as plt

    from .charts import save_figure

    buf = io.BytesIO()
    save_figure(fig, buf, "a chart of the report", format="png", dpi=150, metadata={"Software": None})
    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _plt():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return plt


#: Ring colours, nearest first, then beyond the last band (a sequential ramp of our own: light is far).
RING_COLOURS = ("#1f5f7a", "#3f8fa6", "#8cc2cc", "#d9ecd9", "#f2d7a6", "#f0b27a")
BEYOND_COLOUR = "#b8b8b8"


def _ring_colours(n: int) -> list[str]:
    if n <= len(RING_COLOURS):
        return list(RING_COLOURS[:n])
    from matplotlib import colormaps
    from matplotlib.colors import to_hex

    cm = colormaps["GnBu_r"]
    return [to_hex(cm(0.1 + 0.8 * i / max(n - 1, 1))) for i in range(n)]


def _ring_people(fig: dict, bands: list[str]) -> list[float]:
    """People in each disjoint ring: within the first band, between bands, beyond the last."""
    within = [fig.get("within", {}).get(b, 0.0) for b in bands]
    rings = [within[0]] + [within[i] - within[i - 1] for i in range(1, len(within))]
    return rings + [fig.get("beyond", 0.0)]


def _band_chart(study, base_fig: dict, scen_figs: dict) -> str | None:
    bands = _band_keys(study)
    if not bands or "within" not in base_fig:
        return None
    plt = _plt()
    labels = [f"within {bands[0]} min"] + [f"{bands[i - 1]}{_DASH}{bands[i]} min" for i in range(1, len(bands))] + \
             [f"beyond {bands[-1]} min"]
    series = [("Today", base_fig)] + [(f"With {n}", f) for n, f in scen_figs.items()]
    colours = _ring_colours(len(bands)) + [BEYOND_COLOUR]
    k = len(series)
    fig, ax = plt.subplots(figsize=(7.2, 1.0 + 0.42 * len(labels) * max(k, 1) ** 0.6), constrained_layout=True)
    y = np.arange(len(labels))
    h = 0.8 / k
    hatches = ["", "//", "..", "xx", "\\\\"]
    top = max(max(_ring_people(f, bands)) for _, f in series) or 1.0
    for i, (name, f) in enumerate(series):
        vals = _ring_people(f, bands)
        pos = y - 0.4 + h * (i + 0.5)
        bars = ax.barh(pos, vals, height=h * 0.92, color=colours, edgecolor="#333333", linewidth=0.5,
                       hatch=hatches[i % len(hatches)], label=name)
        for b, v in zip(bars, vals):
            ax.text(b.get_width() + top * 0.01, b.get_y() + b.get_height() / 2, f"{v:,.0f}", va="center",
                    fontsize=7.5, parse_math=False)
    ax.set_yticks(y, labels)
    for t in ax.get_yticklabels():
        t.set_parse_math(False)
    ax.invert_yaxis()
    ax.set_xlabel("people")
    ax.set_xlim(0, top * 1.18)
    ax.grid(axis="x", alpha=0.3)
    ax.spines[["top", "right"]].set_visible(False)
    if k > 1:
        from matplotlib.patches import Patch

        ax.legend(handles=[Patch(facecolor="white", edgecolor="#333333", hatch=hatches[i % len(hatches)], label=n)
                           for i, (n, _) in enumerate(series)], loc="lower right", fontsize=8, frameon=False)
    return _png(fig)


def _profile_chart(study, a) -> str | None:
    profile = getattr(a, "profile", None)
    if profile is None:
        return None
    import tempfile

    from .charts import plot_profile

    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "profile.png"
        plot_profile(profile, p, title=f"{study.title}: reach profile")
        return "data:image/png;base64," + base64.b64encode(p.read_bytes()).decode("ascii")


def _scale_bar(ax, x0, x1, y0, y1) -> None:
    span = (x1 - x0) / 4
    mag = 10 ** math.floor(math.log10(span))
    length = max(m * mag for m in (1, 2, 5) if m * mag <= span)
    sx, sy = x0 + (x1 - x0) * 0.04, y0 + (y1 - y0) * 0.04
    ax.plot([sx, sx + length], [sy, sy], color="black", linewidth=2.5, solid_capstyle="butt")
    text = f"{length / 1000:g} km" if length >= 1000 else f"{length:g} m"
    ax.text(sx + length / 2, sy + (y1 - y0) * 0.012, text, ha="center", va="bottom", fontsize=7.5)


def _overview_map(study, a) -> str | None:
    """A static map: reach rings (from the travel-time surface), districts, network, hubs, weakest regions."""
    import shapely

    plt = _plt()
    net = a.build.network
    if net.n_nodes:
        xs, ys = np.asarray(net.node_x), np.asarray(net.node_y)
        aspect = (ys.max() - ys.min() + 1.0) / (xs.max() - xs.min() + 1.0)
    else:
        aspect = 0.75
    # the map panel is about 5.1 in wide beside a 2 in legend; its height follows the data (within limits)
    fig, ax = plt.subplots(figsize=(7.2, float(np.clip(5.1 * aspect + 0.4, 2.5, 7.0))), constrained_layout=True)
    handles = []
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    bands = _band_keys(study)
    if getattr(a, "surface", None) is not None and a.grid is not None and bands:
        from matplotlib.colors import BoundaryNorm, ListedColormap

        m = np.asarray(a.surface.minutes, dtype=float)
        edges = [-np.inf] + [float(b) for b in bands] + [np.inf]
        cls = np.full(m.shape, np.nan)
        for i in range(len(edges) - 1):
            with np.errstate(invalid="ignore"):
                cls[(m > edges[i]) & (m <= edges[i + 1])] = i
        colours = _ring_colours(len(bands)) + [BEYOND_COLOUR]
        x0, y0, x1, y1 = a.grid.bounds
        ax.imshow(np.ma.masked_invalid(cls), cmap=ListedColormap(colours), norm=BoundaryNorm(np.arange(-0.5, len(colours)), len(colours)),
                  extent=(x0, x1, y0, y1), origin="upper", interpolation="nearest", alpha=0.85, zorder=1)
        names = [f"within {bands[0]} min"] + [f"{bands[i - 1]}{_DASH}{bands[i]} min" for i in range(1, len(bands))] + \
                [f"beyond {bands[-1]} min"]
        handles += [Patch(facecolor=c, edgecolor="none", alpha=0.85, label=n) for c, n in zip(colours, names)]
        handles.append(Patch(facecolor="white", edgecolor="#999999", label="unreachable or impassable"))
    from .tables import zones_frame

    zones = zones_frame(a)
    if zones is not None and len(zones):
        for g in zones.geometry.values:
            if g is None:
                continue
            for ring in shapely.get_parts(shapely.boundary(g)):
                xy = shapely.get_coordinates(ring)
                ax.plot(xy[:, 0], xy[:, 1], color="#4a4a4a", linewidth=0.8, linestyle=(0, (4, 2)), zorder=3)
        handles.append(Line2D([], [], color="#4a4a4a", linewidth=0.8, linestyle=(0, (4, 2)), label="district"))
    style = {"road": ("#3a3a3a", 0.6, "-"), "rail": ("#7a2e8a", 1.0, (0, (5, 2))), "cable": ("#2e6b3a", 0.8, ":"),
             "transfer": ("#777777", 0.5, ":")}
    from matplotlib.collections import LineCollection

    for mode, (colour, width, ls) in style.items():
        sel = np.nonzero(net.edge_mode == mode)[0]
        if len(sel) == 0:
            continue
        segs = [shapely.get_coordinates(g) for g in net.edge_geometry[sel] if g is not None]
        ax.add_collection(LineCollection(segs, colors=colour, linewidths=width, linestyles=ls, zorder=4))
        if mode != "transfer":
            handles.append(Line2D([], [], color=colour, linewidth=width, linestyle=ls, label=mode))
    weak = getattr(a, "weak", None)
    if weak is not None and len(weak):
        top = _weak_rows(a)
        for _, r in top.iterrows():
            g = r.geometry
            if g is None:
                continue
            for ring in shapely.get_parts(shapely.boundary(g)):
                xy = shapely.get_coordinates(ring)
                ax.plot(xy[:, 0], xy[:, 1], color="#b01c2e", linewidth=1.1, zorder=5)
            p = g.representative_point()
            ax.text(p.x, p.y, f"{int(r['rank'])}", color="#b01c2e", fontsize=8, fontweight="bold", ha="center",
                    va="center", zorder=7, bbox=dict(boxstyle="circle,pad=0.15", fc="white", ec="#b01c2e", lw=0.8))
        if len(top):
            handles.append(Line2D([], [], color="#b01c2e", linewidth=1.1, label="weak region (rank)"))
    hubs = getattr(a, "hub_table", None)
    if hubs is not None and len(hubs):
        xy = shapely.get_coordinates(hubs.geometry.values)
        ax.scatter(xy[:, 0], xy[:, 1], s=34, marker="D", color="#f6c431", edgecolor="black", linewidth=0.7, zorder=6)
        for (x, y), h in zip(xy, hubs["hub_id"].astype(str)):
            ax.text(x, y, f" {h}", fontsize=7, va="bottom", zorder=7, parse_math=False)
        handles.append(Line2D([], [], marker="D", color="none", markerfacecolor="#f6c431", markeredgecolor="black",
                              label="hub (id)"))
    if net.n_nodes:
        xs, ys = np.asarray(net.node_x), np.asarray(net.node_y)
        x0, x1, y0, y1 = xs.min(), xs.max(), ys.min(), ys.max()
        padx, pady = (x1 - x0) * 0.04 + 1, (y1 - y0) * 0.04 + 1
        ax.set_xlim(x0 - padx, x1 + padx)
        ax.set_ylim(y0 - pady, y1 + pady)
    ax.set_aspect("equal")
    ax.set_xticks([])
    ax.set_yticks([])
    xl, yl = ax.get_xlim(), ax.get_ylim()
    _scale_bar(ax, xl[0], xl[1], yl[0], yl[1])
    crs = getattr(net, "crs", None)
    ax.set_title(f"Overview ({crs.name if crs is not None else 'working CRS'}; no basemap)", fontsize=8,
                 loc="left", parse_math=False)
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7, frameon=False)
    return _png(fig)


# ------------------------------------------------------------------ tables


def _weak_rows(a) -> pd.DataFrame:
    weak = a.weak
    w = weak.sort_values("rank") if "rank" in weak.columns else weak
    if "population" in w.columns and getattr(a, "population", None) is not None and (w["population"] > 0).any():
        w = w[w["population"] > 0]
    return w.head(MAX_WEAK_ROWS)


def _head_cell(label: str, name: str | None, unit: str = "", text: bool = False) -> Html:
    """A column head: the plain label, then the glossary name and unit in small type (as in the CSV files)."""
    sub = ", ".join(x for x in (name, unit) if x)
    return el("th", label, el("span", sub, cls="unit") if sub else None, scope="col", cls="text" if text else None)


def _weak_table(study, a) -> Html | None:
    if getattr(a, "weak", None) is None or not len(a.weak):
        return None
    w = _weak_rows(a)
    thr = getattr(getattr(study, "surface", None), "threshold", None)
    mean_col = "mean_hub_minutes" if "mean_hub_minutes" in w.columns else None
    behind = "people_behind_edge" if "people_behind_edge" in w.columns else None
    head = [_head_cell("Rank", "rank"), _head_cell("Why weak", "reason", text=True), _head_cell("People", "population", "people"),
            _head_cell("Area", "area_km2", "km²")]
    if mean_col:
        head.append(_head_cell("Mean minutes", mean_col, "minutes"))
    if behind:
        head.append(_head_cell("People behind the key link", behind, "people"))
    rows = []
    for _, r in w.iterrows():
        reason = str(r.get("reason", ""))
        words = reason_words(reason, thr)
        cells = [el("td", f"{int(r['rank'])}"), el("td", words, cls="text"), el("td", _people(r.get("population"))),
                 el("td", _fmt(r.get("area_km2"), 1))]
        if mean_col:
            cells.append(el("td", _fmt(r.get(mean_col), 1)))
        if behind:
            cells.append(el("td", _people(r.get(behind))))
        rows.append(el("tr", *cells))
    more = len(a.weak) - len(w)
    note = el("p", f"{len(w)} of {len(a.weak)} weak regions shown (where people live, by rank); all are in the "
                   "weak_regions layer of the GeoPackage.", cls="note") if more > 0 else None
    return _join(el("table", el("thead", el("tr", *head)), el("tbody", *rows)), note)


def _district_table(study, a) -> Html | None:
    from .tables import planner_round, zone_table

    t = zone_table(a, study)
    if t is None or not len(t):
        return None
    bands = _band_keys(study)
    n = len(t)
    if n > MAX_DISTRICT_ROWS and "population_beyond" in t.columns:
        t = t.sort_values("population_beyond", ascending=False, kind="stable").head(MAX_DISTRICT_ROWS)
    t = planner_round(t)
    head = [_head_cell("District", "zone_id", text=True)]
    if "name" in t.columns:
        head.append(_head_cell("Name", "name", text=True))
    head.append(_head_cell("People", "population", "people"))
    for b in bands:
        head.append(_head_cell(f"Within {b} min", f"share_within_{b.replace('.', '_')}_pct", "%"))
    if "population_beyond" in t.columns:
        head.append(_head_cell(f"Beyond {bands[-1]} min" if bands else "Beyond", "population_beyond", "people"))
    if "mean_hub_minutes" in t.columns:
        head.append(_head_cell("Mean minutes", "mean_hub_minutes", "minutes"))
    rows = []
    for _, r in t.iterrows():
        cells = [el("td", str(r["zone_id"]), cls="text")]
        if "name" in t.columns:
            cells.append(el("td", "" if r["name"] is None else str(r["name"]), cls="text"))
        cells.append(el("td", _people(r["population"] if r["population"] is not pd.NA else None)))
        for b in bands:
            cells.append(el("td", _fmt(r[f"share_within_{b.replace('.', '_')}_pct"], 1)))
        if "population_beyond" in t.columns:
            v = r["population_beyond"]
            cells.append(el("td", _people(None if v is pd.NA else v)))
        if "mean_hub_minutes" in t.columns:
            cells.append(el("td", _fmt(r["mean_hub_minutes"], 1)))
        rows.append(el("tr", *cells))
    note = el("p", f"The {len(t)} districts with the most people beyond {bands[-1] if bands else ''} min of {n}; "
                   "all are in zones.csv.", cls="note") if n > len(t) else None
    return _join(el("table", el("thead", el("tr", *head)), el("tbody", *rows)), note)


def _ranking_table(summary: dict) -> Html | None:
    ranking = summary.get("scenario_ranking") or []
    if not ranking:
        return None
    scen = summary.get("scenarios") or {}
    head = [_head_cell("Rank", "rank"), _head_cell("Scenario", None, text=True),
            _head_cell("What changes", None, text=True),
            _head_cell("People newly within the largest band", "people_newly_within", "people"),
            _head_cell("Person-minutes saved", "person_minutes_saved", "person-minutes"),
            _head_cell("Per km of new or upgraded line", None, "person-minutes per km")]
    # on a routing weight other than minutes the ranking orders by the weight's own change: shown first
    unit = next((r["person_cost_unit"] for r in ranking if r.get("person_cost_unit")), None)
    if unit:
        head[3:3] = [_head_cell(f"{unit.capitalize()} saved", "person_cost_saved", unit),
                     _head_cell("Per km of new or upgraded line", "person_cost_saved_per_km", f"{unit} per km")]
    rows = []
    for r in ranking:
        s = scen.get(r["scenario"], {})
        what = s.get("description") or "; ".join(s.get("changes", []))
        cells = [el("td", str(r["rank"])), el("td", r["scenario"], cls="text"), el("td", what, cls="text")]
        if unit:
            cells += [el("td", _people(r.get("person_cost_saved"))),
                      el("td", _people(r.get("person_cost_saved_per_km")))]
        cells += [el("td", _people(r.get("people_newly_within_largest_band"), sign=True)),
                  el("td", _people(r.get("person_minutes_saved"))),
                  el("td", _people(r.get("person_minutes_saved_per_km")))]
        rows.append(el("tr", *cells))
    basis = sorted({r.get("ranked_by", "") for r in ranking} - {""})
    first = "" if unit else "people newly within the largest band, then by "
    note = el("p", "Ranked by " + first + "; ".join(basis) + ".", cls="note")
    return _join(el("table", el("thead", el("tr", *head)), el("tbody", *rows)), note)


# ------------------------------------------------------------------ the page
CSS = """
@page { size: A4; margin: 12mm 12mm 13mm 12mm; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9.5pt; color: #1d2a33;
       max-width: 186mm; margin: 0 auto; padding: 8px; line-height: 1.3; }
h1 { font-size: 17pt; margin: 0 0 2px 0; }
h2 { font-size: 12pt; margin: 12px 0 4px 0; border-bottom: 1px solid #9fb3bf; padding-bottom: 1px; }
p.meta { color: #4d5b66; margin: 0 0 6px 0; font-size: 8.5pt; }
.caution { border: 2px solid #8a1c1c; background: #fbeeee; color: #5c1010; padding: 5px 9px; font-weight: bold;
           margin: 6px 0 8px 0; }
table { border-collapse: collapse; width: 100%; font-size: 8.5pt; margin: 2px 0 4px 0; }
th, td { border-bottom: 1px solid #d5dde2; padding: 2px 5px; text-align: right; vertical-align: top; }
thead th { background: #e8eef2; border-bottom: 1.5px solid #5d7380; text-align: right; }
th[scope=row], td.text, th.text, table.figures thead th:first-child { text-align: left; }
th .unit, thead .unit { display: block; font-weight: normal; font-size: 7pt; color: #5d6b75; }
table.figures th[scope=row] .unit { display: inline; margin-left: 4px; }
p.note { font-size: 7.5pt; color: #4d5b66; margin: 0 0 6px 0; }
figure { margin: 4px 0; }
figure img { width: 100%; height: auto; display: block; }
figcaption { font-size: 7.5pt; color: #4d5b66; }
section { break-inside: avoid; page-break-inside: avoid; }
footer { margin-top: 10px; font-size: 7.5pt; color: #4d5b66; border-top: 1px solid #9fb3bf; padding-top: 4px; }
@media print { body { padding: 0; } }
"""

#: Everything but inline styles and data-URI images is forbidden: the page can make no request.
CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"


def _figure(src: str | None, alt: str, caption: str) -> Html | None:
    if src is None:
        return None
    return el("figure", el("img", src=src, alt=alt), el("figcaption", caption))


def render_report(study, base, scenarios: dict | None, summary: dict) -> str:
    """The report page as text (see the module notes); ``scenarios`` as for the pipeline's writers."""
    from .stamp import current_output_time

    scenarios = scenarios or {}
    base_fig = key_figures(study, base)
    scen_figs = {n: (sc.get("tables") or {}).get("figures") for n, sc in scenarios.items()}
    scen_figs = {n: f for n, f in scen_figs.items() if f}
    title = study.title or "geo-reach results"
    parts = [
        el("h1", title),
        el("p", f"{TOOL} {__version__} · results of {current_output_time():%Y-%m-%d} · "
                f"{len(scenarios)} scenario{'s' if len(scenarios) != 1 else ''}", cls="meta"),
        el("p", CAUTION, cls="caution", role="note"),
        el("section", el("h2", "Key figures: today" + (" and with each scenario" if scen_figs else "")),
           _key_table(study, base_fig, scen_figs)),
    ]
    chart = _band_chart(study, base_fig, scen_figs)
    if chart:
        parts.append(el("section", el("h2", "People by minutes to the nearest hub"),
                        _figure(chart, "Bar chart of people by minutes to the nearest hub",
                                "People in each reach band (disjoint: within the first band, between bands, beyond "
                                "the last), from the travel-time surface and the population.")))
    parts.append(el("section", el("h2", "Overview map"),
                    _figure(_overview_map(study, base), "Overview map of reach bands, districts, network and hubs",
                            "Reach bands from the travel-time surface today, districts, the network by mode, hubs "
                            "and the weak regions listed below (numbered by rank).")))
    prof = _profile_chart(study, base)
    if prof:
        parts.append(el("section", el("h2", "Reach profile"),
                        _figure(prof, "Reach profile chart", "How many nodes and how much network lie within each "
                                "cost of a node, averaged over sampled nodes.")))
    d = _district_table(study, base)
    if d:
        parts.append(el("section", el("h2", "Districts"), d))
    w = _weak_table(study, base)
    if w:
        parts.append(el("section", el("h2", "Weakest regions"), w))
    r = _ranking_table(summary)
    if r:
        parts.append(el("section", el("h2", "Scenario ranking"), r))
    parts.append(el("footer", CAUTION + " Full figures: tables.xlsx, the CSV tables, results.gpkg and "
                    "summary.json beside this file."))
    head = el("head", el("meta", charset="utf-8"), el("meta", http_equiv="Content-Security-Policy", content=CSP),
              el("meta", name="viewport", content="width=device-width, initial-scale=1"),
              el("title", f"{title}: report"), el("style", Html(CSS)))
    return "<!DOCTYPE html>\n" + el("html", head, el("body", *parts), lang="en") + "\n"


def write_report(path, study, base, scenarios: dict | None, summary: dict) -> Path:
    """Write :func:`render_report` to ``path`` (UTF-8), atomically."""
    path = Path(path)
    text = render_report(study, base, scenarios, summary)
    with atomic_path(path, suffix=".html") as tmp:
        Path(tmp).write_text(text, encoding="utf-8")
    return path

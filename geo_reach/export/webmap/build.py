"""Turn a :class:`~.contract.MapInput` into the page's data: views, layer groups with their legends, layers.

The data is plain JSON (see :mod:`.page` for how it reaches the page).  No
text in it is markup: the page's script puts every string on screen as a
text node.  Numbers are rounded here to what they are shown as (minutes and
km to 0.1, people to whole numbers, shares in per cent), so the page only
adds thousands separators and units.

Layer groups are what the reader switches; each group has one layer per
view it appears in (``view`` = ``None``: every view).  Today's view comes
first and is the one shown when the page opens; a scenario's change layer,
proposed lines, network, rings and settlements belong to its own view only.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from ...glossary import reason_words
from .. import palette as P
from .contract import MapInput, NetworkLayer
from .encode import encode, frame_for, metric, points_xy
from .sections import add_criticality, add_indices

__all__ = ["page_data", "ISSUE_LABELS", "DETAIL_CHARS"]

#: Plain-language names of the network issues the builder reports.
ISSUE_LABELS = {
    "gap_joined": "gap joined", "unjoined_gap": "gap left open", "dangle": "dead end",
    "crossing_split": "crossing joined", "crossing_kept": "crossing kept (bridge or tunnel)",
    "duplicate_removed": "duplicate line removed", "geometry_repaired": "geometry repaired",
    "dropped_feature": "feature left out", "access_unmatched": "station not on its line",
    "zero_length": "zero-length line", "self_loop": "line ending where it starts",
    "speed_defaulted": "speed missing, default used",
}
#: Longest issue detail shown (characters).
DETAIL_CHARS = 300
_MODES = {"road": "Road link", "rail": "Rail link", "cable": "Cable link"}
_DISTRICT_EDGE = "#4d4d4d"


# ---------------------------------------------------------------- values for the page
def _num(values, digits: int, scale: float = 1.0) -> list:
    """Numbers rounded for display (None where missing or not finite)."""
    a = np.asarray(values, dtype=np.float64) * scale
    out = []
    for v in a.tolist():
        if not math.isfinite(v):
            out.append(None)
        else:
            r = round(v, digits)
            out.append(int(r) if digits == 0 else (r if r != 0 else 0.0))
    return out


def _text(values, limit: int | None = None) -> list:
    out = []
    for v in values:
        if v is None or (isinstance(v, float) and v != v):
            out.append(None)
            continue
        try:
            if v != v:  # pandas NA and friends
                out.append(None)
                continue
        except (TypeError, ValueError):
            out.append(None)
            continue
        t = " ".join(str(v).split())
        if limit and len(t) > limit:
            t = t[: limit - 1].rstrip() + "\u2026"
        out.append(t if t else None)
    return out


def _col(frame, name, default=np.nan):
    return frame[name].to_numpy() if name in frame.columns else np.full(len(frame), default, dtype=object)


def _fnum(frame, name):
    if name not in frame.columns:
        return np.full(len(frame), np.nan)
    return pd.to_numeric(frame[name], errors="coerce").to_numpy(np.float64, na_value=np.nan)


def _digits(unit: str) -> int:
    return 0 if unit in ("hops", "links", "m") else 1


def _fmt(unit="", digits=1, none=None, sign=False, pct=False) -> dict:
    out = {"d": digits}
    if unit:
        out["u"] = unit
    if none:
        out["none"] = none
    if sign:
        out["sign"] = 1
    if pct:
        out["pct"] = 1
    return out


# ---------------------------------------------------------------- the builder
class _Builder:
    def __init__(self, m: MapInput):
        self.m = m
        self.layers: list[dict] = []
        self.groups: dict[str, dict] = {}
        self.unit = str(m.cost_unit)
        self.ts = sorted({float(t) for t in m.thresholds})
        self.travel = P.travel_classes(self.ts)
        self.metric = {}
        # on a routing weight other than minutes, say which layers are time and which the weight
        self.minutes_note = (None if self.unit == "min" else
                             f"Travel time in minutes whatever the routing weight (the bands are defined in "
                             f"minutes); the network and its change show {m.cost_name} in {self.unit}.")

    # -- helpers
    def frame(self, key, gdf):
        """The layer in a metric CRS, empty geometries dropped (cached by key)."""
        if key not in self.metric:
            g = metric(key, gdf)
            keep = g.geometry.notna().to_numpy() & ~g.geometry.is_empty.to_numpy()
            self.metric[key] = g[keep].reset_index(drop=True)
        return self.metric[key]

    def group(self, gid, title, legend, on=True, mode="check", note=None):
        if gid not in self.groups:
            g = {"id": gid, "title": title, "mode": mode, "on": bool(on), "legend": legend}
            if note:
                g["note"] = note
            self.groups[gid] = g
        return self.groups[gid]

    def add(self, group, view, pane, kind, f, **extra):
        lay = {"id": f"L{len(self.layers) + 1}", "group": group, "view": view, "pane": pane, "type": kind}
        if kind in ("line", "fill"):
            lay["geom"] = encode(f.geometry.values, f.crs, "line" if kind == "line" else "polygon", self.fr,
                                 coverage=extra.pop("coverage", False))
        else:
            lay["geom"] = points_xy(f.geometry.values, f.crs, self.fr)
        if "cols" in extra:
            extra["cols"] = {k: v for k, v in ((k, _pack(v)) for k, v in extra["cols"].items()) if v is not None}
        lay.update(extra)
        self.layers.append(lay)
        return lay

    # -- study frame
    def setup(self):
        from pyproj import Transformer

        m = self.m
        fit = [m.network.edges if m.network else None, m.hubs, m.settlements, m.districts]
        fit = [f for f in fit if f is not None and len(f)]
        if not fit:
            fit = [f for f in m.frames() if f is not None and len(f)]
        boxes = []
        for f in fit:
            g = metric("fit", f)
            b = g.total_bounds
            if not np.all(np.isfinite(b)):
                continue
            tr = Transformer.from_crs(g.crs, 4326, always_xy=True)
            boxes.append(tr.transform_bounds(*b))
        boxes = np.array(boxes) if boxes else np.array([[-0.01, -0.01, 0.01, 0.01]])
        w, s = boxes[:, 0].min(), boxes[:, 1].min()
        e, n = boxes[:, 2].max(), boxes[:, 3].max()
        lat = math.radians((s + n) / 2)
        width_m, height_m = max((e - w) * 111_320 * math.cos(lat), 100.0), max((n - s) * 111_320, 100.0)
        extent = max(width_m, height_m)
        self.area_m2 = width_m * height_m
        self.fr = frame_for((w, s, e, n), extent)
        self.bounds = [[round(s, 6), round(w, 6)], [round(n, 6), round(e, 6)]]

    # -- layer families
    def shading(self):
        m = self.m
        have_rings = m.rings is not None or any(s.rings is not None for s in m.scenarios)
        if have_rings:
            self.group("rings", "Reach rings: minutes to the nearest hub",
                       [{"sw": "fill", "c": c.colour, "t": c.label, "fam": f"travel{k}"}
                        for k, c in enumerate(self.travel)], mode="shade",
                       note=" ".join(x for x in ("Disjoint rings; the last also holds places no hub reaches.",
                                                 self.minutes_note) if x))
            for view, rings in [("today", m.rings)] + [(f"v{i + 1}", s.rings) for i, s in enumerate(m.scenarios)]:
                if rings is None or not len(rings):
                    continue
                self.rings(view, rings)
        if m.districts is not None and len(m.districts):
            share = float(m.share_minutes) if m.share_minutes else self.ts[-1]
            classes = P.share_classes()
            f = self.frame("districts", m.districts)
            sb = _fnum(f, "share_beyond")
            idx = P.classify(sb, classes)
            legend = [{"sw": "fill", "c": c.colour, "t": c.label} for c in classes]
            if (idx < 0).any():
                legend.append({"sw": "fill", "c": P.NO_VALUE, "t": "nobody lives there", "fam": "none"})
            self.group("districts", f"Districts: share of people beyond {share:g} min", legend, on=not have_rings,
                       mode="shade")
            styles = [{"fc": c.colour, "fo": 1, "c": _DISTRICT_EDGE, "w": 1.2} for c in classes]
            styles.append({"fc": P.NO_VALUE, "fo": 1, "c": _DISTRICT_EDGE, "w": 1.2})
            cls = np.where(idx < 0, len(classes), idx)
            self.add("districts", "today", "shade", "fill", f, cls=cls.tolist(), styles=styles, pick=1,
                     cols={"name": _text(_col(f, "name", None), 120), "people": _num(_fnum(f, "population"), 0),
                           "share": _num(sb, 3), "mean": _num(_fnum(f, "mean_minutes"), 1)},
                     popup={"head": "District", "title": "name",
                            "rows": [["People", "people", _fmt(digits=0)],
                                     [f"Share beyond {share:g} min", "share", _fmt(digits=1, pct=True,
                                                                                   none="nobody lives there")],
                                     ["Mean minutes to the nearest hub", "mean", _fmt("min", 1)]]})
            # boundaries and names, drawn in every view
            self.group("district_lines", "District boundaries and names",
                       [{"sw": "line", "c": _DISTRICT_EDGE, "t": "district boundary"}])
            self.add("district_lines", None, "dists", "fill", f, styles=[{"fo": 0, "c": _DISTRICT_EDGE, "w": 1.6,
                                                                            "dash": "7 4"}],
                     cls=[0] * len(f))
            self.add("district_lines", None, "labels", "label", f, cols={"name": _text(_col(f, "name", None), 60)},
                     label="name", css="gr-dlabel")

    def rings(self, view, rings):
        f = self.frame(f"rings.{view}", rings)
        fro, to = _fnum(f, "from_minutes"), _fnum(f, "to_minutes")
        probe = np.where(np.isfinite(to), to, fro + 1e-6)
        idx = P.classify(probe, self.travel)
        styles = [{"fc": c.colour, "fo": 1, "w": 0} for c in self.travel]
        labels = [self.travel[i].label + " to the nearest hub" if i >= 0 else None for i in idx]
        self.add("rings", view, "shade", "fill", f, coverage=True, cls=np.maximum(idx, 0).tolist(), styles=styles,
                 pick=1, cols={"label": labels, "people": _num(_fnum(f, "population"), 0),
                               "area": _num(_fnum(f, "area_km2"), 1)},
                 popup={"head": "Reach ring", "title": "label",
                        "rows": [["People", "people", _fmt(digits=0)], ["Area", "area", _fmt("km\u00b2", 1)]]})

    def water(self):
        w = self.m.water
        if w is None or not len(w):
            return
        f = self.frame("water", w)
        self.group("water", "Water and barriers", [{"sw": "fill", "c": P.WATER, "t": "water or barrier"}])
        self.add("water", None, "water", "fill", f, cls=[0] * len(f),
                 styles=[{"fc": P.WATER, "fo": 1, "c": P.WATER_EDGE, "w": 1}], pick=1,
                 cols={"name": _text(_col(f, "name", None), 120), "kind": _text(_col(f, "kind", None), 60)},
                 popup={"head": "Water or barrier", "title": "name", "rows": [["Kind", "kind", _fmt(digits=0)]]})

    def settlements(self):
        m = self.m
        views = [("today", m.settlements)] + [(f"v{i + 1}", s.settlements) for i, s in enumerate(m.scenarios)]
        views = [(v, s) for v, s in views if s is not None and len(s)]
        if not views:
            return
        pops = np.concatenate([_fnum(s, "population") for _, s in views])
        pmax = float(np.nanmax(pops)) if np.isfinite(pops).any() and np.nanmax(pops) > 0 else 0.0
        legend = [{"sw": "dot", "c": c.colour, "t": c.label, "fam": f"travel{k}"} for k, c in enumerate(self.travel)]
        legend.append({"sw": "dot", "c": P.NO_VALUE, "t": "no hub reachable", "fam": "none"})
        if pmax > 0:
            for v in _size_examples(pmax):
                legend.append({"sw": "size", "r": _radius(v, pmax), "t": f"{v:,.0f} people"})
        self.group("settlements", "Settlements: minutes to the nearest hub", legend,
                   note=" ".join(x for x in ("Dot size: people. Names show when there is room.",
                                             self.minutes_note) if x))
        styles = [{"fc": c.colour, "c": P.OUTLINE, "w": 1} for c in self.travel]
        styles.append({"fc": P.NO_VALUE, "c": P.OUTLINE, "w": 1})
        # the routing weight's own cost, when given (a weight other than minutes)
        has_cost = any("cost" in s.columns for _, s in views)
        d = _digits(self.unit)
        cost_row = ([[f"{m.cost_name.capitalize()} to the nearest hub", "cost",
                      _fmt(self.unit, d, none="no hub reachable")]] if has_cost else [])

        def cost_col(f):
            return {"cost": _num(_fnum(f, "cost"), d)} if has_cost else {}

        for view, s in views:
            f = self.frame(f"settlements.{view}", s)
            mins = _fnum(f, "minutes")
            pop = _fnum(f, "population")
            idx = P.classify(mins, self.travel)
            size = [_radius(p, pmax) if pmax > 0 and math.isfinite(p) else 4.0 for p in pop]
            order = np.lexsort((np.arange(len(f)), -np.nan_to_num(pop, nan=-1.0))).tolist()
            self.add("settlements", view, "pts", "point", f, cls=np.where(idx < 0, len(self.travel), idx).tolist(),
                     styles=styles, size=size, order=order, label="name", tip="name",
                     cols={"name": _text(_col(f, "name", None), 80), "people": _num(pop, 0),
                           "min": _num(mins, 1), "hub": _text(_col(f, "hub_name", None), 80),
                           "km": _num(_fnum(f, "network_km"), 1), **cost_col(f)},
                     popup={"head": "Settlement", "title": "name",
                            "rows": [["People", "people", _fmt(digits=0)],
                                     ["Minutes to the nearest hub", "min", _fmt("min", 1, none="no hub reachable")],
                                     ["Nearest hub", "hub", _fmt(digits=0)],
                                     ["Along the network", "km", _fmt("km", 1)], *cost_row]})

    def network(self):
        m = self.m
        nets = [("today", m.network)] + [(f"v{i + 1}", s.network) for i, s in enumerate(m.scenarios)]
        nets = [(v, n) for v, n in nets if n is not None and len(n.edges)]
        if not nets:
            return
        costs = np.concatenate([n.link_cost() for _, n in nets])
        classes = P.cost_classes(costs, self.unit)
        d = _digits(self.unit)
        legend = [{"sw": "line", "c": c.colour, "t": c.label} for c in classes]
        legend.append({"sw": "dash", "c": P.NO_VALUE, "t": "no route to a hub", "fam": "none"})
        unusable = False
        for view, net in nets:
            keep = (_col(net.edges, "mode", "road") != "transfer")
            if net.edge_cost is not None:
                unusable |= bool((~np.isfinite(np.asarray(net.edge_cost, float)) & keep).any())
        if unusable:
            legend.append({"sw": "thin", "c": P.NO_VALUE, "t": f"not used for {self.m.cost_name}", "fam": "none"})
        self.group("network", f"Network: {self.m.cost_name} to the nearest hub", legend, note=self.minutes_note)
        for view, net in nets:
            self.network_view(view, net, classes, d)

    def network_view(self, view, net: NetworkLayer, classes, d):
        cost = net.link_cost()
        ecost = (np.asarray(net.edge_cost, dtype=np.float64) if net.edge_cost is not None
                 else np.zeros(len(net.edges)))
        e = net.edges.assign(_cost=cost, _ecost=ecost)
        e = e[_col(e, "mode", "road") != "transfer"]
        f = self.frame(f"network.{view}", e)
        cost, ecost = f["_cost"].to_numpy(float), f["_ecost"].to_numpy(float)
        idx = P.classify(cost, classes)
        cls = np.where(idx >= 0, idx, len(classes))
        cls = np.where(np.isfinite(ecost), cls, len(classes) + 1)
        modes = _text(_col(f, "mode", None))
        ink = float(f.geometry.length.sum()) / self.area_m2   # metres of line per square metre of study area
        self.add("network", view, "net", "line", f, cls=cls.tolist(), styles=self._net_styles(classes), pick=1,
                 ink=round(ink, 8),
                 cols={"head": [_MODES.get(x, (x or "link").capitalize() + " link") for x in modes],
                       "name": _text(_col(f, "name", None), 120), "cost": _num(cost, d),
                       "len": _num(_fnum(f, "length_m"), 2, 1e-3),
                       "ecost": _num(ecost, d + 1) if net.edge_cost is not None else [None] * len(f)},
                 popup={"headcol": "head", "title": "name",
                        "rows": [[f"{self.m.cost_name.capitalize()} to the nearest hub", "cost",
                                  _fmt(self.unit, d, none="no hub reachable")],
                                 ["Length", "len", _fmt("km", 2)],
                                 ["To cross this link", "ecost", _fmt(self.unit, d + 1,
                                                                       none=f"not used for {self.m.cost_name}")]]})

    @staticmethod
    def _net_styles(classes):
        s = [{"c": c.colour, "w": 2.5} for c in classes]
        s.append({"c": P.NO_VALUE, "w": 1.6, "dash": "4 4"})
        s.append({"c": P.NO_VALUE, "w": 1, "o": 0.8})
        return s

    def hubs(self):
        h = self.m.hubs
        if h is None or not len(h):
            return
        f = self.frame("hubs", h)
        kinds = _text(_col(f, "kind", "hub"))
        kinds = [k or "hub" for k in kinds]
        sym = P.hub_symbols(kinds)
        names = list(sym)
        legend = [{"sw": "shape", "shape": sym[k][0], "c": sym[k][1], "t": k} for k in names]
        self.group("hubs", "Hubs by kind", legend)
        self.add("hubs", None, "hubs", "hub", f, cls=[names.index(k) for k in kinds],
                 styles=[{"shape": sym[k][0], "fc": sym[k][1]} for k in names], tip="name",
                 cols={"name": _text(_col(f, "name", None), 80), "kind": kinds,
                       "id": _text(_col(f, "hub_id", None), 40)},
                 popup={"head": "Hub", "title": "name", "rows": [["Kind", "kind", _fmt(digits=0)],
                                                                 ["Hub id", "id", _fmt(digits=0)]]})

    def weak(self):
        m = self.m
        w = m.weak
        if w is None or not len(w):
            return
        f = self.frame("weak", w).sort_values("rank", kind="stable").reset_index(drop=True)
        pop = _fnum(f, "population")
        lives = np.isfinite(pop) & (pop >= 0.5)   # at least one person, rounded
        if not np.isfinite(pop).any():
            lives = np.ones(len(f), bool)          # no population given: every region counts
        top = np.zeros(len(f), bool)
        top[np.nonzero(lives)[0][: m.top_weak]] = True
        rest = lives & ~top
        empty = ~lives
        wt = float(m.weak_minutes) if m.weak_minutes else self.ts[-1]
        reasons = list(P.REASON_COLOURS)
        edges = self.frame("network.edges", m.network.edges) if m.network else None
        for gid, mask, title, on in (
                ("weak_top", top, f"Weak regions: the {int(top.sum())} with most people", True),
                ("weak_rest", rest, "Other weak regions where people live", False),
                ("weak_empty", empty, "Weak regions where nobody lives", False)):
            if not mask.any():
                continue
            g = f[mask].reset_index(drop=True)
            rs = [str(r) for r in g["reason"]]
            present = [r for r in reasons if r in rs] + sorted({r for r in rs if r not in reasons})
            legend = [{"sw": "outline", "c": P.reason_colour(r), "t": reason_words(r, wt), "fam": f"reason:{r}"}
                      for r in present]
            legend.append({"sw": "badge", "c": P.OUTLINE, "t": "number: rank by people affected"})
            cls = [present.index(r) for r in rs]
            styles = [{"c": P.reason_colour(r), "w": 2.5, "fo": 0} for r in present]
            gpop = _fnum(g, "population")
            titles = [f"Weak region {int(k)}: {reason_words(r, wt)}" for k, r in zip(g["rank"], rs)]
            cols = {"title": titles, "people": _num(gpop, 0), "mean": _num(_fnum(g, "mean_hub_minutes"), 1),
                    "area": _num(_fnum(g, "area_km2"), 1), "rank": [int(k) for k in g["rank"]],
                    "link": [("behind one link, marked with this number" if r == "single_link" else None)
                             for r in rs]}
            popup = {"head": "Weak region", "title": "title",
                     "rows": [["People", "people", _fmt(digits=0)],
                              ["Mean minutes to the nearest hub", "mean", _fmt("min", 1, none="no hub reachable")],
                              ["Area", "area", _fmt("km\u00b2", 1)],
                              ["People", "link", _fmt(digits=0)]]}
            # the key links: each single-link region's one link, with the people behind it
            key_rows = []
            if edges is not None and "edge_id" in g.columns and "edge_id" in edges.columns:
                eid = edges["edge_id"].to_numpy()
                pos = {int(v): i for i, v in enumerate(eid)}
                for i, (r, e) in enumerate(zip(rs, g["edge_id"])):
                    if r == "single_link" and not pd.isna(e) and int(e) in pos:
                        key_rows.append((i, pos[int(e)]))
            if key_rows:
                legend.append({"sw": "line", "c": P.reason_colour("single_link"), "w": 6,
                               "t": "the one link a region hangs on", "fam": "reason:single_link"})
            self.group(gid, title, legend, on=on)
            self.add(gid, "today", "weak", "fill", g, cls=cls, styles=styles, pick=1, cols=cols, popup=popup)
            self.add(gid, "today", "badges", "badge", g, cls=cls, styles=[{"c": s["c"]} for s in styles],
                     cols=cols, badge="rank", popup=popup)
            if key_rows:
                ks = edges.iloc[[j for _, j in key_rows]].reset_index(drop=True)
                kcols = {"title": [f"The one link of weak region {int(g['rank'][i])}" for i, _ in key_rows],
                         "rank": [int(g["rank"][i]) for i, _ in key_rows],
                         "people": [_num([gpop[i]], 0)[0] for i, _ in key_rows]}
                kpop = {"head": "A single link", "title": "title",
                        "rows": [["People who lose every hub if it is cut", "people", _fmt(digits=0)]]}
                c = P.reason_colour("single_link")
                self.add(gid, "today", "top", "line", ks, cls=[0] * len(ks), styles=[{"c": c, "w": 6, "o": 0.9}],
                         pick=1, cols=kcols, popup=kpop)
                self.add(gid, "today", "badges", "badge", _midpoints(ks), cls=[0] * len(ks),
                         styles=[{"c": c, "key": 1}], cols=kcols, badge="rank", popup=kpop)

    def diameter(self):
        dpath = self.m.diameter
        if dpath is None or not len(dpath):
            return
        f = self.frame("diameter", dpath)
        d = _digits(self.unit)
        self.group("diameter", "Longest shortest trip (network diameter)",
                   [{"sw": "dash", "c": P.PATH_COLOUR, "w": 4, "t": "longest shortest trip"}], on=False)
        self.add("diameter", "today", "top", "line", f, cls=[0] * len(f),
                 styles=[{"c": P.PATH_COLOUR, "w": 4, "dash": "10 6"}], pick=1,
                 cols={"cost": _num(_fnum(f, "cost"), d), "len": _num(_fnum(f, "length_m"), 1, 1e-3),
                       "min": _num(_fnum(f, "minutes"), 1)},
                 popup={"head": "Longest shortest trip", "rows": [
                     [f"{self.m.cost_name.capitalize()}", "cost", _fmt(self.unit, d)],
                     ["Length", "len", _fmt("km", 1)], ["Travel time", "min", _fmt("min", 1)]]})

    def issues(self):
        iss = self.m.issues
        if iss is None or not len(iss):
            return
        f = self.frame("issues", iss)
        kinds = [ISSUE_LABELS.get(k, (k or "issue").replace("_", " ")) for k in _text(_col(f, "kind", None))]
        self.group("issues", "Network issues found while building",
                   [{"sw": "dot", "c": P.ISSUE_COLOUR, "t": "issue (grouped when close: number = count)"}],
                   on=False)
        self.add("issues", "today", "pts", "cluster", f, cls=[0] * len(f),
                 styles=[{"fc": P.ISSUE_COLOUR, "c": P.OUTLINE, "w": 1}],
                 cols={"kind": kinds, "detail": _text(_col(f, "detail", None), DETAIL_CHARS)},
                 popup={"head": "Network issue", "title": "kind", "rows": [["Detail", "detail", _fmt(digits=0)]]})

    def scenarios(self):
        m = self.m
        change_vals = [s.change for s in m.scenarios if s.change is not None and len(s.change)]
        if change_vals:
            vals = np.concatenate([_fnum(c, "delta") for c in change_vals])
            classes = P.change_classes(vals, self.unit)
            legend = [{"sw": "line", "c": c.colour, "t": c.label} for c in classes]
            legend[0]["t"] += " (faster)" if self.unit == "min" else " (less)"
            legend[-1]["t"] += " (slower)" if self.unit == "min" else " (more)"
            legend.append({"sw": "dash", "c": P.NO_VALUE, "t": "no value before or after (new, closed or cut off)",
                           "fam": "none"})
            self.group("change", "Change: after \u2212 before" + ("" if self.unit == "min" else
                                                                  f" ({self.m.cost_name}, {self.unit})"),
                       legend, note=self.minutes_note)
        if any(s.proposed is not None and len(s.proposed) for s in m.scenarios):
            self.group("proposed", "Proposed or changed lines",
                       [{"sw": "halo", "c": P.PROPOSED_COLOUR, "t": "highlighted"}])
        d = _digits(self.unit)
        for i, s in enumerate(m.scenarios):
            view = f"v{i + 1}"
            if s.proposed is not None and len(s.proposed):
                f = self.frame(f"proposed.{view}", s.proposed)
                self.add("proposed", view, "prop", "line", f, cls=[0] * len(f),
                         styles=[{"c": P.PROPOSED_COLOUR, "w": 12, "o": 1}], pick=1,
                         cols={"name": _text(_col(f, "name", None), 120)},
                         popup={"head": "Proposed or changed line", "title": "name", "rows": []})
            if s.change is not None and len(s.change):
                f = self.frame(f"change.{view}", s.change)
                dv = _fnum(f, "delta")
                idx = P.classify(dv, classes)
                styles = [{"c": c.colour, "w": 4} for c in classes] + [{"c": P.NO_VALUE, "w": 3, "dash": "4 4"}]
                self.add("change", view, "change", "line", f, cls=np.where(idx < 0, len(classes), idx).tolist(),
                         styles=styles, pick=1,
                         cols={"delta": _num(dv, d), "before": _num(_fnum(f, "before"), d),
                               "after": _num(_fnum(f, "after"), d), "name": _text(_col(f, "name", None), 120)},
                         popup={"head": "Change at this link", "title": "name",
                                "rows": [["Change (after \u2212 before)", "delta", _fmt(self.unit, d, sign=True,
                                                                                      none="no value before or after")],
                                         ["Before", "before", _fmt(self.unit, d, none="no route")],
                                         ["After", "after", _fmt(self.unit, d, none="no route")]]})

    def build(self) -> dict:
        m = self.m
        self.setup()
        self.shading()
        self.water()
        self.network()
        self.scenarios()
        self.weak()
        self.diameter()
        self.settlements()
        self.issues()
        self.hubs()
        add_criticality(self)
        extra = add_indices(self)
        views = [{"id": "today", "name": "Today", "text": "The study as it is."}]
        for i, s in enumerate(m.scenarios):
            views.append({"id": f"v{i + 1}", "name": f"With {s.name}", "text": " ".join(str(s.description).split())})
        order = ["rings", "districts", "settlements", "hubs", "network", "change", "proposed", "water",
                 "district_lines", "weak_top", "weak_rest", "weak_empty", "diameter", "issues", "criticality",
                 *extra]
        groups = [self.groups[k] for k in order if k in self.groups]
        data = {"title": " ".join(str(m.title).split()), "caution": " ".join(str(m.caution).split()),
                "frame": self.fr.to_json(), "bounds": self.bounds, "views": views, "groups": groups,
                "layers": self.layers, "basemap": bool(m.basemap)}
        return data


def _pack(values: list):
    """A column for the page: ``None`` if every value is missing, ``{"v": x}`` if all are ``x``,
    ``{"k": [texts], "i": [index or -1]}`` for texts that repeat, else the list itself."""
    if all(v is None for v in values):
        return None
    first = values[0]
    if first is not None and all(v == first and type(v) is type(first) for v in values):
        return {"v": first}
    if all(v is None or isinstance(v, str) for v in values):
        keys: dict = {}
        idx = [-1 if v is None else keys.setdefault(v, len(keys)) for v in values]
        if len(keys) * 2 <= len(values):
            return {"k": list(keys), "i": idx}
    return values


def _radius(p: float, pmax: float) -> float:
    """Dot radius (pixels) for ``p`` people: area proportional to people, 3 to 13 px."""
    return round(3.0 + 10.0 * math.sqrt(max(p, 0.0) / pmax), 1)


def _size_examples(pmax: float) -> list[float]:
    """Two or three round populations for the size key, largest first."""
    k = 10 ** math.floor(math.log10(pmax))
    top = max(m * k for m in (1, 2, 5) if m * k <= pmax)
    out = [top]
    for frac in (0.2, 0.02):
        v = top * frac
        if v >= 1:
            out.append(v)
    return out


def _midpoints(frame):
    import shapely

    mid = shapely.line_interpolate_point(shapely.line_merge(frame.geometry.values), 0.5, normalized=True)
    return frame.set_geometry(mid)


def page_data(m: MapInput) -> dict:
    """The JSON-ready data of the map page for ``m`` (checked first)."""
    m.check()
    return _Builder(m).build()

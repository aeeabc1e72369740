#!/usr/bin/env python
"""Generate the invented demo region of geo-reach (seeded and deterministic).

The region, its towns, villages, roads and names are all made up.  It is
placed over open ocean (around 21.0 W, 31.0 S, UTM
zone 27S, EPSG:32727) so that real coordinates and a real projected CRS are
exercised while nothing real lies underneath.

Outputs (in this folder):

* ``region.gpkg`` - vector layers in EPSG:32727: roads, rail, stations,
  cable, cable_nodes, settlements, districts, proposed_road, water.
* ``hubs.geojson`` - clinics, the market and the port in WGS84 (RFC 7946).
* ``population.tif`` - people per 200 m cell (float32).
* ``terrain.tif`` - elevation in metres, 100 m cells, on a shifted grid.
* ``faults.json`` - the digitising faults put into ``roads`` on purpose.

Run from the repository root::

    .venv/bin/python data_samples/make_region.py

Rerunning gives the same geometry and byte-identical attributes (and, with
the GDAL build pinned by the venv, byte-identical files).
"""

from __future__ import annotations

import json
import math
import os
import shutil
import tempfile
import zlib
from pathlib import Path

import numpy as np
import shapely
from shapely.geometry import LineString, MultiLineString, Point, Polygon, box
from shapely.ops import substring, unary_union

SEED = 20261201
CRS_UTM = "EPSG:32727"
#: South-west corner and size of the region (metres, EPSG:32727).
X0, Y0, W, H = 470000.0, 6548000.0, 60000.0, 45000.0
OUT = Path(__file__).resolve().parent
#: Fixed timestamp GDAL writes into the GeoPackage, so reruns give the same bytes.
GPKG_DATE = "2026-01-01T00:00:00Z"

#: Syllable pairs turned down when vetted against the GeoNames gazetteer (cities of 500+
#: people, alternate names included: exact match; cities of 5000+: one letter away; cities of
#: 15000+: two letters swapped) and a few English words or near-names.  The names drawn below are the pairs not listed here.
DENY = set("""
astand astar astern astey astin astira astmar astona astow astul astyn braemar brenade brenar
brenesk breney brenona caelow draar draby drain dramar draund drayn dunar dunby duneth duney dunin
dunmar dunow dunyn eldand eldar eldask eldern eldin eldira eldona faland falar falby faley falin
falmar falona falul falund falyn feney fenin fenira fenyn galand galar galby galey galin galira
galith galmar galund galusk galyn gormby gormern gormey gormin haland halar halby halern haley halin
halira halmar halolm haloth halow halul halusk halyn haskern haskey haskin haskira haskmar ivade
ivand ivar ivby ivern ivery ivey ivin ivira ivona ivost ivoth ivow jorand jorar jorby jorey jorin
jorona jorund ketar ketby ketey ketin ketow ketul ketyn kevar kevern kevey kevin koland kolar kolby
koley kolin kolira kolith kolmar kololm kolona kolow kolyn livade livand livar livby livery livey
livin livona livyn lurern lurey lurin lurmar lurul luryn mevar mevern mevey mevin mevyn morance
morand morar morask morby moreth morey morin morira mormar morona moroth morow morul morund moryn
nesby nesira nesul norand norar norask norby norey norin norira norisk normar norona norow norul
norund noryn orrance orrand orrin orrona orrow oskby oskern oskul pavand pavar paveth pavey pavin
pavira pavona pavul pelland pellar pelley pellin pellmar quelin quelul ravar ravby ravern ravery
ravey ravin ravira ravmar ravona ravul rhuade rhuby rhuin savade savand savar savby savern saveth
savey savin savira savmar savona savow savul seland selar selavik selby selern seley selin selmar
selona selost selow selul skeland skelar skelby skelow sundance sundand sundar sundby sundern
sundery sundmar sundona talance taland talar talask talby talern talery taley talin talira talmar
talona talow talyn terar terask terby teresk terey terin terith terona terow terul teryn thalar
thaley torade torance torar torby toresk torey torin torira torith tormar torona torow torul torund
toryn trevin trevisk trevost ulmar ulmin ulmira ulmona ulmul varade varand varar varask varby varesk
vareth varey varin varira varmar varona varow varul varyn velance veland velar velask velby velern
velesk veley velin velisk velith velmar velona velow velul velusk velyn vosby vosul wenby wenmar
wenona wenow yrar yrin yrith yrmar yrona yroth yrusk zenin zenira zenow
""".split())


# ----------------------------------------------------------------------------- helpers
def rng_for(stage: str) -> np.random.Generator:
    """A generator per stage, so changing one stage leaves the others as they were."""
    return np.random.default_rng([SEED, zlib.crc32(stage.encode())])


def P(u, v):
    """Local metres (from the south-west corner) to EPSG:32727, rounded to 1 mm."""
    return np.round(np.array([X0 + u, Y0 + v], float), 3)


def rnd(a):
    return np.round(np.asarray(a, float), 3)


def cumlen(c):
    return np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(c, axis=0).T))])


def meander(p0, p1, rng, amp=0.04, spacing=50.0, modes=5, jitter=0.0):
    """A smooth wandering polyline from p0 to p1 (both kept exactly)."""
    p0, p1 = np.asarray(p0, float), np.asarray(p1, float)
    d = p1 - p0
    L = float(np.hypot(*d))
    n = max(3, int(math.ceil(L / spacing)) + 1)
    t = np.linspace(0.0, 1.0, n)
    nrm = np.array([-d[1], d[0]]) / L
    off = np.zeros(n)
    for k in range(1, modes + 1):
        off += rng.normal(0.0, amp * L / k ** 1.6) * np.sin(k * math.pi * t)
    pts = p0 + np.outer(t, d) + np.outer(off, nrm)
    if jitter:
        pts[1:-1] += rng.normal(0.0, jitter, size=(n - 2, 2))
    pts = rnd(pts)
    pts[0], pts[-1] = p0, p1
    return pts


def path_through(points, rng, **kw):
    """Meander through a list of waypoints, sharing the waypoint vertices."""
    parts = [meander(a, b, rng, **kw) for a, b in zip(points[:-1], points[1:])]
    return np.vstack([parts[0]] + [p[1:] for p in parts[1:]])


def point_at(c, s):
    """Point at arc length s along coords c (not rounded)."""
    cl = cumlen(c)
    k = int(np.clip(np.searchsorted(cl, s) - 1, 0, len(c) - 2))
    f = (s - cl[k]) / (cl[k + 1] - cl[k])
    return c[k] + f * (c[k + 1] - c[k]), k


def nearest_vertex(c, p, lo=1, hi=None):
    hi = len(c) - 1 if hi is None else hi
    d = np.hypot(*(c[lo:hi] - p).T)
    return lo + int(np.argmin(d))


# ----------------------------------------------------------------------------- names
STARTS = ["Var", "Osk", "Bren", "Tal", "Kev", "Mor", "Dra", "Hal", "Sel", "Vos", "Ulm", "Ket",
          "Rav", "Tor", "Fen", "Gal", "Lur", "Nes", "Pav", "Quel", "Sav", "Thal", "Yr", "Zen",
          "Brae", "Cael", "Eld", "Iv", "Jor", "Kol", "Mev", "Orr", "Rhu", "Skel", "Ter", "Wen",
          "Ast", "Dun", "Fal", "Gorm", "Hask", "Liv", "Nor", "Pell", "Sund", "Trev", "Vel", "Wyr"]
ENDS = ["eth", "by", "mar", "ost", "ith", "and", "avik", "ul", "ask", "ira", "ona", "ey", "ern",
        "und", "olm", "ade", "isk", "oth", "yn", "ar", "esk", "ow", "in", "ance", "ery", "usk"]


class Namer:
    """Draws unused invented names from syllables (seeded)."""

    def __init__(self, rng):
        self.rng = rng
        self.used: set[str] = set()
        self.starts: set[str] = set()

    def __call__(self, distinct_start: bool = False) -> str:
        """An unused name; ``distinct_start`` also refuses a first syllable already used by a town."""
        for _ in range(10000):
            start, end = STARTS[self.rng.integers(len(STARTS))], ENDS[self.rng.integers(len(ENDS))]
            name = start + end
            key = name.lower()
            if key in DENY or key in self.used or any(key[:4] == u[:4] for u in self.used):
                continue
            if start[-2:].lower() == key[-2:]:   # echoing syllables such as "Ulmolm"
                continue
            if distinct_start and start in self.starts:
                continue
            if distinct_start:
                self.starts.add(start)
            self.used.add(key)
            return name
        raise RuntimeError("ran out of invented names")


# ----------------------------------------------------------------------------- land and water
def make_land(rng):
    from scipy.ndimage import gaussian_filter1d

    v = np.arange(0.0, H + 1.0, 150.0)

    def smooth_noise(sigma):
        g = gaussian_filter1d(rng.normal(size=len(v) + 80), sigma)[40:-40]
        return g / g.std()

    ph = rng.uniform(0, 2 * math.pi)
    u = 50500 + 1300 * np.sin(2 * math.pi * v / 21000 + ph) + 650 * smooth_noise(10) + 160 * smooth_noise(2.5)
    coast = rnd(np.column_stack([X0 + u, Y0 + v]))
    land = Polygon(np.vstack([P(0, 0), coast, P(0, H)]))
    region = box(X0, Y0, X0 + W, Y0 + H)
    sea = region.difference(land)
    # Lake: a wobbly ellipse north of the market town.
    a = np.linspace(0, 2 * math.pi, 61)[:-1]
    r = 1.0 + 0.12 * np.sin(3 * a + rng.uniform(0, 6)) + 0.06 * np.sin(5 * a + rng.uniform(0, 6))
    lc = P(31500, 31000)
    rot = math.radians(25)
    ex, ey = 2100 * r * np.cos(a), 1200 * r * np.sin(a)
    lake = Polygon(rnd(np.column_stack([lc[0] + ex * math.cos(rot) - ey * math.sin(rot),
                                        lc[1] + ex * math.sin(rot) + ey * math.cos(rot)])))
    return land, sea, lake, coast


def coast_u_at(coast, v):
    """Easting of the coastline at local northing v."""
    return float(np.interp(Y0 + v, coast[:, 1], coast[:, 0]))


# ----------------------------------------------------------------------------- the road network
class Net:
    """Routes (long polylines with attributes) that share vertices where they meet."""

    def __init__(self):
        self.routes: list[dict] = []

    def add(self, coords, cls, name, tag="", attach=True, oneway=None, all_season=None):
        self.routes.append(dict(coords=rnd(coords), cls=cls, name=name, tag=tag, attach=attach,
                                oneway=oneway, all_season=all_season))
        return len(self.routes) - 1

    def union(self):
        return unary_union([LineString(r["coords"]) for r in self.routes])


def town_grid(centre, spacing=170.0, angle_deg=12.0, n=5):
    """Node coordinates G[row, col] of a small rotated street grid."""
    th = math.radians(angle_deg)
    ex = np.array([math.cos(th), math.sin(th)])
    ny = np.array([-math.sin(th), math.cos(th)])
    G = np.zeros((n, n, 2))
    for r in range(n):
        for c in range(n):
            G[r, c] = rnd(centre + (c - n // 2) * spacing * ex + (r - n // 2) * spacing * ny)
    return G


def remove_vertices_near(c, p, r):
    """Drop interior vertices of c within r metres of p (so a crossing has no vertex)."""
    d = np.hypot(*(c - p).T)
    keep = np.ones(len(c), bool)
    keep[1:-1] = d[1:-1] > r
    return c[keep]


def build(seed_names):
    rng = rng_for("land")
    land, sea, lake, coast = make_land(rng)
    name = seed_names
    land_safe = land.buffer(-150).difference(lake.buffer(150))
    shapely.prepare(land_safe)

    # Towns (local coordinates), the port on the coast.
    v_port = 24500.0
    towns = {
        "M": P(27000, 20500), "A": P(9000, 34500), "B": P(8500, 9500),
        "C": P(41000, 38500), "D": P(34000, 6000),
    }
    towns["P"] = rnd([coast_u_at(coast, v_port) - 260.0, Y0 + v_port])
    port_site = rnd([coast_u_at(coast, v_port) - 35.0, Y0 + v_port + 20.0])
    town_names = {k: name(distinct_start=True) for k in ["M", "P", "A", "B", "C", "D"]}

    net = Net()
    G = town_grid(towns["M"])
    rr = rng_for("roads")
    trunk_name = f"{town_names['M']}-{town_names['P']} Road"
    main_names = {k: f"{town_names[a]}-{town_names[b]} Road"
                  for k, (a, b) in {"MA": ("M", "A"), "MB": ("M", "B"), "MD": ("M", "D"),
                                    "CD": ("C", "D"), "AB": ("A", "B")}.items()}
    # Trunk: west edge -> town grid (row 2) -> port.
    tw = net.add(meander(G[2, 0], P(0, 23400), rr, amp=0.035, spacing=45), "trunk", trunk_name, "trunk_w")
    te_coords = path_through([G[2, 4], P(38000, 22600), towns["P"]], rr, amp=0.03, spacing=45)
    te = net.add(te_coords, "trunk", trunk_name, "trunk_e")
    # Town grid: rows are E-W streets (row 2 is the trunk), columns N-S streets.
    street = [name() for _ in range(8)]
    for r in range(5):
        if r == 2:
            net.add(G[2], "trunk", trunk_name, "grid_trunk", attach=False, all_season=1)
        else:
            net.add(G[r], "feeder", f"{street[r if r < 2 else r - 1]} Street", f"grid_r{r}", attach=False,
                    all_season=1)
    for c in range(5):
        net.add(G[:, c], "feeder", None if c == 0 else f"{street[3 + c]} Lane", f"grid_c{c}", attach=False,
                all_season=1)
    # Main roads.
    ma = net.add(meander(G[4, 1], towns["A"], rr, amp=0.04, spacing=45), "main", main_names["MA"], "MA")
    mb = net.add(meander(G[0, 0], towns["B"], rr, amp=0.04, spacing=45), "main", main_names["MB"], "MB")
    md = net.add(meander(G[0, 2], towns["D"], rr, amp=0.035, spacing=45), "main", main_names["MD"], "MD")
    cd_coords = path_through([towns["C"], P(39500, 27000), P(37300, 15000), towns["D"]], rr, amp=0.03, spacing=45)
    # West road A-B meets the trunk at a shared vertex J.
    twc = net.routes[tw]["coords"]
    j = nearest_vertex(twc, P(8700, 23800))
    J = twc[j]
    ab_coords = path_through([towns["A"], J, towns["B"]], rr, amp=0.03, spacing=45)
    ab = net.add(ab_coords, "main", main_names["AB"], "AB")

    # Bridge: the C-D road passes over the trunk east of the market town (no junction).
    X = LineString(cd_coords).intersection(LineString(te_coords))
    assert X.geom_type == "Point", X
    X = np.array(X.coords[0])
    cd_coords = remove_vertices_near(cd_coords, X, 4.0)
    net.routes[te]["coords"] = remove_vertices_near(net.routes[te]["coords"], X, 4.0)
    cd = net.add(cd_coords, "main", main_names["CD"], "CD")
    s_x = LineString(cd_coords).project(Point(X))
    cdl = cumlen(cd_coords)
    bridge_cuts = (int(np.argmin(np.abs(cdl - (s_x - 75)))), int(np.argmin(np.abs(cdl - (s_x + 75)))))
    # A link road near the bridge joins the C-D road to the trunk.
    tec = net.routes[te]["coords"]
    s_t = LineString(tec).project(Point(X))
    a_link = int(np.argmin(np.abs(cdl - (s_x - 1100))))
    b_link = int(np.argmin(np.abs(cumlen(tec) - (s_t + 1200))))
    net.add(meander(cd_coords[a_link], tec[b_link], rr, amp=0.02, spacing=40), "feeder",
            f"{name()} Link", "link", all_season=1)

    # Crossing fault: a track between two villages crosses the A-B road with no vertex there.
    abc = net.routes[ab]["coords"]
    k = len(abc) * 3 // 4
    Q = (abc[k] + abc[k + 1]) / 2
    dvec = abc[k + 1] - abc[k]
    nv = np.array([-dvec[1], dvec[0]]) / np.hypot(*dvec)
    V1, V2 = rnd(Q + 1400 * nv), rnd(Q - 1250 * nv)
    rc = rng_for("crossing")
    xt = meander(V1 + rnd([25, -18]), V2 + rnd([-20, 30]), rc, amp=0.02, spacing=40, jitter=0.3)
    Xc = LineString(xt).intersection(LineString(abc))
    assert Xc.geom_type == "Point", Xc
    Xc = np.array(Xc.coords[0])
    xt = remove_vertices_near(xt, Xc, 4.0)
    net.routes[ab]["coords"] = remove_vertices_near(abc, Xc, 4.0)
    xtrack = net.add(xt, "track", None, "cross_track", attach=False)
    special = [X, Xc]

    # Short streets in the smaller towns and a harbour street at the port.
    rs = rng_for("streets")
    for key, n_st in (("A", 3), ("B", 3), ("C", 2), ("D", 2), ("P", 2)):
        node = towns[key]
        dirs = []
        for r in net.routes:
            c = r["coords"]
            for end, nxt in ((0, 1), (-1, -2)):
                if np.array_equal(c[end], node):
                    dirs.append(math.atan2(*(c[nxt] - node)[::-1]))
        if key == "P":
            tgt = rnd(port_site + 25.0 * (node - port_site) / np.hypot(*(node - port_site)))
            net.add(meander(node, tgt, rs, amp=0.02, spacing=30), "feeder", "Harbour Street", "street_P",
                    attach=False, all_season=1, oneway="no")
            dirs.append(math.atan2(*(tgt - node)[::-1]))
        made = tries_st = 0
        while made < n_st and tries_st < 500:
            tries_st += 1
            a = rs.uniform(-math.pi, math.pi)
            if all(abs((a - b + math.pi) % (2 * math.pi) - math.pi) > math.radians(55) for b in dirs):
                ln = rs.uniform(300, 600)
                end = rnd(node + ln * np.array([math.cos(a), math.sin(a)]))
                if not shapely.contains_xy(land_safe, *end):
                    continue
                net.add(meander(node, end, rs, amp=0.03, spacing=30), "feeder",
                        f"{name()} Street" if rs.random() < 0.7 else None, f"street_{key}", attach=False,
                        all_season=1)
                dirs.append(a)
                made += 1

    # Villages.
    rv = rng_for("villages")
    remote_n = P(20000, 41800)
    remote_sw = P(3400, 1900)
    villages = []  # dicts: xy, pop, remote, tag

    def ok_place(p, sep=1400.0):
        if not shapely.contains_xy(land_safe, *p):
            return False
        if land.exterior.distance(Point(p)) < 500 and p[0] > X0 + 40000:
            return False
        if not (X0 + 800 < p[0] < X0 + W - 800 and Y0 + 800 < p[1] < Y0 + H - 800):
            return False
        if lake.distance(Point(p)) < 500:
            return False
        if any(np.hypot(*(p - t)) < 1700 for t in towns.values()):
            return False
        return all(np.hypot(*(p - v["xy"])) >= sep for v in villages)

    for vxy, tag in ((V1, "cross"), (V2, "cross")):
        assert shapely.contains_xy(land_safe, *vxy)
        villages.append(dict(xy=vxy, remote=False, tag=tag))
    # Remote cluster (north, behind the ridge) and a remote pair in the south-west.
    while sum(v["tag"] == "remote_n" for v in villages) < 5:
        p = rnd(remote_n + rv.normal(0, 1300, 2))
        if np.hypot(*(p - remote_n)) < 2300 and ok_place(p, 900):
            villages.append(dict(xy=p, remote=True, tag="remote_n"))
    for p in (P(2600, 2500), P(4400, 1400)):
        villages.append(dict(xy=p, remote=True, tag="remote_sw"))
    tries = 0
    while sum(not v["remote"] for v in villages) < 62 and tries < 200000:
        tries += 1
        p = rnd(P(rv.uniform(0, W), rv.uniform(0, H)))
        if np.hypot(*(p - remote_n)) < 6500 or np.hypot(*(p - remote_sw)) < 5200:
            continue
        if any(np.hypot(*(p - s)) < 1600 for s in special):
            continue
        if ok_place(p):
            villages.append(dict(xy=p, remote=False, tag=""))
    for v in villages:
        v["pop"] = int(np.clip(round(math.exp(rv.normal(math.log(260), 0.65))), 50, 800))
        v["name"] = name()

    # Connect villages greedily (nearest first) with tracks and feeders.
    def attach_candidates():
        ends = np.array([c for r in net.routes for c in (r["coords"][0], r["coords"][-1])])
        cand = []
        for i, r in enumerate(net.routes):
            if not r["attach"]:
                continue
            c = r["coords"]
            for kk in range(2, len(c) - 2):
                p = c[kk]
                if np.hypot(*(p - towns["M"])) < 700:
                    continue
                if any(np.hypot(*(p - s)) < 600 for s in special):
                    continue
                if np.min(np.hypot(*(ends - p).T)) < 150:
                    continue
                cand.append((i, kk))
        return cand

    def route_ok(coords, target, union):
        line = LineString(coords)
        if not line.within(land_safe):
            return False
        inter = line.intersection(union)
        if inter.is_empty:
            return False
        pts = shapely.get_coordinates(inter)
        if inter.geom_type not in ("Point", "MultiPoint") or np.max(np.hypot(*(pts - target).T)) > 1e-6:
            return False
        head = substring(line, 0, max(line.length - 150.0, 1.0))
        if head.distance(union) < 60.0:
            return False
        return True

    def approach_ok(coords, parent, kk):
        a = coords[-1] - coords[-2]
        b = parent[kk + 1] - parent[kk - 1]
        s = abs(a[0] * b[1] - a[1] * b[0]) / (np.hypot(*a) * np.hypot(*b))
        return s > 0.6  # meets the road at more than about 37 degrees

    rt = rng_for("tracks")
    todo = [i for i, v in enumerate(villages) if not v["remote"] and v["tag"] != "cross"]
    for v in villages:
        v["road"] = None
    while todo:
        union = net.union()
        shapely.prepare(union)
        dist = [union.distance(Point(villages[i]["xy"])) for i in todo]
        o = int(np.argmin(dist))
        i = todo.pop(o)
        v = villages[i]
        if dist[o] < 350:
            v["road"] = "beside"
            continue
        if dist[o] > 6500:
            continue
        cand = attach_candidates()
        cxy = np.array([net.routes[ri]["coords"][kk] for ri, kk in cand])
        order = np.argsort(np.hypot(*(cxy - v["xy"]).T))[:60]
        ang = rt.uniform(0, 2 * math.pi)
        start = rnd(v["xy"] + rt.uniform(15, 60) * np.array([math.cos(ang), math.sin(ang)]))
        length = float(np.hypot(*(cxy[order[0]] - start)))
        cls = "feeder" if (length > 2500 and v["pop"] >= 250) else "track"
        done = False
        for amp in (0.05, 0.025, 0.01):
            for oi in order:
                ri, kk = cand[oi]
                parent = net.routes[ri]["coords"]
                coords = meander(start, parent[kk], rt, amp=amp, spacing=40 if cls == "track" else 45,
                                 jitter=0.3 if cls == "track" else 0.0)
                if not approach_ok(coords, parent, kk):
                    continue
                if route_ok(coords, parent[kk], union):
                    if cls == "track":
                        nm = f"{v['name']} Track" if rt.random() < 0.4 else None
                    else:
                        nm = f"{v['name']} Road"
                    net.add(coords, cls, nm, f"village_{i}", all_season=None if cls == "feeder" else 0)
                    v["road"] = cls
                    done = True
                    break
            if done:
                break

    return dict(land=land, sea=sea, lake=lake, coast=coast, towns=towns, town_names=town_names,
                port_site=port_site, net=net, G=G, villages=villages, bridge_X=X, bridge_cuts=bridge_cuts,
                cd=cd, te=te, ab=ab, xtrack=xtrack, cross_X=Xc, ma=ma, mb=mb, md=md, tw=tw,
                remote_n=remote_n, street=street)


# ----------------------------------------------------------------------------- proposed road
def make_proposal(d, name):
    """A proposed road through the remote northern cluster, touching the network at both ends."""
    net = d["net"]
    cl = [v for v in d["villages"] if v["tag"] == "remote_n"]
    cl.sort(key=lambda v: v["xy"][0])
    union = net.union()
    ends = np.array([c for r in net.routes for c in (r["coords"][0], r["coords"][-1])])
    cand, where = [], []
    for i, r in enumerate(net.routes):
        if not r["attach"]:
            continue
        for k in range(2, len(r["coords"]) - 2):
            p = r["coords"][k]
            if np.min(np.hypot(*(ends - p).T)) > 400:
                cand.append(p)
                where.append((i, k))
    cand = np.array(cand)

    def lead_in(e):
        """A waypoint 350 m off the road at e, on the cluster side, so the new road meets it squarely."""
        i, k = where[int(np.flatnonzero((cand == e).all(axis=1))[0])]
        c = net.routes[i]["coords"]
        t = c[k + 1] - c[k - 1]
        nv = np.array([-t[1], t[0]]) / np.hypot(*t)
        if np.dot(ctr - e, nv) < 0:
            nv = -nv
        return rnd(e + 350.0 * nv)

    # One end where the network comes nearest; the other on another side, more than 5 km away.
    ctr = np.mean([v["xy"] for v in cl], axis=0)
    e1 = cand[np.argmin(np.hypot(*(cand - ctr).T))]
    a1 = math.atan2(*(e1 - ctr)[::-1])
    ang = np.arctan2(cand[:, 1] - ctr[1], cand[:, 0] - ctr[0])
    dif = np.abs((ang - a1 + math.pi) % (2 * math.pi) - math.pi)
    ok = (np.hypot(*(cand - e1).T) > 5000) & (dif > math.radians(40))
    e2 = cand[ok][np.argmin(np.hypot(*(cand[ok] - ctr).T))]
    a2 = math.atan2(*(e2 - ctr)[::-1])
    # Visit the villages sweeping round the cluster from the side of e1 to the side of e2,
    # going the long way round (through the far side of the cluster).
    sweep = (a2 - a1) % (2 * math.pi)
    sgn = 1.0 if sweep > math.pi else -1.0
    cl.sort(key=lambda v: (sgn * (math.atan2(*(v["xy"] - ctr)[::-1]) - a1)) % (2 * math.pi))
    rp = rng_for("proposal")
    for _ in range(200):
        way = [e1, lead_in(e1)] + [rnd(v["xy"] + rp.normal(0, 60, 2) + 120.0 * (v["xy"] - ctr)
                                       / np.hypot(*(v["xy"] - ctr))) for v in cl] + [lead_in(e2), e2]
        coords = path_through(way, rp, amp=0.03, spacing=40)
        line = LineString(coords)
        inter = line.intersection(union)
        pts = shapely.get_coordinates(inter)
        if len(pts) == 2 and {tuple(p) for p in pts} == {tuple(e1), tuple(e2)} \
                and substring(line, 150, line.length - 150).distance(union) > 60 \
                and line.within(d["land"]) and not line.intersects(d["lake"]):
            break
    else:
        raise RuntimeError("no proposed road found that meets the network only at its ends")
    # The second end is digitised stopping 0.3 m short of the road it is meant to join.
    u = (coords[-2] - coords[-1]) / np.hypot(*(coords[-2] - coords[-1]))
    lo, hi = 0.0, 1.0
    for _ in range(60):
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if union.distance(Point(e2 + mid * u)) < 0.3 else (lo, mid)
    coords[-1] = rnd(e2 + hi * u)
    return dict(coords=coords, name=f"{cl[len(cl) // 2]['name']} Link Road", ends=(e1, e2))


# ----------------------------------------------------------------------------- roads table and faults
def split_pieces(d):
    """Cut every route at the vertices it shares with other routes (clean, noded network)."""
    net = d["net"]
    owners: dict[tuple, set] = {}
    for i, r in enumerate(net.routes):
        for c in r["coords"]:
            owners.setdefault((c[0], c[1]), set()).add(i)
    pieces = []
    rp = rng_for("pseudo_nodes")
    for i, r in enumerate(net.routes):
        c = r["coords"]
        cuts = {k for k in range(1, len(c) - 1) if len(owners[(c[k, 0], c[k, 1])]) > 1}
        if i == d["cd"]:
            cuts |= set(d["bridge_cuts"])
        cuts |= pseudo_nodes(d, r, cuts, rp)
        bounds = [0] + sorted(cuts) + [len(c) - 1]
        for n, (a, b) in enumerate(zip(bounds[:-1], bounds[1:])):
            pieces.append(dict(route=i, part=n, coords=c[a:b + 1].copy(), level=0, oneway=r["oneway"],
                               cls=r["cls"], name=r["name"], tag=r["tag"], all_season=r["all_season"],
                               geom_kind="line"))
            if i == d["cd"] and (a, b) == tuple(sorted(d["bridge_cuts"])):
                pieces[-1]["level"] = 1
    assert sum(p["level"] for p in pieces) == 1
    return pieces


def pseudo_nodes(d, r, cuts, rng):
    """Extra cuts where only an attribute would change (two line ends meet, nothing else).

    Real road layers are split at many such places (survey sheets, surface changes).
    """
    if r["cls"] == "track" or not r["attach"] or r["tag"].startswith(("grid", "street")):
        return set()
    c = r["coords"]
    cl = cumlen(c)
    if cl[-1] < 4000:
        return set()
    avoid = [d["bridge_X"], d["cross_X"], *d["proposal_ends"]]
    taken = sorted(cuts | {0, len(c) - 1})
    out = set()
    s = rng.uniform(1500, 3500)
    while s < cl[-1] - 1500:
        k = int(np.argmin(np.abs(cl - s)))
        if all(abs(cl[k] - cl[t]) > 400 for t in taken + sorted(out)) and \
                all(np.hypot(*(c[k] - q)) > 500 for q in avoid):
            out.add(k)
        s += rng.uniform(1800, 3500)
    return out


def piece_geom(p):
    if p["geom_kind"] == "null":
        return None
    if p["geom_kind"] == "multi":
        return MultiLineString(p["parts"])
    return LineString(p["coords"])


def set_attributes(d, pieces):
    ra = rng_for("attributes")
    route_season = {}
    for p in pieces:
        r = p["route"]
        if p["all_season"] is None:
            if p["cls"] in ("trunk", "main"):
                p["all_season"] = 1
            elif p["cls"] == "feeder":
                if r not in route_season:
                    route_season[r] = int(ra.random() < 0.6)
                p["all_season"] = route_season[r]
            else:
                p["all_season"] = 0
        if p["oneway"] is None:
            if p["cls"] in ("trunk", "main"):
                p["oneway"] = "no"
            elif p["cls"] == "feeder" and not p["tag"].startswith("grid") and ra.random() < 0.3:
                p["oneway"] = "no"
    # Two main-road pieces on low ground that flood in the wet season.
    mains = [p for p in pieces if p["cls"] == "main" and p["level"] == 0 and len(p["coords"]) > 8]
    for k in ra.choice(len(mains), 2, replace=False):
        mains[int(k)]["all_season"] = 0
    # One-way loop round two blocks of the market town (anticlockwise).
    def grid_piece(tag, part):
        (p,) = [p for p in pieces if p["tag"] == tag and p["part"] == part]
        return p
    loop = [grid_piece("grid_r3", 2), grid_piece("grid_r3", 3), grid_piece("grid_c4", 3),
            grid_piece("grid_r4", 3), grid_piece("grid_r4", 2), grid_piece("grid_c2", 3)]
    loop[3]["coords"] = loop[3]["coords"][::-1].copy()   # digitised westwards, with the flow
    for p, ow in zip(loop, ["yes", "yes", "yes", "yes", "-1", "-1"]):
        p["oneway"] = ow
    return loop


def attach_sites(d, pieces):
    """Places where a village road ends on another road at a plain T junction."""
    count: dict[tuple, int] = {}
    for p in pieces:
        for c in (p["coords"][0], p["coords"][-1]):
            count[tuple(c)] = count.get(tuple(c), 0) + 1
    sites = []
    for i, p in enumerate(pieces):
        if not p["tag"].startswith("village_"):
            continue
        last = max(q["part"] for q in pieces if q["route"] == p["route"])
        if p["part"] != last:
            continue
        node = tuple(p["coords"][-1])
        if count[node] != 3 or len(p["coords"]) < 4 or np.hypot(*(p["coords"][-1] - p["coords"][-2])) < 20:
            continue
        parents = [j for j, q in enumerate(pieces) if j != i and
                   (tuple(q["coords"][0]) == node or tuple(q["coords"][-1]) == node)]
        sites.append(dict(child=i, parents=parents, node=np.array(node)))
    return sites


def inject_faults(d, pieces, proposal, name):
    rf = rng_for("faults")
    sites = attach_sites(d, pieces)
    keep_away = [d["bridge_X"], d["cross_X"], *proposal["ends"]]
    chosen = []
    order = rf.permutation(len(sites))
    for k in order:
        s = sites[int(k)]
        if all(np.hypot(*(s["node"] - q)) > 1500 for q in keep_away + [c["node"] for c in chosen]):
            chosen.append(s)
    plan = (["gap_small"] * 5 + ["gap_large"] * 4 + ["overshoot"] * 5 + ["stub"])
    assert len(chosen) >= len(plan), (len(chosen), len(plan))
    chosen = chosen[:len(plan)]

    def squareness(s):
        c, par = pieces[s["child"]]["coords"], pieces[s["parents"][0]]["coords"]
        a = c[-1] - c[-2]
        b = (par[1] - par[0]) if np.array_equal(par[0], s["node"]) else (par[-1] - par[-2])
        return abs(a[0] * b[1] - a[1] * b[0]) / (np.hypot(*a) * np.hypot(*b))

    # Gaps go where the village road meets the other road most squarely, so the distance to
    # the road and the distance to the junction node differ little (both stay on the same
    # side of the 1 m tolerance).
    chosen.sort(key=lambda s: -squareness(s))
    small = [0.31, 0.45, 0.59, 0.72, 0.85]
    large = [1.3, 1.7, 2.2, 2.75]
    over = [0.24, 0.43, 0.61, 0.78, 4.0]
    jobs = []
    for kind, s in zip(plan, chosen):
        if kind == "gap_small":
            size = small.pop(0) + rf.uniform(-0.03, 0.03)
        elif kind == "gap_large":
            size = large.pop(0) + rf.uniform(-0.05, 0.05)
        elif kind == "overshoot":
            size = over.pop(0) + (rf.uniform(-0.02, 0.02) if over else 0.0)
        else:
            size = rf.uniform(4.0, 7.0)
        jobs.append((kind, s, size))
    extra = []   # features appended after the clean pieces
    for kind, s, size in jobs:
        child = pieces[s["child"]]
        c = child["coords"]
        node, prev = c[-1].copy(), c[-2]
        par = unary_union([LineString(pieces[j]["coords"]) for j in s["parents"]])
        if kind.startswith("gap"):
            u = (prev - node) / np.hypot(*(prev - node))
            lo, hi = 0.0, size * 3
            for _ in range(60):
                mid = (lo + hi) / 2
                if par.distance(Point(node + mid * u)) < size:
                    lo = mid
                else:
                    hi = mid
            c[-1] = rnd(node + hi * u)
        elif kind == "overshoot":
            u = (node - prev) / np.hypot(*(node - prev))
            c[-1] = rnd(node + size * u)
        else:  # stub: a short dead end continuing the village road across the junction
            u = (node - prev) / np.hypot(*(node - prev))
            a = rf.uniform(-0.5, 0.5)
            u = np.array([u[0] * math.cos(a) - u[1] * math.sin(a), u[0] * math.sin(a) + u[1] * math.cos(a)])
            mid_pt = rnd(node + 0.45 * size * u + rf.normal(0, 0.15, 2))
            end = rnd(node + size * u)
            extra.append(dict(route=-1, part=0, coords=np.array([node, mid_pt, end]), level=0, oneway=None,
                              cls="track", name=None, tag="stub", all_season=0, geom_kind="line",
                              fault=dict(kind="stub", site=s)))
            continue
        child["fault"] = dict(kind=kind, site=s)

    # Duplicates: an exact copy of a feeder piece, a reversed copy of a main-road piece.
    busy = {s["child"] for _, s, _ in jobs} | {j for _, s, _ in jobs for j in s["parents"]}
    near_busy = [s["node"] for _, s, _ in jobs] + keep_away

    def free(i, p):
        mid = np.array(LineString(p["coords"]).interpolate(0.5, normalized=True).coords[0])
        return i not in busy and p["level"] == 0 and all(np.hypot(*(mid - q)) > 1500 for q in near_busy)

    feeders = [i for i, p in enumerate(pieces) if p["cls"] == "feeder" and p["tag"].startswith("village_")
               and free(i, p) and len(p["coords"]) > 10]
    mains = [i for i, p in enumerate(pieces) if p["cls"] == "main" and free(i, p) and len(p["coords"]) > 10]
    dup_a = feeders[int(rf.integers(len(feeders)))]
    dup_b = mains[int(rf.integers(len(mains)))]
    busy |= {dup_a, dup_b}
    for i, rev in ((dup_a, False), (dup_b, True)):
        q = dict(pieces[i])
        q["coords"] = pieces[i]["coords"][::-1].copy() if rev else pieces[i]["coords"].copy()
        q["tag"] = "duplicate"
        q["fault"] = dict(kind="duplicate", of=i, reversed=rev)
        extra.append(q)
    # Multipart: a whole village track stored as two touching parts.
    single = {}
    for p in pieces:
        single[p["route"]] = single.get(p["route"], 0) + 1
    tracks = [i for i, p in enumerate(pieces) if p["cls"] == "track" and p["tag"].startswith("village_")
              and single[p["route"]] == 1 and free(i, p) and len(p["coords"]) > 12]
    mp = tracks[int(rf.integers(len(tracks)))]
    c = pieces[mp]["coords"]
    k = len(c) // 2
    pieces[mp]["geom_kind"] = "multi"
    pieces[mp]["parts"] = [c[:k + 1].copy(), c[k:].copy()]
    pieces[mp]["fault"] = dict(kind="multipart")
    # A record whose geometry was lost.
    extra.append(dict(route=-1, part=0, coords=None, level=0, oneway=None, cls="track",
                      name=f"{name()} Track", tag="null", all_season=0, geom_kind="null",
                      fault=dict(kind="null_geometry")))
    # Mark the two designed crossings.
    for p in pieces:
        if p["level"] == 1:
            p["fault"] = dict(kind="bridge")
        if p["tag"] == "cross_track":
            p["fault"] = dict(kind="crossing")
    return pieces + extra


def describe_faults(d, feats):
    """Measure every fault on the final geometries; the sizes are what shapely reports."""
    geoms = [piece_geom(p) for p in feats]
    ids = [p["road_id"] for p in feats]
    tree = shapely.STRtree([g if g is not None else LineString() for g in geoms])

    def others_at(i, pt, tol):
        near = tree.query(Point(pt).buffer(tol))
        return sorted(int(j) for j in near if j != i and geoms[j] is not None and geoms[j].distance(Point(pt)) <= tol)

    out = []
    for i, p in enumerate(feats):
        f = p.get("fault")
        if not f:
            continue
        kind = f["kind"]
        g = geoms[i]
        rec = dict(kind=kind)
        if kind in ("gap_small", "gap_large"):
            end = np.array(g.coords[-1])
            parents = [feats.index(next(q for q in feats if q is d["_pieces"][j])) for j in f["site"]["parents"]]
            par = unary_union([geoms[j] for j in parents])
            size = par.distance(Point(end))
            near = others_at(i, end, size + 1e-6)
            assert near and set(near) <= set(parents), (kind, ids[i], near, parents)
            node = f["site"]["node"]
            rec.update(road_ids=[ids[i]] + [ids[j] for j in parents], x=end[0], y=end[1], size_m=size,
                       node_distance_m=float(np.hypot(*(end - node))),
                       note="the end of the first road stops short of the others; size = shortest distance "
                            "from that end to them, node_distance = distance to the junction where they end")
        elif kind == "overshoot":
            end = np.array(g.coords[-1])
            parents = [feats.index(next(q for q in feats if q is d["_pieces"][j])) for j in f["site"]["parents"]]
            par = unary_union([geoms[j] for j in parents])
            cross = shapely.get_coordinates(g.intersection(par))
            size = float(np.min(np.hypot(*(cross - end).T)))
            rec.update(road_ids=[ids[i]] + [ids[j] for j in parents], x=end[0], y=end[1], size_m=size,
                       note="the end of the first road runs past the others; size = distance from where it "
                            "crosses them to its end")
        elif kind == "stub":
            site = f["site"]
            end = np.array(g.coords[-1])
            at_node = others_at(i, site["node"], 1e-6)
            rec.update(road_ids=[ids[i]] + [ids[j] for j in at_node], x=end[0], y=end[1], size_m=g.length,
                       note="a short dead end leaving a junction; location = its free end, size = its length")
        elif kind == "duplicate":
            j = feats.index(next(q for q in feats if q is d["_pieces"][f["of"]]))
            mid = g.interpolate(0.5, normalized=True)
            rec.update(road_ids=[ids[j], ids[i]], x=mid.x, y=mid.y, size_m=g.length,
                       note=("copy with the vertex order reversed" if f["reversed"] else "exact copy")
                       + "; location = its midpoint, size = its length")
        elif kind == "multipart":
            a, b = g.geoms
            pt = np.array(a.coords[-1])
            rec.update(road_ids=[ids[i]], x=pt[0], y=pt[1], size_m=Point(a.coords[-1]).distance(Point(b.coords[0])),
                       note="a MultiLineString of 2 parts; location = where the parts meet, size = gap between them")
        elif kind == "null_geometry":
            rec.update(road_ids=[ids[i]], x=None, y=None, size_m=None, note="attributes without a geometry")
        elif kind in ("crossing", "bridge"):
            X = d["bridge_X"] if kind == "bridge" else d["cross_X"]
            hits = [j for j in tree.query(Point(X).buffer(0.01)) if j != i and geoms[j] is not None
                    and geoms[j].distance(Point(X)) < 1e-6]
            assert len(hits) == 1, (kind, hits)
            j = int(hits[0])
            pt = shapely.get_coordinates(g.intersection(geoms[j]))
            assert len(pt) == 1
            pt = pt[0]
            verts = np.vstack([shapely.get_coordinates(g), shapely.get_coordinates(geoms[j])])
            size = float(np.min(np.hypot(*(verts - pt).T)))
            note = ("roads at the same level cross with no vertex at the crossing" if kind == "crossing" else
                    "the level-1 road passes over the level-0 road; no junction there")
            rec.update(road_ids=[ids[i], ids[j]], x=pt[0], y=pt[1], size_m=size,
                       note=note + "; size = distance from the crossing to the nearest vertex of either road")
        out.append(rec)
    for r in out:
        for k in ("x", "y"):
            r[k] = None if r[k] is None else round(float(r[k]), 3)
        for k in ("size_m", "node_distance_m"):
            r[k] = None if r.get(k) is None else round(float(r[k]), 4)
        if r["kind"] == "gap_small":
            assert r["size_m"] < 0.95 and r["node_distance_m"] < 0.95, r
        if r["kind"] == "gap_large":
            assert r["size_m"] > 1.05 and r["node_distance_m"] > 1.05, r
    order = ["gap_small", "gap_large", "overshoot", "crossing", "duplicate", "multipart", "null_geometry",
             "bridge", "stub"]
    out.sort(key=lambda r: (order.index(r["kind"]), r["size_m"] if r["size_m"] is not None else 0))
    for n, r in enumerate(out, 1):
        r["fault_id"] = n
    return [{k: r[k] for k in ("fault_id", "kind", "road_ids", "x", "y", "size_m", "node_distance_m", "note")}
            for r in out]


def check_topology(feats, faults):
    """Every meeting of two features is at shared line ends, unless it is a recorded fault."""
    geoms = [piece_geom(p) for p in feats]
    ids = [p["road_id"] for p in feats]
    idx = {rid: i for i, rid in enumerate(ids)}
    allowed = set()
    for f in faults:
        r = f["road_ids"]
        if f["kind"] in ("overshoot", "crossing", "bridge", "duplicate"):
            for a in r:
                for b in r:
                    allowed.add((a, b))
    live = [i for i, g in enumerate(geoms) if g is not None]
    tree = shapely.STRtree([geoms[i] for i in live])
    ends = {}
    for i in live:
        for part in getattr(geoms[i], "geoms", [geoms[i]]):
            for c in (part.coords[0], part.coords[-1]):
                ends.setdefault(c, set()).add(i)
    for a_pos, b_pos in zip(*tree.query([geoms[i] for i in live], predicate="intersects")):
        a, b = live[a_pos], live[b_pos]
        if a >= b or (ids[a], ids[b]) in allowed:
            continue
        pts = shapely.get_coordinates(geoms[a].intersection(geoms[b]))
        for c in map(tuple, pts):
            assert c in ends and {a, b} <= ends[c], ("unrecorded crossing", ids[a], ids[b], c)
    # Dangling ends: far from everything else unless recorded.
    fault_pts = [(f["x"], f["y"]) for f in faults if f["x"] is not None]
    for c, owners in ends.items():
        if len(owners) > 1:
            continue
        (i,) = owners
        if any(math.hypot(c[0] - x, c[1] - y) < 1e-3 for x, y in fault_pts):
            continue
        near = tree.query(Point(c).buffer(10.0))
        for j in near:
            j = live[int(j)]
            if j != i:
                assert geoms[j].distance(Point(c)) > 10.0, ("unrecorded near miss", ids[i], ids[j], c)


def roads_table(d, proposal, name):
    d["proposal_ends"] = proposal["ends"]
    pieces = split_pieces(d)
    set_attributes(d, pieces)
    d["_pieces"] = pieces
    feats = inject_faults(d, pieces, proposal, name)
    for n, p in enumerate(feats, 1):
        p["road_id"] = n
    faults = describe_faults(d, feats)
    check_topology(feats, faults)
    return feats, faults


# ----------------------------------------------------------------------------- other layers
def make_rail(d, name):
    rr = rng_for("rail")
    coast = d["coast"]
    way = [P(0, 13200), P(8900, 10900), P(18000, 15600), P(27400, 19300), P(38500, 21300),
           rnd([coast_u_at(coast, 24050) - 420, Y0 + 24050])]
    coords = path_through(way, rr, amp=0.012, spacing=60, modes=3)
    line = LineString(coords)
    assert line.within(d["land"]) and not line.intersects(d["lake"])
    tn = d["town_names"]
    rail = dict(rail_id=1, name=f"{tn['B']}-{tn['P']} Railway", coords=coords)
    # Stations: the towns on the line and two villages near it.
    stops = [("B", d["towns"]["B"]), ("M", d["towns"]["M"]), ("P", d["towns"]["P"])]
    vill = [v for v in d["villages"] if not v["remote"]]
    for lo, hi in (("B", "M"), ("M", "P")):
        sa, sb = line.project(Point(d["towns"][lo])), line.project(Point(d["towns"][hi]))
        best = min((v for v in vill if sa + 2500 < line.project(Point(v["xy"])) < sb - 2500),
                   key=lambda v: line.distance(Point(v["xy"])))
        stops.append((best["name"], best["xy"]))
    stops.sort(key=lambda s: line.project(Point(s[1])))
    stations = []
    for n, (key, xy) in enumerate(stops, 1):
        s = line.project(Point(xy))
        p, k = point_at(coords, s)
        t = coords[k + 1] - coords[k]
        nv = np.array([-t[1], t[0]]) / np.hypot(*t)
        side = 1.0 if np.dot(np.asarray(xy) - p, nv) >= 0 else -1.0
        off = rr.uniform(0.0, 20.0)
        pt = rnd(p + side * off * nv)
        nm = tn[key] if key in tn else f"{key} Halt"
        assert line.distance(Point(pt)) <= 20.0
        stations.append(dict(station_id=n, name=nm, xy=pt))
    return rail, stations


def make_cable(d, name):
    G, net = d["G"], d["net"]
    tn = d["town_names"]
    R = {r["tag"]: r["coords"] for r in net.routes}
    hub = rnd(G[2, 2] + np.array([22.0, 31.0]))
    paths = {
        "P": np.vstack([G[2, 2:4], R["trunk_e"]]),
        "A": np.vstack([G[2:, 2], G[4, 1:2], R["MA"][1:]]),
        "D": np.vstack([G[2::-1, 2], R["MD"][1:]]),
    }
    cables, nodes = [], [dict(node_name=f"{tn['M']} Exchange", xy=hub)]
    vill = sorted((v for v in d["villages"] if not v["remote"] and v["pop"] >= 300), key=lambda v: -v["pop"])
    for n, key in enumerate(("P", "A", "D"), 1):
        off = shapely.offset_curve(LineString(paths[key]), 14.0, join_style="round").simplify(3.0)
        c = rnd(np.vstack([hub, shapely.get_coordinates(off)]))
        cables.append(dict(cable_id=n, name=f"{tn['M']}-{tn[key]} Fibre", coords=c))
        nodes.append(dict(node_name=f"{tn[key]} Exchange", xy=c[-1]))
        line = LineString(c)
        for v in vill:
            if line.distance(Point(v["xy"])) < 1500 and sum(nm["node_name"].endswith("Cabinet") for nm in nodes) < 5:
                k = nearest_vertex(c, v["xy"])
                if all(np.hypot(*(c[k] - q["xy"])) > 3000 for q in nodes):
                    nodes.append(dict(node_name=f"{v['name']} Cabinet", xy=c[k]))
    return cables, nodes


def make_settlements(d):
    rp = rng_for("settlements")
    tn, towns = d["town_names"], d["towns"]
    pops = {"M": (11000, 15000), "P": (5000, 7000), "A": (2500, 4500), "B": (2000, 4000),
            "C": (1800, 3200), "D": (1500, 2800)}
    rows = []
    for key in ("M", "P", "A", "B", "C", "D"):
        base = d["G"][2, 2] if key == "M" else towns[key]
        ang = rp.uniform(0, 2 * math.pi)
        xy = rnd(base + rp.uniform(25, 80) * np.array([math.cos(ang), math.sin(ang)]))
        if key == "P":
            xy = rnd(towns["P"] + np.array([-60.0, 35.0]))
        rows.append(dict(name=tn[key], population=int(rp.integers(*pops[key])), kind="town", xy=xy, key=key))
    for v in d["villages"]:
        rows.append(dict(name=v["name"], population=v["pop"], kind="village", xy=v["xy"], key=None))
    for n, r in enumerate(rows, 1):
        r["settlement_id"] = n
    return rows


def make_hubs(d, settlements):
    rh = rng_for("hubs")
    tn, G = d["town_names"], d["G"]
    hubs = [dict(name=f"{tn['M']} Market", kind="market", xy=rnd((G[3, 2] + G[4, 3]) / 2)),
            dict(name=f"{tn['P']} Harbour", kind="port", xy=d["port_site"])]
    for key in ("A", "B", "C", "D"):
        ang = rh.uniform(0, 2 * math.pi)
        hubs.append(dict(name=f"{tn[key]} Clinic", kind="clinic",
                         xy=rnd(d["towns"][key] + rh.uniform(40, 120) * np.array([math.cos(ang), math.sin(ang)]))))
    big = max((v for v in d["villages"] if v["road"] is not None and not v["remote"]), key=lambda v: v["pop"])
    hubs.append(dict(name=f"{big['name']} Clinic", kind="clinic", xy=rnd(big["xy"] + np.array([35.0, -20.0]))))
    for n, h in enumerate(hubs, 1):
        h["hub_id"] = f"H{n:02d}"
        assert shapely.contains_xy(d["land"], *h["xy"])
    return hubs


def make_districts(d, name):
    towns = d["towns"]
    keys = ["M", "A", "B", "C", "D"]
    seeds = shapely.MultiPoint([towns[k] for k in keys])
    region = box(X0, Y0, X0 + W, Y0 + H)
    cells = shapely.voronoi_polygons(seeds, extend_to=region.buffer(5000))
    rows = []
    for n, k in enumerate(keys, 1):
        (cell,) = [g for g in cells.geoms if g.contains(Point(towns[k]))]
        poly = cell.intersection(d["land"])
        poly = shapely.set_precision(poly, 0.001)
        rows.append(dict(district_id=f"D{n}", name=name(), geom=poly))
    return rows


# ----------------------------------------------------------------------------- rasters
def elevation_grid(d, xs, ys, rng, with_noise):
    """Elevation in metres at the cell centres xs (1-D), ys (1-D); sea = 0."""
    from scipy.ndimage import gaussian_filter

    X, Y = np.meshgrid(xs, ys)
    coast = d["coast"]
    dc = np.interp(Y.ravel(), coast[:, 1], coast[:, 0]).reshape(X.shape) - X
    u, v = X - X0, Y - Y0
    z = 4.0 + 190.0 * (1.0 - np.exp(-np.maximum(dc, 0) / 9000.0))
    hr = rng_for("hills")
    for _ in range(8):
        cu, cv = hr.uniform(2000, 46000), hr.uniform(2000, 43000)
        amp, sig = hr.uniform(60, 220), hr.uniform(1500, 4000)
        z += amp * np.exp(-((u - cu) ** 2 + (v - cv) ** 2) / (2 * sig ** 2))
    # A ridge south of the remote northern cluster: a wavy crest with saddles and peaks.
    a, b = np.array([12500.0, 36800.0]), np.array([29500.0, 38200.0])
    ab = b - a
    L = float(np.hypot(*ab))
    t = ((u - a[0]) * ab[0] + (v - a[1]) * ab[1]) / L ** 2
    lat = ((u - a[0]) * -ab[1] + (v - a[1]) * ab[0]) / L
    tc = np.clip(t, 0, 1)
    crest = 700.0 * np.sin(2 * math.pi * tc + 0.7)
    along = np.hypot((t - tc) * L, 0.0)
    ds = np.hypot(lat - crest, along)
    peaks = 0.75 + 0.3 * np.sin(3 * math.pi * tc + 1.3) ** 2
    z += 430.0 * peaks * np.exp(-(ds / 2600.0) ** 2) * np.sin(math.pi * tc) ** 0.5
    # Basin holding the lake.
    lc = np.array(d["lake"].centroid.coords[0])
    z -= 70.0 * np.exp(-((X - lc[0]) ** 2 + (Y - lc[1]) ** 2) / (2 * 2600.0 ** 2))
    if with_noise:
        for sigma, amp in ((25, 40.0), (8, 16.0), (2, 4.0)):   # cells of 100 m
            z += amp * _unit(gaussian_filter(rng.normal(size=X.shape), sigma))
    z = np.maximum(z, 1.0) * (1.0 - np.exp(-np.maximum(dc, 0) / 350.0))
    z[dc <= 0] = 0.0
    return z


def _unit(a):
    return (a - a.mean()) / a.std()


def rasterize(geom, shape, transform):
    from rasterio import features
    return features.rasterize([(geom, 1)], out_shape=shape, transform=transform, fill=0, dtype="uint8").astype(bool)


def make_terrain(d):
    from rasterio.transform import from_origin
    # A 100 m grid whose origin is offset from the population grid (37 m west, 27 m north).
    x_left, y_top = X0 - 37.0, Y0 + H + 27.0
    nx, ny = 601, 451
    tr = from_origin(x_left, y_top, 100.0, 100.0)
    xs = x_left + 50.0 + 100.0 * np.arange(nx)
    ys = y_top - 50.0 - 100.0 * np.arange(ny)
    z = elevation_grid(d, xs, ys, rng_for("terrain"), True)
    lake = rasterize(d["lake"], z.shape, tr)
    ring = rasterize(d["lake"].buffer(300).difference(d["lake"]), z.shape, tr)
    level = float(np.min(z[ring])) - 1.0
    z[lake] = level
    return np.round(z, 1).astype(np.float32), tr, level


def make_population(d, settlements):
    from rasterio.transform import from_origin
    from scipy.ndimage import gaussian_filter

    cell = 200.0
    nx, ny = int(W / cell), int(H / cell)
    tr = from_origin(X0, Y0 + H, cell, cell)
    xs = X0 + cell / 2 + cell * np.arange(nx)
    ys = Y0 + H - cell / 2 - cell * np.arange(ny)
    land = rasterize(d["land"], (ny, nx), tr)
    lake = rasterize(d["lake"], (ny, nx), tr)
    live = land & ~lake
    rng = rng_for("population")
    zdet = elevation_grid(d, xs, ys, rng, False)
    field = _unit(gaussian_filter(rng.normal(size=(ny, nx)), 5))
    bg = 0.16 * np.exp(0.6 * field) * np.exp(-zdet / 350.0) * live
    pop = bg.astype(np.float64)
    X, Y = np.meshgrid(xs, ys)
    for s in settlements:
        sig = max(130.0, 6.5 * math.sqrt(s["population"]))
        k = np.exp(-((X - s["xy"][0]) ** 2 + (Y - s["xy"][1]) ** 2) / (2 * sig ** 2)) * live
        if k.sum() == 0:
            raise RuntimeError(f"settlement {s['name']} has no land cell")
        pop += s["population"] * k / k.sum()
    out = pop.astype(np.float32)
    nodata = -9999.0
    out[~land] = nodata
    bg_total = float(bg.astype(np.float32).astype(np.float64).sum())
    return out, tr, nodata, bg_total


def write_tif(path, arr, tr, nodata, tags, description):
    import rasterio

    prof = dict(driver="GTiff", width=arr.shape[1], height=arr.shape[0], count=1, dtype="float32",
                crs=CRS_UTM, transform=tr, nodata=nodata, compress="deflate", predictor=3, zlevel=9,
                tiled=True, blockxsize=256, blockysize=256)
    with rasterio.open(path, "w", **prof) as dst:
        dst.write(arr, 1)
        dst.update_tags(**tags)
        dst.set_band_description(1, description)


# ----------------------------------------------------------------------------- writing
def write_all(d, tmp: Path):
    import geopandas as gpd
    import pandas as pd
    import pyogrio

    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": GPKG_DATE})
    name = d["namer"]
    proposal = make_proposal(d, name)
    feats, faults = roads_table(d, proposal, name)
    rail, stations = make_rail(d, name)
    cables, nodes = make_cable(d, name)
    settlements = make_settlements(d)
    hubs = make_hubs(d, settlements)
    districts = make_districts(d, name)
    gpkg = tmp / "region.gpkg"

    def put(df, layer, geometry_type):
        gdf = gpd.GeoDataFrame(df, geometry="geometry", crs=CRS_UTM)
        pyogrio.write_dataframe(gdf, gpkg, layer=layer, driver="GPKG", geometry_type=geometry_type,
                                promote_to_multi=False)

    roads = pd.DataFrame({
        "road_id": pd.array([p["road_id"] for p in feats], dtype="int32"),
        "name": pd.array([p["name"] for p in feats], dtype=object),
        "class": [p["cls"] for p in feats],
        "all_season": pd.array([p["all_season"] for p in feats], dtype="int16"),
        "oneway": pd.array([p["oneway"] for p in feats], dtype=object),
        "level": pd.array([p["level"] for p in feats], dtype="int16"),
        "geometry": [piece_geom(p) for p in feats],
    })
    put(roads, "roads", "Unknown")
    put(pd.DataFrame({"rail_id": [rail["rail_id"]], "name": [rail["name"]],
                      "geometry": [LineString(rail["coords"])]}), "rail", "LineString")
    put(pd.DataFrame({"station_id": [s["station_id"] for s in stations], "name": [s["name"] for s in stations],
                      "geometry": [Point(s["xy"]) for s in stations]}), "stations", "Point")
    put(pd.DataFrame({"cable_id": [c["cable_id"] for c in cables], "name": [c["name"] for c in cables],
                      "geometry": [LineString(c["coords"]) for c in cables]}), "cable", "LineString")
    put(pd.DataFrame({"node_name": [n["node_name"] for n in nodes],
                      "geometry": [Point(n["xy"]) for n in nodes]}), "cable_nodes", "Point")
    put(pd.DataFrame({"settlement_id": [s["settlement_id"] for s in settlements],
                      "name": [s["name"] for s in settlements],
                      "population": [s["population"] for s in settlements],
                      "kind": [s["kind"] for s in settlements],
                      "geometry": [Point(s["xy"]) for s in settlements]}), "settlements", "Point")
    put(pd.DataFrame({"district_id": [r["district_id"] for r in districts], "name": [r["name"] for r in districts],
                      "geometry": [r["geom"] for r in districts]}), "districts", "Polygon")
    put(pd.DataFrame({"proposal_id": [1], "name": [proposal["name"]], "class": ["feeder"],
                      "geometry": [LineString(proposal["coords"])]}), "proposed_road", "LineString")
    sea = d["sea"] if d["sea"].geom_type == "Polygon" else max(d["sea"].geoms, key=lambda g: g.area)
    # The water layer's sea runs 10 km out past the region's edges (only open water lies there), so
    # an analysis grid with a margin finds water, not unreachable land, beyond the coast.
    sb = sea.bounds
    sea = Polygon(box(sb[0], sb[1] - 10000, sb[2] + 10000, sb[3] + 10000).exterior).difference(d["land"])
    sea = sea if sea.geom_type == "Polygon" else max(sea.geoms, key=lambda g: g.area)
    put(pd.DataFrame({"kind": ["sea", "lake"], "name": [f"{name()} Sea", f"Lake {name()}"],
                      "geometry": [sea, d["lake"]]}), "water", "Polygon")

    hub_df = gpd.GeoDataFrame({"hub_id": [h["hub_id"] for h in hubs], "name": [h["name"] for h in hubs],
                               "kind": [h["kind"] for h in hubs]},
                              geometry=[Point(h["xy"]) for h in hubs], crs=CRS_UTM).to_crs("EPSG:4326")
    pyogrio.write_dataframe(hub_df, tmp / "hubs.geojson", driver="GeoJSON", layer="hubs",
                            layer_options={"RFC7946": "YES", "COORDINATE_PRECISION": 7})

    caution = "Invented demo data: model input only, not a real place."
    pop, ptr, pnd, bg_total = make_population(d, settlements)
    write_tif(tmp / "population.tif", pop, ptr, pnd,
              {"units": "people per 200 m cell", "settlement_total": str(sum(s["population"] for s in settlements)),
               "rural_background_total": f"{bg_total:.3f}", "note": caution}, "people per cell")
    z, ztr, level = make_terrain(d)
    write_tif(tmp / "terrain.tif", z, ztr, -9999.0,
              {"units": "metres above sea level", "lake_level_m": f"{level:.1f}", "note": caution},
              "elevation (m)")

    with open(tmp / "faults.json", "w") as fh:
        json.dump(faults, fh, indent=1)
        fh.write("\n")
    return dict(feats=feats, faults=faults, settlements=settlements, hubs=hubs, proposal=proposal,
                stations=stations, cables=cables, nodes=nodes, districts=districts, bg_total=bg_total,
                lake_level=level)


def main(argv=None):
    import argparse

    ap = argparse.ArgumentParser(description="Generate the invented demo region of geo-reach.")
    ap.add_argument("--out", type=Path, default=OUT, help="output folder (default: beside this script)")
    args = ap.parse_args(argv)
    out = args.out
    out.mkdir(parents=True, exist_ok=True)
    namer = Namer(rng_for("names"))
    d = build(namer)
    d["namer"] = namer
    # Everything is written to a temporary folder first; files replace the old ones only
    # once all of them are complete.
    tmp = Path(tempfile.mkdtemp(prefix=".make_region.", dir=out))
    try:
        info = write_all(d, tmp)
        for f in ("region.gpkg", "hubs.geojson", "population.tif", "terrain.tif", "faults.json"):
            os.replace(tmp / f, out / f)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print(f"roads: {len(info['feats'])} features; faults: {len(info['faults'])}; "
          f"settlements: {len(info['settlements'])}; hubs: {len(info['hubs'])}; "
          f"rural background: {info['bg_total']:.1f} people -> {out}")
    return info


if __name__ == "__main__":
    main()

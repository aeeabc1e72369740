"""Where the network can be entered from the grid, and at what cost.

A traveller on foot may join a road anywhere along it, a railway only at a
station, and never a cable or a transfer link.  :func:`entry_points` samples
every road edge at most ``spacing_m`` apart and adds every rail station; each
point carries the network cost from (or to) it to the nearest hub.  Given the
hubs, it adds each hub itself (cost 0: walking straight to the hub needs no
network) and costs the samples on the edges a hub joins through the hub's
join point as well (travel along the hub's own edge).  :func:`seed_cells`
puts the points on a grid at their exact positions, adding the walk from
each to the nearby cell centres (:func:`~.pointwalk.seed_points`);
:func:`seed_raster` is the older placement at cell level, without the walk.
:func:`cable_connection_m` is the distance raster for cable layers, which
carry no travellers.

The cost of a point a fraction ``f`` along an edge ``u -> v`` of ``m``
minutes, for the trip *to* the hub, is::

    min(cost[v] + (1 - f) m   (if the edge may be travelled u -> v),
        cost[u] + f m         (if it may be travelled v -> u, i.e. not one-way))

and for the trip *from* the hub (``cost`` then being hub-to-node)::

    min(cost[u] + f m         (u -> v allowed),
        cost[v] + (1 - f) m   (v -> u allowed)).

A hub that joins the edge at fraction ``g`` with a walk leg of ``w`` minutes
offers, to the hub, ``(g - f) m + w`` for ``f <= g`` (travelled u -> v) and
``(f - g) m + w`` for ``f > g`` (two-way edges only); from the hub,
``(f - g) m + w`` for ``f >= g`` and ``(g - f) m + w`` for ``f < g`` (two-way
only).  These are the costs :meth:`~.attach.Attachment.arcs` gives the
routing for the same legs, cut at the sample instead of the edge's end.

Each point also records the node its trip passes through (``via_node``; -1
when the trip reaches the hub without passing a node: the hub itself and
samples costed along the hub's own edge), which is how regions find the
side of a single link a cell depends on, and the hub it reaches (``hub``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

from ..errors import InputError, OptionError
from .friction import SLOPE_LIMIT

__all__ = ["EntryPoints", "Seeds", "HubLegs", "entry_points", "nearest_edge_points", "seed_cells", "seed_raster", "rail_stations",
           "cable_access_nodes", "cable_connection_m", "sample_lines", "grid_coordinates"]


@dataclass(frozen=True)
class EntryPoints:
    """Points where a trip on foot joins the network.

    Attributes
    ----------
    x, y : ndarray of float64, shape (n,)
        Working CRS, metres.
    minutes : ndarray of float64, shape (n,)
        Network minutes between the point and the nearest hub; NaN = no hub
        reachable.
    via_node : ndarray of int64, shape (n,)
        The node the cheapest trip passes through (-1 where no hub reachable).
    edge : ndarray of int64, shape (n,)
        The road edge the point lies on; -1 for stations, -2 for a hub itself.
    hub : ndarray of int64, shape (n,)
        0-based hub the point's trip reaches (``node_hub`` of ``via_node``, or
        the hub itself); -1 = unknown (no ``node_hub`` given) or none.
    """

    x: np.ndarray
    y: np.ndarray
    minutes: np.ndarray
    via_node: np.ndarray
    edge: np.ndarray
    hub: np.ndarray | None = None

    def __post_init__(self):
        if self.hub is None:
            object.__setattr__(self, "hub", np.full(len(self.x), -1, np.int64))

    def __len__(self) -> int:
        return len(self.x)


@dataclass(frozen=True)
class Seeds:
    """Entry points on a grid.

    Attributes
    ----------
    minutes : ndarray of float64, shape ``grid.shape``
        Cheapest point in each cell, minutes; inf = no seed.
    via_node : ndarray of int64, shape ``grid.shape``
        Node behind that cheapest point; -1 = none (or the point's trip passes no node).
    point : ndarray of int64, shape ``grid.shape``, optional
        Index of that point in the :class:`EntryPoints`; -1 = none
        (:func:`seed_cells` only).
    """

    minutes: np.ndarray
    via_node: np.ndarray
    point: np.ndarray | None = None


@dataclass(frozen=True)
class HubLegs:
    """Where hubs join road edges part-way, and what the walk between costs.

    Attributes
    ----------
    hub : ndarray of int64, shape (k,)
        0-based hub number (the numbering of ``node_hub``).
    edge : ndarray of int64, shape (k,)
        The edge joined.
    fraction : ndarray of float64, shape (k,)
        Position of the join point along the edge from its ``from`` node (0..1).
    minutes : ndarray of float64, shape (k,)
        The walk between the hub and the join point, minutes.
    """

    hub: np.ndarray
    edge: np.ndarray
    fraction: np.ndarray
    minutes: np.ndarray

    @classmethod
    def from_attachment(cls, att, hub_index=None) -> "HubLegs":
        """The edge legs of an :class:`~.attach.Attachment` of the hubs (on the ``minutes`` weight).

        The walk is costed as :meth:`~.attach.Attachment.arcs` costs it for
        the routing (``att.weight.walk_cost``), so the surface and the
        routing price a hub's leg the same.  ``hub_index`` maps the
        attachment's points to hub numbers (default: the same numbers).
        """
        if att.weight.name != "minutes":
            raise OptionError(f"hub legs are on the '{att.weight.name}' weight; the surface needs them "
                              "in minutes (attach the hubs with weight 'minutes')")
        on_edge = att.leg_edge >= 0
        pts = att.leg_point[on_edge]
        hub = pts if hub_index is None else np.asarray(hub_index, dtype=np.int64)[pts]
        walk = np.asarray(att.weight.walk_cost(att.leg_walk_m, att.walk_kmh), dtype=np.float64)[on_edge]
        return cls(hub.astype(np.int64), att.leg_edge[on_edge].astype(np.int64),
                   att.leg_fraction[on_edge].astype(np.float64), walk)


def sample_lines(geoms, spacing_m: float):
    """Points along line geometries at most ``spacing_m`` apart, both ends included.

    Parameters
    ----------
    geoms : ndarray of shapely LineString, shape (n,)
    spacing_m : float
        Largest gap between consecutive samples along a line, metres.

    Returns
    -------
    line : ndarray of int64
        Which geometry each sample lies on.
    frac : ndarray of float64
        Fraction of the line's length from its start (0..1).
    x, y : ndarray of float64

    Notes
    -----
    Vectorised with numpy over all vertices at once (no per-point shapely
    call); a line of length L gets ``ceil(L / spacing_m) + 1`` samples.
    """
    import shapely

    geoms = np.asarray(geoms, dtype=object)
    coords, part = shapely.get_coordinates(geoms, return_index=True)
    n = len(geoms)
    if coords.shape[0] == 0:
        z = np.zeros(0)
        return np.zeros(0, np.int64), z, z, z
    starts = np.searchsorted(part, np.arange(n), side="left")
    ends = np.searchsorted(part, np.arange(n), side="right")  # exclusive
    seg = np.hypot(np.diff(coords[:, 0]), np.diff(coords[:, 1]))
    same = part[1:] == part[:-1]
    seg = np.where(same, seg, 0.0)
    cum = np.concatenate([[0.0], np.cumsum(seg)])  # cumulative along all vertices
    has = ends > starts
    length = np.zeros(n)
    length[has] = cum[ends[has] - 1] - cum[starts[has]]
    # The count depends on the line alone: its own length (not a running total over all lines,
    # whose rounding would make a 700 m line get 15 samples after some lines and 14 after others),
    # with a tolerance so an exact multiple of the spacing does not gain a sample.
    length = np.where(has, shapely.length(geoms), 0.0)
    k = np.where(has, np.ceil(length / spacing_m - 1e-9).astype(np.int64), -1)
    k = np.where(has & (k < 1), 1, k)
    counts = np.where(has, k + 1, 0)
    line = np.repeat(np.arange(n, dtype=np.int64), counts)
    first = np.cumsum(counts) - counts
    j = np.arange(line.size) - np.repeat(first, counts)
    frac = j / np.repeat(np.maximum(k, 1), counts).astype(np.float64)
    target = cum[starts[line]] + frac * length[line]
    # The segment holding each target: last vertex with cum <= target, kept inside its own line.
    i = np.searchsorted(cum, target, side="right") - 1
    i = np.clip(i, starts[line], np.maximum(ends[line] - 2, starts[line]))
    nxt = np.minimum(i + 1, ends[line] - 1)
    seglen = cum[nxt] - cum[i]
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(seglen > 0, (target - cum[i]) / seglen, 0.0)
    t = np.clip(t, 0.0, 1.0)
    x = coords[i, 0] + t * (coords[nxt, 0] - coords[i, 0])
    y = coords[i, 1] + t * (coords[nxt, 1] - coords[i, 1])
    return line, frac, x, y


def _check_node_array(network, arr, name):
    a = np.asarray(arr, dtype=np.float64)
    if a.shape != (network.n_nodes,):
        raise OptionError(f"{name} has shape {a.shape}; expected one value per node ({network.n_nodes})")
    return a


def entry_points(network, node_cost, spacing_m: float, direction: str = "to-hub", *, node_hub=None,
                 hub_xy=None, hub_legs: HubLegs | None = None) -> EntryPoints:
    """Sample the places a trip on foot can join the network (and, given them, the hubs).

    Parameters
    ----------
    network : Network
    node_cost : ndarray of float64, shape (n_nodes,)
        Network minutes between each node and its nearest hub (to the hub for
        ``direction="to-hub"``, from it for ``"from-hub"``); NaN = unreachable.
    spacing_m : float
        Largest gap between samples along a road, metres (use half the cell
        size or less so every cell a road crosses gets a sample).
    direction : {"to-hub", "from-hub"}
    node_hub : ndarray of int, shape (n_nodes,), optional
        The 0-based hub behind each node's cost (negative = none): fills
        :attr:`EntryPoints.hub`.
    hub_xy : ndarray of float, shape (n_hubs, 2), optional
        Hub positions (working CRS, metres), numbered as ``node_hub``; rows
        with NaN are skipped.  Each hub is added as a point of cost 0.
    hub_legs : HubLegs, optional
        Where the hubs join road edges part-way: samples on those edges are
        also costed through the join point (see the module notes).

    Returns
    -------
    EntryPoints
        Road samples first (edge order), then rail stations, then the hubs.

    Raises
    ------
    OptionError
        Bad ``spacing_m``, ``direction`` or array shapes.
    """
    if direction not in ("to-hub", "from-hub"):
        raise OptionError(f"unknown direction '{direction}'; choose one of to-hub, from-hub")
    if not (np.isfinite(spacing_m) and spacing_m > 0):
        raise OptionError(f"sample spacing {spacing_m!r} m must be a positive number")
    cost = _check_node_array(network, node_cost, "node_cost")
    cost = np.where(np.isfinite(cost), cost, np.nan)  # inf (as routing gives) and NaN: no hub
    if node_hub is not None:
        node_hub = np.asarray(node_hub)
        if node_hub.shape != (network.n_nodes,):
            raise OptionError(f"node_hub has shape {node_hub.shape}; expected one value per node ({network.n_nodes})")
        node_hub = np.where(node_hub >= 0, node_hub, -1).astype(np.int64)
    road = _road_edges(network)
    line, f, x, y = sample_lines(_edge_geoms(network, road), spacing_m)
    e = road[line]
    pmin, via, hub = _cost_on_edges(network, cost, e, f, direction, node_hub, hub_legs)

    stations = rail_stations(network)
    sx, sy = network.node_x[stations], network.node_y[stations]
    sc = cost[stations]
    svia = np.where(np.isnan(sc), -1, stations).astype(np.int64)
    shub = np.where(svia >= 0, node_hub[stations], -1) if node_hub is not None else np.full(len(stations), -1)
    parts = [(x, y, pmin, via, e.astype(np.int64), hub), (sx, sy, sc, svia, np.full(stations.size, -1), shub)]
    if hub_xy is not None:
        hxy = np.asarray(hub_xy, dtype=np.float64).reshape(-1, 2)
        ok = np.nonzero(np.isfinite(hxy).all(axis=1))[0]
        k = len(ok)
        parts.append((hxy[ok, 0], hxy[ok, 1], np.zeros(k), np.full(k, -1), np.full(k, -2), ok))
    cols = [np.concatenate([p[i] for p in parts]) for i in range(6)]
    return EntryPoints(x=cols[0].astype(np.float64, copy=False), y=cols[1].astype(np.float64, copy=False),
                       minutes=cols[2].astype(np.float64, copy=False), via_node=cols[3].astype(np.int64, copy=False),
                       edge=cols[4].astype(np.int64, copy=False), hub=cols[5].astype(np.int64, copy=False))


def _road_edges(network) -> np.ndarray:
    """Edges a trip on foot may join anywhere: roads with a minutes cost."""
    mode = np.asarray(network.edge_mode).astype(str)
    return np.nonzero((mode == "road") & np.isfinite(np.asarray(network.edge_minutes, dtype=np.float64)))[0]


def _cost_on_edges(network, cost, e, f, direction, node_hub, hub_legs):
    """Minutes, via node and hub of points at fractions ``f`` along edges ``e`` (module notes' formulas).

    ``cost`` holds NaN for nodes with no hub.  Unreachable points get NaN, -1, -1.
    """
    minutes = np.asarray(network.edge_minutes, dtype=np.float64)
    u, v, m = network.edge_from[e], network.edge_to[e], minutes[e]
    oneway = np.asarray(network.edge_oneway, dtype=bool)[e]
    cu = np.where(np.isnan(cost[u]), np.inf, cost[u])
    cv = np.where(np.isnan(cost[v]), np.inf, cost[v])
    if direction == "to-hub":
        forward = cv + (1.0 - f) * m                         # carry on to v (always allowed)
        back = np.where(oneway, np.inf, cu + f * m)          # turn back to u (two-way only)
        fwd_node, back_node = v, u
    else:
        forward = cu + f * m                                 # came from u (always allowed)
        back = np.where(oneway, np.inf, cv + (1.0 - f) * m)  # came from v (two-way only)
        fwd_node, back_node = u, v
    take_back = back < forward
    pmin = np.where(take_back, back, forward)
    via = np.where(take_back, back_node, fwd_node).astype(np.int64)
    hub = node_hub[via] if node_hub is not None else np.full(len(via), -1, np.int64)
    if hub_legs is not None and len(hub_legs.hub) and len(e):
        pmin, via, hub = _along_hub_edges(e, f, m, oneway, pmin, via, hub, hub_legs, direction)
    unreachable = ~np.isfinite(pmin)
    return (np.where(unreachable, np.nan, pmin), np.where(unreachable, -1, via).astype(np.int64),
            np.where(unreachable, -1, hub).astype(np.int64))


def nearest_edge_points(network, node_cost, xy, within_m: float, direction: str = "to-hub", *, node_hub=None,
                        hub_legs: HubLegs | None = None) -> EntryPoints:
    """The nearest point of every road edge within ``within_m`` of each of ``xy``, costed as samples are.

    Where :func:`entry_points` samples the roads at a spacing, this places an
    entry point exactly where a straight walk from each given point meets
    each nearby road (the foot of the perpendicular, or the edge's nearer
    end), with the same cost formulas (node costs, one-way rules, travel
    along a hub's own edge).  Used to read a surface at exact points.

    Parameters
    ----------
    network, node_cost, direction, node_hub, hub_legs
        As for :func:`entry_points`.
    xy : array_like of float, shape (n, 2)
        Working CRS, metres.
    within_m : float
        Search distance, metres.

    Returns
    -------
    EntryPoints
        One point per (given point, edge within reach) pair; no stations or hubs.
    """
    import shapely

    cost = _check_node_array(network, node_cost, "node_cost")
    cost = np.where(np.isfinite(cost), cost, np.nan)
    if node_hub is not None:
        node_hub = np.where(np.asarray(node_hub) >= 0, np.asarray(node_hub), -1).astype(np.int64)
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    road = _road_edges(network)
    geoms = _edge_geoms(network, road)
    empty = np.zeros(0)
    if not len(road) or not len(xy):
        return EntryPoints(empty, empty, empty, np.zeros(0, np.int64), np.zeros(0, np.int64))
    pts = shapely.points(xy[:, 0], xy[:, 1])
    qi, ti = shapely.STRtree(geoms).query(pts, predicate="dwithin", distance=float(within_m))
    order = np.lexsort((ti, qi))                       # deterministic: by point, then edge
    qi, ti = qi[order], ti[order]
    e = road[ti]
    f = np.clip(np.nan_to_num(shapely.line_locate_point(geoms[ti], pts[qi], normalized=True), nan=0.0), 0.0, 1.0)
    at = shapely.get_coordinates(shapely.line_interpolate_point(geoms[ti], f, normalized=True))
    pmin, via, hub = _cost_on_edges(network, cost, e, f, direction, node_hub, hub_legs)
    return EntryPoints(x=at[:, 0].copy(), y=at[:, 1].copy(), minutes=pmin, via_node=via, edge=e.astype(np.int64),
                       hub=hub)


def _along_hub_edges(e, f, m, oneway, pmin, via, hub, legs: HubLegs, direction):
    """Samples on an edge a hub joins: also costed through the join point (cheaper wins; ties keep the node)."""
    if e.size < 2 or (e[1:] >= e[:-1]).all():     # samples come in edge order: no sort needed
        order = np.arange(e.size)
    else:
        order = np.argsort(e, kind="stable")
    es = e[order]
    lo = np.searchsorted(es, legs.edge, side="left")
    hi = np.searchsorted(es, legs.edge, side="right")
    counts = hi - lo
    if counts.sum() == 0:
        return pmin, via, hub
    leg = np.repeat(np.arange(len(legs.edge)), counts)
    first = np.cumsum(counts) - counts
    sample = order[np.repeat(lo, counts) + (np.arange(leg.size) - np.repeat(first, counts))]
    fs, g, w = f[sample], legs.fraction[leg], legs.minutes[leg]
    mm, one = m[sample], oneway[sample]
    if direction == "to-hub":
        fwd = fs <= g       # travelled from the sample on towards the edge's end: the join point lies ahead
    else:
        fwd = fs >= g       # travelled from the join point on to the sample
    along = np.abs(g - fs) * mm + w
    cand = np.where(fwd | ~one, along, np.inf)
    # the cheapest leg per sample (lowest leg number among equals)
    pick = np.lexsort((leg, cand, sample))
    sample, cand, leg = sample[pick], cand[pick], leg[pick]
    head = np.ones(sample.size, bool)
    head[1:] = sample[1:] != sample[:-1]
    sample, cand, leg = sample[head], cand[head], leg[head]
    better = cand < pmin[sample]
    s = sample[better]
    pmin, via, hub = pmin.copy(), via.copy(), hub.copy()
    pmin[s] = cand[better]
    via[s] = -1
    hub[s] = legs.hub[leg[better]]
    return pmin, via, hub


def _edge_geoms(network, edges):
    import shapely

    g = np.asarray(network.edge_geometry, dtype=object)[edges]
    missing = np.array([gg is None or gg.is_empty for gg in g], dtype=bool) if g.size else np.zeros(0, bool)
    if missing.any():
        k = edges[missing]
        pts = np.stack([np.column_stack([network.node_x[network.edge_from[k]], network.node_y[network.edge_from[k]]]),
                        np.column_stack([network.node_x[network.edge_to[k]], network.node_y[network.edge_to[k]]])],
                       axis=1)
        g = g.copy()
        g[missing] = shapely.linestrings(pts)
    return g


def _incident(network, mask_edges) -> np.ndarray:
    hit = np.zeros(network.n_nodes, dtype=bool)
    hit[network.edge_from[mask_edges]] = True
    hit[network.edge_to[mask_edges]] = True
    return hit


def rail_stations(network) -> np.ndarray:
    """Node ids of rail stations: entry nodes touched by a rail edge."""
    mode = np.asarray(network.edge_mode).astype(str)
    return np.nonzero(_incident(network, mode == "rail") & np.asarray(network.node_entry, dtype=bool))[0]


def cable_access_nodes(network) -> np.ndarray:
    """Node ids of cable access nodes: entry nodes touched by a cable edge."""
    mode = np.asarray(network.edge_mode).astype(str)
    return np.nonzero(_incident(network, mode == "cable") & np.asarray(network.node_entry, dtype=bool))[0]


def seed_raster(points: EntryPoints, grid) -> Seeds:
    """Put entry points on ``grid`` at cell level: each cell keeps its cheapest point, no walk added.

    The placement before exact seeds (kept for comparisons and the
    benchmark); :func:`compute_surface <.surface.compute_surface>` uses
    :func:`seed_cells`.  Points outside the grid and points with no hub
    reachable are dropped.
    """
    rows, cols = grid.index(points.x, points.y)
    ok = (rows >= 0) & np.isfinite(points.minutes)
    cell = rows[ok] * grid.width + cols[ok]
    out_m = np.full(grid.width * grid.height, np.inf)
    out_v = np.full(grid.width * grid.height, -1, dtype=np.int64)
    _scatter_min(cell, points.minutes[ok], points.via_node[ok].astype(np.int64), out_m, out_v)
    return Seeds(out_m.reshape(grid.shape), out_v.reshape(grid.shape))


def grid_coordinates(grid, x, y):
    """Positions in cell units on ``grid`` (column, row; cell ``(r, c)`` covers ``[c, c+1) x [r, r+1)``)."""
    col = (np.asarray(x, dtype=np.float64) - grid.transform.c) / grid.cell_m
    row = (grid.transform.f - np.asarray(y, dtype=np.float64)) / grid.cell_m
    return col, row


def seed_cells(points: EntryPoints, grid, flat_kmh, elevation=None, direction: str = "to-hub",
               slope_limit: float = SLOPE_LIMIT) -> Seeds:
    """Put entry points on ``grid`` at their exact positions, with the walk to the cell centres.

    Each point seeds the centres of its own cell and the eight around it
    with its cost plus the walk between the point and the centre on the
    friction surface (:func:`~.pointwalk.seed_points`); each cell keeps its
    cheapest.  A
    point's own cell so costs at most its cost plus the walk of half a cell
    diagonal.  Points outside the grid and points with no hub reachable
    are dropped.

    Parameters
    ----------
    points : EntryPoints
    grid : Grid
    flat_kmh : ndarray of float, shape ``grid.shape``
        Flat-ground speed, km/h (0 = impassable).
    elevation : ndarray of float, shape ``grid.shape``, optional
    direction : {"to-hub", "from-hub"}
    slope_limit : float

    Returns
    -------
    Seeds
        ``minutes`` (inf = no seed), ``via_node`` and ``point`` of the cheapest point.
    """
    from .pointwalk import seed_points

    col, row = grid_coordinates(grid, points.x, points.y)
    ps = seed_points(flat_kmh, grid.cell_m, col, row, points.minutes, elevation=elevation, direction=direction,
                     slope_limit=slope_limit)
    via = np.where(ps.point >= 0, points.via_node[np.maximum(ps.point, 0)], -1) if len(points) \
        else np.full(grid.shape, -1, np.int64)
    return Seeds(ps.minutes, via.astype(np.int64), ps.point)


@numba.njit(cache=True, nogil=True)
def _scatter_min(cell, minutes, via, out_m, out_v):
    """Keep, per cell, the cheapest point (the first one among equals)."""
    for i in range(cell.shape[0]):
        c = cell[i]
        if minutes[i] < out_m[c]:
            out_m[c] = minutes[i]
            out_v[c] = via[i]


def cable_connection_m(network, grid, chunk_rows: int = 256) -> np.ndarray:
    """Distance from each cell centre to the nearest cable access node, metres.

    A cable carries no travellers, so its reach is this straight-line
    connection distance, not minutes.

    Parameters
    ----------
    network : Network
    grid : Grid
        In the network's CRS.
    chunk_rows : int
        Rows queried at once (bounds the temporary memory).

    Returns
    -------
    ndarray of float64, shape ``grid.shape``

    Raises
    ------
    InputError
        The network has no cable access node.
    """
    from scipy.spatial import cKDTree

    nodes = cable_access_nodes(network)
    if nodes.size == 0:
        raise InputError("the network has no cable access node (an entry node on a cable edge); "
                         "add a cable layer with access points or leave cable out")
    tree = cKDTree(np.column_stack([network.node_x[nodes], network.node_y[nodes]]))
    out = np.empty(grid.shape, dtype=np.float64)
    xs, _ = grid.cell_centres(rows=np.zeros(1, int))
    for r0 in range(0, grid.height, chunk_rows):
        r1 = min(grid.height, r0 + chunk_rows)
        _, ys = grid.cell_centres(rows=np.arange(r0, r1), cols=np.zeros(1, int))
        X, Y = np.meshgrid(xs, ys)
        d, _ = tree.query(np.column_stack([X.ravel(), Y.ravel()]), workers=-1)
        out[r0:r1] = d.reshape(r1 - r0, grid.width)
    return out

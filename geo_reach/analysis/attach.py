"""Join points that lie off the network (hubs, origins, destinations, settlements) to it.

A point joins the network through the cheapest of its *entries*: every place
within ``max_access_m`` (straight line) where a trip may enter or leave the
network.  Places are

* every ``road`` edge routable on the weight, at the point of the edge nearest
  to the point (the edge's cost is split in proportion to the position along
  it, and one-way edges are respected: from a point part-way along a one-way
  edge a trip can only go on towards its ``to_node``);
* every entry node (``node_entry`` true: a rail station, a cable access node)
  touching a routable edge of another mode, at the node itself;
* never a ``transfer`` edge, and never a rail or cable edge between stations.

How the walk to an entry is priced is not decided here: a *walk pricer*
(:class:`StraightWalk`, or the friction-grid walk of
:class:`~geo_reach.analysis.walkgrid.GridWalk` that
:class:`~geo_reach.analysis.travel.TravelModel` supplies) gives each leg its
cost in the weight's unit for each role (leaving the point, arriving at it)
and its walked length.  Where the walk is priced on a friction grid, a road's
nearest point may lie across a river: every road edge within reach is then
also offered at samples half a cell apart, and each edge keeps the position
cheapest to walk to.  A leg the walk cannot reach (a barrier all round) is
dropped.

For weights where walking costs something (``minutes``, ``length_m``) every
leg up to the cost of walking ``extra_walk_m`` (1 km on flat open ground)
dearer than the cheapest is kept, plus the cheapest leg onto the largest
network component, plus every leg onto a road faster (less cost per metre)
than every leg cheaper to walk to (a trunk road 1.5 km away beats a track
20 m away), and the search picks the cheapest trip over all of them
(walk + network): a hub 20 m from a slow track and 200 m from a fast road may
well be reached by the road.  Adding a road never makes a trip dearer unless
the new road is cheaper to walk to than the old cheapest entry, *and* an
entry more than ``extra_walk_m`` of walking beyond the new cheapest, on a
road no faster than a nearer one, was the cheapest trip (or the place's
reach shrank: a far place's reach follows its nearest road).  Settlements
are therefore priced with ``reach_m`` (every entry within a reach fixed by
a trip already found, unpruned) by
:meth:`~geo_reach.analysis.travel.TravelModel.hub_trips` with ``exact``,
which never gets dearer when a road is added.  Legs are directed (a trip only leaves an origin and only
arrives at a destination or hub), so no trip can cut across country from
one edge to another through a point.  For ``hops`` and ``latency_ms`` the
walk is free, so "cheapest" would let a point jump to any edge within reach:
there only the entries with the shortest walk are kept (several when tied,
e.g. all edges meeting at a junction).

With straight-line walking (:class:`StraightWalk`, no friction inputs), a
leg of ``walk_m`` metres costs, per weight:

``minutes``
    ``walk_m / (walk_kmh * 1000 / 60)``, i.e. at the walking speed.
``length_m``
    its length in metres.
``hops``
    0: the walk is not a link.  The partial edge counts its fraction of
    one link, so the rule "split the edge cost in proportion" holds for every
    weight.
``latency_ms``
    0: signal latency only exists on the network.

The routing functions add each point as a virtual node joined by its legs
(one arc to each end of the entered edge that the trip may use).  Points
with no entry within ``max_access_m`` are kept in the arrays (``attached``
false, ``access_m`` their real distance) so callers report them; they are
never moved.
"""

from __future__ import annotations

import weakref

import numpy as np

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight
from .legs import ROLES, ArcDetail, Attachment, DirectWalks, Priced, StraightWalk, walk_cost

__all__ = ["Attachment", "ArcDetail", "DirectWalks", "Priced", "StraightWalk", "attach_points", "walk_cost",
           "ROLES", "EXTRA_WALK_M", "share_entry_places"]

#: Points attached at once: the candidate legs of a chunk (every entry within reach, about 16,000 per point
#: on a 100 m street lattice with a 5 km reach) are built, priced and pruned before the next chunk starts.
ATTACH_CHUNK = 500

#: Edge modes a point may enter anywhere along (common practice: roads and
#: tracks are walkable to; rail and cable only at stations or access nodes).
ALONG_MODES = frozenset({"road"})
#: Edge modes a point may never enter.
NEVER_MODES = frozenset({"transfer"})

#: Entries this much farther than the nearest one still count as tied (metres).
TIE_M = 1e-6

#: Entries costing more than walking this far (on flat open ground) beyond the cheapest one are not
#: offered, except the cheapest entry onto the largest network component (metres).  1 km is 12 minutes
#: at 5 km/h: an entry beyond it is very seldom the cheapest, and offering every edge within
#: ``max_access_m`` (thousands per point on a dense network) made each point cost as much as the
#: network itself.
EXTRA_WALK_M = 1000.0

_TREES: "weakref.WeakKeyDictionary[Network, dict]" = weakref.WeakKeyDictionary()


def _entry_places(network: Network, weight: Weight) -> dict:
    """Spatial indexes of the places points may join on ``weight`` (cached per network and weight)."""
    import shapely
    from scipy.spatial import cKDTree

    per_net = _TREES.setdefault(network, {})
    if weight.name not in per_net:
        cost = network.cost(weight)
        mode = network.edge_mode.astype(str)
        routable = ~np.isnan(cost)
        along = np.nonzero(np.isin(mode, list(ALONG_MODES)) & routable)[0]
        other = np.nonzero(~np.isin(mode, list(ALONG_MODES | NEVER_MODES)) & routable)[0]
        nodes = np.unique(np.concatenate([network.edge_from[other], network.edge_to[other]]))
        nodes = nodes[network.node_entry[nodes]]
        main = along[network.component[network.edge_from[along]] == 0]
        per_net[weight.name] = {
            "along": along,
            "tree": shapely.STRtree(network.edge_geometry[along]) if len(along) else None,
            "main": main,
            "main_tree": shapely.STRtree(network.edge_geometry[main]) if len(main) else None,
            "nodes": nodes,
            "kd": cKDTree(np.column_stack([network.node_x[nodes], network.node_y[nodes]])) if len(nodes) else None,
        }
    return per_net[weight.name]


def share_entry_places(base: Network, new: Network) -> None:
    """Let ``new`` use ``base``'s cached spatial indexes of the places points join, where they are the same.

    ``new`` must have ``base``'s nodes and edges (same ids, positions,
    geometry, modes, entry flags and components: a network re-costed in
    place, :func:`geo_reach.pipeline.changes.changed_network`).  An index
    for a weight is shared only when the same edges are routable on it in
    both (no edge closed or opened), since the indexes hold the routable
    edges; otherwise ``new`` builds its own on first use.
    """
    per_base = _TREES.get(base)
    if not per_base or new is base:
        return
    per_new = _TREES.setdefault(new, {})
    for key, value in per_base.items():
        name = key if isinstance(key, str) else key[1]
        if key in per_new:
            continue
        if np.array_equal(np.isnan(base.cost(name)), np.isnan(new.cost(name))):
            per_new[key] = value


def _edge_samples(network: Network, weight: Weight, spacing_m: float):
    """Samples along every enterable road edge at most ``spacing_m`` apart (cached): edge, fraction, x, y, tree."""
    from scipy.spatial import cKDTree

    per_net = _TREES.setdefault(network, {})
    key = ("samples", weight.name, float(spacing_m))
    if key not in per_net:
        along = _entry_places(network, weight)["along"]
        geoms = network.edge_geometry[along]
        lengths = np.asarray([g.length for g in geoms], np.float64) if len(geoms) else np.zeros(0)
        k = np.maximum(np.ceil(lengths / spacing_m - 1e-9).astype(np.int64), 1)
        edge = np.repeat(along, k + 1)
        first = np.cumsum(k + 1) - (k + 1)
        frac = (np.arange(edge.size) - np.repeat(first, k + 1)) / np.repeat(k, k + 1).astype(np.float64)
        import shapely

        pts = shapely.line_interpolate_point(network.edge_geometry[edge], frac, normalized=True) if edge.size \
            else np.zeros(0, object)
        xy = shapely.get_coordinates(pts) if edge.size else np.zeros((0, 2))
        per_net[key] = (edge.astype(np.int64), frac, xy, cKDTree(xy) if edge.size else None)
    return per_net[key]


def _check_options(max_access_m, walk_kmh):
    if not np.isfinite(max_access_m) or max_access_m < 0:
        raise OptionError(f"max_access_m {max_access_m}: must be zero or more metres", key="max_access_m")
    if not np.isfinite(walk_kmh) or walk_kmh <= 0:
        raise OptionError(f"walk_kmh {walk_kmh}: must be a positive speed in km/h", key="walk_kmh")


def attach_points(network: Network, xy, weight: Weight | str = "minutes", *, max_access_m: float = 5000.0,
                  walk_kmh: float = 5.0, extra_walk_m: float = EXTRA_WALK_M, walk=None, roles=ROLES,
                  always_join: bool = False, reach_m=None) -> Attachment:
    """Find where each point may join the network.

    Parameters
    ----------
    network : Network
    xy : array_like of float, shape (n_points, 2)
        Point coordinates in the network's working CRS (metres).
    weight : Weight or {'minutes', 'length_m', 'latency_ms', 'hops'}
        Edges without a value for it are not entered.
    max_access_m : float, default 5000
        Largest straight-line access distance, metres.
    walk_kmh : float, default 5
        Walking speed on flat open ground, km/h (common practice for
        walking).
    extra_walk_m : float, default :data:`EXTRA_WALK_M`
        Entries are offered up to the cost of walking this much farther
        (on flat open ground) than the cheapest one, plus the cheapest entry
        onto the largest component, wherever it lies within
        ``max_access_m``.  ``inf`` offers every entry within reach.
    walk : walk pricer, optional
        Prices each leg (see :class:`StraightWalk`, the default, and
        :class:`~geo_reach.analysis.walkgrid.GridWalk`); it must be made for
        the same weight, walking speed and ``max_access_m``.
    roles : iterable of {'leave', 'arrive'}
        The walks to price (a hub routed ``to-hub`` is only arrived at); the
        other role's costs are NaN and refused when used.
    always_join : bool, default False
        A point farther than ``max_access_m`` from every place joins all the
        same, at the places up to ``max_access_m`` past its nearest, and every
        point may also walk to the nearest place on the largest component
        however far it lies (for places whose people count, such as
        settlements, as every cell of the travel-time surface counts).  Its
        ``access_m`` stays above ``max_access_m``, so callers can report it.
    reach_m : array_like of float, shape (n_points,), optional
        A reach fixed by the caller, metres (straight line): the point is
        offered *every* entry within it, and no rule above prunes them
        (NaN: the rules above, for that point).  For walk-costed weights
        only; :meth:`~geo_reach.analysis.travel.TravelModel.hub_trips` uses it
        to price a settlement's trip exactly (see there).

    Returns
    -------
    Attachment
        Every leg within ``max_access_m`` (see the module notes for which
        places count and how legs are chosen).

    Raises
    ------
    OptionError
        ``max_access_m`` negative or ``walk_kmh`` not positive, unknown weight
        or role.

    Notes
    -----
    Distances are planar in the working CRS (which is metric); the share of
    an edge's cost is in proportion to the planar position along its
    geometry.  Cost O(p log m) with an STR-tree over the road edges and a
    k-d tree over the entry nodes (both cached per network and weight), plus
    the pricer's cost.
    """
    import shapely

    weight = as_weight(weight)
    _check_options(max_access_m, walk_kmh)
    roles = tuple(roles)
    if not roles or any(r not in ROLES for r in roles):
        raise OptionError(f"roles {roles!r}: give 'leave', 'arrive' or both")
    if walk is None:
        walk = StraightWalk(weight, walk_kmh, max_access_m)
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    p = len(xy)
    if p > ATTACH_CHUNK:
        # Points are independent: attach them a chunk at a time, so that the candidate legs (every entry within
        # reach, before the rules choose) never all sit in memory at once.
        if reach_m is not None:
            reach_m = np.asarray(reach_m, np.float64).reshape(-1)
            if reach_m.shape != (p,):
                raise OptionError(f"reach_m has {reach_m.size} values for {p} points")
        parts = [attach_points(network, xy[s:s + ATTACH_CHUNK], weight, max_access_m=max_access_m,
                               walk_kmh=walk_kmh, extra_walk_m=extra_walk_m, walk=walk, roles=roles,
                               always_join=always_join,
                               reach_m=None if reach_m is None else reach_m[s:s + ATTACH_CHUNK])
                 for s in range(0, p, ATTACH_CHUNK)]
        return _concatenated(parts, xy)
    places = _entry_places(network, weight)
    pts = shapely.points(xy[:, 0], xy[:, 1])

    # --- the nearest place, and how far each point may walk (its reach)
    near = np.full(p, np.inf)
    if p and places["tree"] is not None:
        (qi, _), dmin = places["tree"].query_nearest(pts, return_distance=True, all_matches=False)
        near[qi] = dmin
    nd = places["kd"].query(xy)[0] if p and places["kd"] is not None else np.full(p, np.inf)
    access = np.minimum(near, nd)   # the straight distance to the nearest place, also beyond reach
    lim = np.full(p, float(max_access_m))
    if always_join and p:
        if places["main_tree"] is not None:   # up to the largest component, however far (the nearest place too)
            (mi, _), dm = places["main_tree"].query_nearest(pts, return_distance=True, all_matches=False)
            lim[mi] = np.maximum(lim[mi], dm + TIE_M)
            # a place beyond reach may also walk up to max_access_m past its nearest place, as a cell of the
            # travel-time surface walks to whichever road is cheapest (one trip, one number)
            far = np.isfinite(access) & (access > max_access_m)
            lim[far] = np.maximum(lim[far], access[far] + max_access_m + TIE_M)
        else:                                  # no road on it: up to the nearest place, and the extra walk
            far = np.isfinite(access) & (access > max_access_m)
            lim[far] = access[far] + min(extra_walk_m, max_access_m) + TIE_M
    fixed = np.zeros(p, bool)
    if reach_m is not None:
        reach_m = np.asarray(reach_m, np.float64).reshape(-1)
        if reach_m.shape != (p,):
            raise OptionError(f"reach_m has {reach_m.size} values for {p} points")
        fixed = np.isfinite(reach_m) & weight.walk_costed
        lim[fixed] = np.maximum(reach_m[fixed], 0.0) + TIE_M
    # --- road edges: every edge within reach of the nearest
    if p and places["tree"] is not None:
        ok = near <= lim
        reach = lim[ok] + TIE_M   # every place within reach is a candidate; the rules below choose
        qi, ti = places["tree"].query(pts[ok], predicate="dwithin", distance=reach)
        qi = np.nonzero(ok)[0][qi].astype(np.int64)
        edges = places["along"][ti]
        dist = shapely.distance(pts[qi], network.edge_geometry[edges])
        frac = shapely.line_locate_point(network.edge_geometry[edges], pts[qi], normalized=True)
        frac = np.clip(np.nan_to_num(frac, nan=0.0), 0.0, 1.0)
    else:
        qi = edges = np.zeros(0, np.int64)
        dist = frac = np.zeros(0)
    # without straight walking, also the nearest road edges onto the largest component, wherever they lie
    if not walk.on_grid and p and len(qi):
        qi, edges, dist, frac = _add_main_nearest(places, pts, near, lim, qi, edges, dist, frac, network)

    # --- entry nodes of another mode
    if p and places["kd"] is not None:
        found = places["kd"].query_ball_point(xy, lim + TIE_M)
        npt = np.repeat(np.arange(p, dtype=np.int64), [len(f) for f in found])
        k = np.concatenate([np.asarray(f, dtype=np.int64) for f in found]) if len(npt) else np.zeros(0, np.int64)
        nnode = places["nodes"][k].astype(np.int64)
        ndist = np.hypot(*(xy[npt] - places["kd"].data[k]).T) if len(npt) else np.zeros(0)
    else:
        npt = nnode = np.zeros(0, np.int64)
        ndist = np.zeros(0)

    leg_point = np.concatenate([qi, npt]).astype(np.int64)
    leg_edge = np.concatenate([edges, np.full(len(npt), -1)]).astype(np.int64)
    leg_node = np.concatenate([np.full(len(qi), -1), nnode]).astype(np.int64)
    leg_frac = np.concatenate([frac, np.zeros(len(npt))])
    leg_dist = np.concatenate([dist, ndist]).astype(np.float64)
    keep = leg_dist <= lim[leg_point]
    leg_point, leg_edge, leg_node, leg_frac, leg_dist = (a[keep] for a in
                                                         (leg_point, leg_edge, leg_node, leg_frac, leg_dist))
    if walk.on_grid:
        leg_point, leg_edge, leg_node, leg_frac, leg_dist = _add_samples(
            network, weight, walk, xy, lim, leg_point, leg_edge, leg_node, leg_frac, leg_dist)

    # --- price every leg
    target = np.empty((len(leg_point), 2))
    on_edge = leg_edge >= 0
    if on_edge.any():
        target[on_edge] = shapely.get_coordinates(shapely.line_interpolate_point(
            network.edge_geometry[leg_edge[on_edge]], leg_frac[on_edge], normalized=True))
    target[~on_edge, 0] = network.node_x[leg_node[~on_edge]]
    target[~on_edge, 1] = network.node_y[leg_node[~on_edge]]
    priced = walk.price(xy, leg_point, target, roles, reach=lim)
    leave, arrive, walk_m = (np.asarray(a, np.float64) for a in priced)
    # the cost that chooses between legs: the dearer of the priced roles (costed walks), the walked
    # length (free walks)
    sel = np.fmax(leave, arrive) if weight.walk_costed else np.where(np.isfinite(np.fmax(leave, arrive)),
                                                                       walk_m, np.inf)
    reach = np.isfinite(sel)
    had = np.zeros(p, bool)
    had[leg_point] = True
    # one leg per (point, edge) on a grid: the position cheapest to walk to
    if walk.on_grid and len(leg_point):
        key_e = np.where(leg_edge >= 0, leg_edge, -2 - leg_node)
        order = np.lexsort((sel, key_e, leg_point))
        first = np.ones(len(order), bool)
        first[1:] = (leg_point[order][1:] != leg_point[order][:-1]) | (key_e[order][1:] != key_e[order][:-1])
        one = np.zeros(len(leg_point), bool)
        one[order[first]] = True
        reach &= one

    # --- offered: entries within extra_walk_m of walking beyond the cheapest, and the cheapest onto the
    # largest component
    best = np.full(p, np.inf)
    if reach.any():
        np.minimum.at(best, leg_point[reach], sel[reach])
    if weight.walk_costed:
        slack = float(weight.walk_cost(extra_walk_m, walk_kmh)) if np.isfinite(extra_walk_m) else np.inf
        offered = sel <= best[leg_point] + slack + 1e-12
        main_leg = np.zeros(len(leg_point), bool)
        if len(leg_edge):
            main_leg = (leg_edge >= 0) & (network.component[network.edge_from[np.maximum(leg_edge, 0)]] == 0)
        main_leg &= reach
        first_main = np.full(p, np.inf)
        if main_leg.any():
            np.minimum.at(first_main, leg_point[main_leg], sel[main_leg])
        offered |= main_leg & (sel <= first_main[leg_point] + 1e-12)
        offered |= reach & _faster_than_every_cheaper(network, weight, leg_point, leg_edge, sel, reach)
        offered |= fixed[leg_point]   # a reach fixed by the caller: every entry within it
    else:
        offered = sel <= best[leg_point] + TIE_M   # free walking: the nearest entries only
    keep = reach & offered
    order = np.argsort(leg_point[keep], kind="stable")
    cols = [a[keep][order] for a in (leg_point, leg_edge, leg_node, leg_frac, walk_m, leave, arrive)]
    blocked = had & ~np.isfinite(best)
    return Attachment(weight, float(walk_kmh), float(max_access_m), xy, access, *cols, blocked=blocked)


def _concatenated(parts: list, xy: np.ndarray) -> Attachment:
    """One attachment from the attachments of consecutive chunks of ``xy`` (legs stay sorted by point)."""
    first = parts[0]
    offsets = np.cumsum([0] + [a.n_points for a in parts[:-1]])
    cat = np.concatenate
    return Attachment(first.weight, first.walk_kmh, first.max_access_m, xy, cat([a.access_m for a in parts]),
                      cat([a.leg_point + o for a, o in zip(parts, offsets)]), cat([a.leg_edge for a in parts]),
                      cat([a.leg_node for a in parts]), cat([a.leg_fraction for a in parts]),
                      cat([a.leg_walk_m for a in parts]), cat([a.leg_leave_cost for a in parts]),
                      cat([a.leg_arrive_cost for a in parts]), blocked=cat([a.blocked for a in parts]))


def _faster_than_every_cheaper(network, weight, leg_point, leg_edge, sel, reach) -> np.ndarray:
    """Legs onto a road faster (less cost per metre) than every leg of the point strictly cheaper to walk to.

    A fast road farther away than a slow track can make the cheaper trip
    however far beyond the cheapest walk it lies; these legs are the
    point's front of (walk cost, road pace), a handful per point (legs tied
    on the walk are all kept: they may lead to different places).  Entry
    nodes count as the fastest (stations and access nodes are few).
    """
    import pandas as pd

    out = np.zeros(len(leg_point), bool)
    idx = np.nonzero(reach)[0]
    if not len(idx):
        return out
    e = leg_edge[idx]
    cost = network.cost(weight)
    with np.errstate(divide="ignore", invalid="ignore"):
        pace = np.where(e >= 0, cost[np.maximum(e, 0)] / np.maximum(network.edge_length_m[np.maximum(e, 0)], 1e-9),
                        -np.inf)
    order = np.lexsort((sel[idx], leg_point[idx]))
    pt, sv, pc = leg_point[idx][order], sel[idx][order], pace[order]
    new_pt = np.r_[True, pt[1:] != pt[:-1]]
    # the least pace among the point's legs before each one, then the same for every leg of a walk tie
    shifted = np.r_[np.inf, pc[:-1]]
    shifted[new_pt] = np.inf
    before = pd.Series(shifted).groupby(np.cumsum(new_pt)).cummin()
    same_walk = np.r_[False, np.abs(sv[1:] - sv[:-1]) <= 1e-9 * np.maximum(1.0, np.abs(sv[1:]))]   # rounding
    tie = np.cumsum(new_pt | ~same_walk)
    before = before.groupby(tie).transform("first").to_numpy(np.float64)
    out[idx[order]] = pc < before
    return out


def _add_main_nearest(places, pts, near, lim, qi, edges, dist, frac, network):
    """Add, for points whose offered edges all lie on fragments, the nearest edge onto the largest component."""
    import shapely

    main, tree = places["main"], places["main_tree"]
    if tree is None:
        return qi, edges, dist, frac
    on_main = np.zeros(len(pts), bool)
    on_main[qi[network.component[network.edge_from[edges]] == 0]] = True
    need = np.nonzero(~on_main & (near <= lim))[0]
    if not len(need):
        return qi, edges, dist, frac
    (mi, mt), md = tree.query_nearest(pts[need], max_distance=float(lim[need].max()), return_distance=True,
                                      all_matches=False)
    inside = md <= lim[need][mi]
    mi, mt, md = mi[inside], mt[inside], md[inside]
    me = main[mt]
    mq = need[mi]
    mf = shapely.line_locate_point(network.edge_geometry[me], pts[mq], normalized=True)
    return (np.concatenate([qi, mq]).astype(np.int64), np.concatenate([edges, me]).astype(np.int64),
            np.concatenate([dist, md]), np.concatenate([frac, np.clip(np.nan_to_num(mf, nan=0.0), 0.0, 1.0)]))


def _add_samples(network, weight, walk, xy, lim, leg_point, leg_edge, leg_node, leg_frac, leg_dist):
    """Add every road sample within reach of each point (half a cell apart) as a candidate position."""
    edge, frac, sxy, tree = _edge_samples(network, weight, walk.sample_spacing_m)
    if tree is None or not len(xy):
        return leg_point, leg_edge, leg_node, leg_frac, leg_dist
    found = tree.query_ball_point(xy, lim + TIE_M)
    sp = np.repeat(np.arange(len(xy), dtype=np.int64), [len(f) for f in found])
    k = np.concatenate([np.asarray(f, np.int64) for f in found]) if len(sp) else np.zeros(0, np.int64)
    sd = np.hypot(*(sxy[k] - xy[sp]).T) if len(sp) else np.zeros(0)
    return (np.concatenate([leg_point, sp]), np.concatenate([leg_edge, edge[k]]),
            np.concatenate([leg_node, np.full(len(sp), -1, np.int64)]), np.concatenate([leg_frac, frac[k]]),
            np.concatenate([leg_dist, sd]))

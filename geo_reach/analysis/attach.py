"""Join points that lie off the network (hubs, origins, destinations) to it.

A point joins the network through the cheapest of its *entries*: every place
within ``max_access_m`` where a trip may enter or leave the network.  Places are

* every ``road`` edge routable on the weight, at the point of the edge nearest
  to the point (the edge's cost is split in proportion to the position along
  it, and one-way edges are respected: from a point part-way along a one-way
  edge a trip can only go on towards its ``to_node``);
* every entry node (``node_entry`` true: a rail station, a cable access node)
  touching a routable edge of another mode, at the node itself;
* never a ``transfer`` edge, and never a rail or cable edge between stations.

For ``minutes`` and ``length_m`` (where walking costs something) every such
place up to ``extra_walk_m`` (1 km) farther than the nearest one is kept as a
*leg*, plus the nearest place on the largest network component, and the
search picks the cheapest trip over all of them (walk + network): a hub 20 m
from a slow track and 200 m from a fast road may well be reached by the road.
Adding a road never makes a trip dearer unless the new road passes nearer to
the point than its nearest entry did, *and* an entry more than ``extra_walk_m``
beyond the new nearest was the cheapest (it would have to save more than the
12 minutes that 1 km takes on foot).  Legs are directed
(a trip only leaves an origin and only arrives at a destination or hub), so
no trip can cut across country from one edge to another through a point.
For ``hops`` and ``latency_ms`` the access leg is free, so "cheapest" would
let a point jump to any edge within reach: there only the nearest places are
kept (several when tied, e.g. all edges meeting at a junction).

The access leg (point to the place on the network, straight line, planar
distance in the working CRS) is costed as follows, per weight:

``minutes``
    ``walk_m / (walk_kmh * 1000 / 60)``, i.e. at the off-network speed.
``length_m``
    its length in metres.
``hops``
    0: the access leg is not a link.  The partial edge counts its fraction of
    one link, so the rule "split the edge cost in proportion" holds for every
    weight.
``latency_ms``
    0: signal latency only exists on the network.

The routing functions add each point as a virtual node joined by its legs
(one arc to each end of the entered edge that the trip may use).  Points
with no entry within ``max_access_m`` are kept in the arrays (``attached`` false, ``access_m`` their real distance) so
callers report them; they are never moved.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight

__all__ = ["Attachment", "attach_points", "walk_cost"]

#: Edge modes a point may enter anywhere along (common practice: roads and
#: tracks are walkable to; rail and cable only at stations or access nodes).
ALONG_MODES = frozenset({"road"})
#: Edge modes a point may never enter.
NEVER_MODES = frozenset({"transfer"})

#: Entries this much farther than the nearest one still count as tied (metres).
TIE_M = 1e-6

#: Entries more than this much farther (on foot) than the nearest one are not offered, except the
#: nearest entry onto the largest network component (metres).  1 km is 12 minutes at 5 km/h: an entry
#: beyond it is very seldom the cheapest, and offering every edge within ``max_access_m`` (thousands
#: per point on a dense network) made each point cost as much as the network itself.
EXTRA_WALK_M = 1000.0

_TREES: "weakref.WeakKeyDictionary[Network, dict]" = weakref.WeakKeyDictionary()


def walk_cost(walk_m, weight: Weight | str, walk_kmh: float) -> np.ndarray:
    """Cost of an off-network access leg (see :meth:`Weight.walk_cost`).

    Parameters
    ----------
    walk_m : array_like of float
        Leg length in metres.
    weight : Weight or str
    walk_kmh : float
        Off-network speed, km/h (5 km/h is common practice for walking).

    Returns
    -------
    ndarray of float64
        Cost in the weight's unit (minutes, metres, 0 for hops and latency).

    Examples
    --------
    >>> float(walk_cost(500.0, "minutes", 5.0))
    6.0
    >>> float(walk_cost(500.0, "hops", 5.0))
    0.0
    """
    return as_weight(weight).walk_cost(walk_m, walk_kmh)


@dataclass(frozen=True, eq=False)
class Attachment:
    """Where each of ``n_points`` off-network points may join a network, for one weight.

    Attributes
    ----------
    weight : Weight
        The weight the legs were chosen for (edges without it are not entered).
    walk_kmh, max_access_m : float
        Off-network speed (km/h) and the largest access distance (m).
    point_xy : ndarray of float64, shape (n_points, 2)
        The points, in the network's working CRS (m).
    access_m : ndarray of float64, shape (n_points,)
        Distance in metres to the nearest place the point may join
        (``inf`` if the network has none); larger than ``max_access_m`` for
        points left out.
    leg_point : ndarray of int64, shape (n_legs,)
        The point each leg belongs to (sorted).
    leg_edge : ndarray of int64, shape (n_legs,)
        The edge entered part-way, or -1 for an entry at a node.
    leg_node : ndarray of int64, shape (n_legs,)
        The node entered directly, or -1 for an edge leg.
    leg_fraction : ndarray of float64, shape (n_legs,)
        Position along ``leg_edge`` from its ``from_node`` (0..1); 0 for node legs.
    leg_walk_m : ndarray of float64, shape (n_legs,)
        Length of the off-network access leg in metres.
    """

    weight: Weight
    walk_kmh: float
    max_access_m: float
    point_xy: np.ndarray
    access_m: np.ndarray
    leg_point: np.ndarray
    leg_edge: np.ndarray
    leg_node: np.ndarray
    leg_fraction: np.ndarray
    leg_walk_m: np.ndarray

    @property
    def n_points(self) -> int:
        return len(self.point_xy)

    @property
    def attached(self) -> np.ndarray:
        """Boolean mask of the points with at least one leg."""
        out = np.zeros(self.n_points, dtype=bool)
        out[self.leg_point] = True
        return out

    def subset(self, points) -> "Attachment":
        """The attachment of ``points`` only (renumbered 0..k-1 in the given order)."""
        points = np.asarray(points, dtype=np.int64)
        order = np.argsort(self.leg_point, kind="stable")
        starts = np.searchsorted(self.leg_point[order], points, side="left")
        stops = np.searchsorted(self.leg_point[order], points, side="right")
        take = np.concatenate([order[a:b] for a, b in zip(starts, stops)]) if len(points) else np.zeros(0, np.int64)
        newp = np.repeat(np.arange(len(points)), stops - starts)
        return Attachment(self.weight, self.walk_kmh, self.max_access_m, self.point_xy[points],
                          self.access_m[points], newp.astype(np.int64), self.leg_edge[take],
                          self.leg_node[take], self.leg_fraction[take], self.leg_walk_m[take])

    # ------------------------------------------------------------------ arcs
    def arcs(self, network: Network, role: str):
        """The virtual arcs joining each point to the network.

        Parameters
        ----------
        network : Network
            The network the points were attached to.
        role : {'leave', 'arrive'}
            ``leave``: arcs from the point onto the network (the point is an
            origin).  ``arrive``: arcs from the network to the point (the
            point is a destination).

        Returns
        -------
        point, node : ndarray of int64, shape (k,)
            The arc joins ``point`` and network ``node`` (direction per role).
        cost : ndarray of float64, shape (k,)
            Access leg plus the share of the edge, in the weight's unit.
        leg : ndarray of int64, shape (k,)
            The leg behind each arc (index into the ``leg_*`` arrays).
        """
        if role not in ("leave", "arrive"):
            raise OptionError(f"unknown role '{role}'; choose 'leave' or 'arrive'")
        nleg = len(self.leg_point)
        legs = np.arange(nleg)
        walk = self.weight.walk_cost(self.leg_walk_m, self.walk_kmh)
        is_edge = self.leg_edge >= 0
        e = self.leg_edge[is_edge]
        c = network.cost(self.weight)[e]
        f = self.leg_fraction[is_edge]
        one = network.edge_oneway[e]
        # Leaving: towards to_node (forward part) always, to from_node only if two-way.
        # Arriving: from from_node (forward part) always, from to_node only if two-way.
        # A point exactly at an end of a one-way edge is at that node: the zero-length "backward"
        # piece is allowed.
        if role == "leave":
            fwd_node, fwd_cost = network.edge_to[e], (1.0 - f) * c
            back_node, back_cost, back_share = network.edge_from[e], f * c, f
        else:
            fwd_node, fwd_cost = network.edge_from[e], f * c
            back_node, back_cost, back_share = network.edge_to[e], (1.0 - f) * c, 1.0 - f
        back = ~one | (back_share == 0.0)
        el = legs[is_edge]
        nl = legs[~is_edge]
        leg = np.concatenate([el, el[back], nl])
        node = np.concatenate([fwd_node, back_node[back], self.leg_node[nl]])
        cost = np.concatenate([fwd_cost, back_cost[back], np.zeros(len(nl))]) + walk[leg]
        return (self.leg_point[leg].astype(np.int64), node.astype(np.int64),
                cost.astype(np.float64), leg.astype(np.int64))

    def snapped_xy(self, network: Network, legs) -> np.ndarray:
        """Where each of ``legs`` meets the network (working CRS, m), shape (k, 2)."""
        import shapely

        legs = np.asarray(legs, dtype=np.int64)
        out = np.empty((len(legs), 2))
        ed = self.leg_edge[legs]
        on_edge = ed >= 0
        if on_edge.any():
            pts = shapely.line_interpolate_point(network.edge_geometry[ed[on_edge]],
                                                 self.leg_fraction[legs][on_edge], normalized=True)
            out[on_edge] = shapely.get_coordinates(pts)
        nd = self.leg_node[legs][~on_edge]
        out[~on_edge, 0] = network.node_x[nd]
        out[~on_edge, 1] = network.node_y[nd]
        return out


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


def attach_points(network: Network, xy, weight: Weight | str = "minutes", *, max_access_m: float = 5000.0,
                  walk_kmh: float = 5.0, extra_walk_m: float = EXTRA_WALK_M) -> Attachment:
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
        Off-network speed for the ``minutes`` weight, km/h (common practice
        for walking).
    extra_walk_m : float, default :data:`EXTRA_WALK_M`
        Entries are offered up to this much farther than the nearest one
        (plus the nearest entry onto the largest component, wherever it lies
        within ``max_access_m``).  ``inf`` offers every entry within reach.

    Returns
    -------
    Attachment
        Every leg within ``max_access_m`` (see the module notes for which
        places count and how legs are costed).

    Raises
    ------
    OptionError
        ``max_access_m`` negative or ``walk_kmh`` not positive, unknown weight.

    Notes
    -----
    Distances are planar in the working CRS (which is metric); the share of
    an edge's cost is in proportion to the planar position along its
    geometry.  Cost O(p log m) with an STR-tree over the road edges and a
    k-d tree over the entry nodes (both cached per network and weight).
    """
    import shapely

    weight = as_weight(weight)
    if not np.isfinite(max_access_m) or max_access_m < 0:
        raise OptionError(f"max_access_m {max_access_m}: must be zero or more metres", key="max_access_m")
    if not np.isfinite(walk_kmh) or walk_kmh <= 0:
        raise OptionError(f"walk_kmh {walk_kmh}: must be a positive speed in km/h", key="walk_kmh")
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    p = len(xy)
    places = _entry_places(network, weight)
    pts = shapely.points(xy[:, 0], xy[:, 1])

    # --- nearest road edges (all of those tied at the nearest distance)
    if p and places["tree"] is not None:
        # the nearest distance, then every edge within TIE_M of it (parallel edges and edges drawn
        # in the other direction give the same distance up to rounding)
        (qi, _), dmin = places["tree"].query_nearest(pts, return_distance=True, all_matches=False)
        near = np.full(p, np.inf)
        near[qi] = dmin
        ok = near <= max_access_m
        reach = np.minimum(near[ok] + extra_walk_m, max_access_m) + TIE_M
        qi, ti = places["tree"].query(pts[ok], predicate="dwithin", distance=reach)
        qi = np.nonzero(ok)[0][qi].astype(np.int64)
        edges = places["along"][ti]
        walk = shapely.distance(pts[qi], network.edge_geometry[edges])
        frac = shapely.line_locate_point(network.edge_geometry[edges], pts[qi], normalized=True)
        frac = np.clip(np.nan_to_num(frac, nan=0.0), 0.0, 1.0)
    else:
        qi = edges = np.zeros(0, np.int64)
        walk = frac = np.zeros(0)

    # --- nearest entry node of another mode
    if p and places["kd"] is not None:
        found = places["kd"].query_ball_point(xy, max_access_m + TIE_M)
        npt = np.repeat(np.arange(p, dtype=np.int64), [len(f) for f in found])
        k = np.concatenate([np.asarray(f, dtype=np.int64) for f in found]) if len(npt) else np.zeros(0, np.int64)
        nnode = places["nodes"][k].astype(np.int64)
        nwalk = np.hypot(*(xy[npt] - places["kd"].data[k]).T) if len(npt) else np.zeros(0)
    else:
        npt = nnode = np.zeros(0, np.int64)
        nwalk = np.zeros(0)

    # --- the nearest entry onto the largest component, for points whose offered entries all lie on
    # fragments (a hub beside a cut-off track must still reach the main network within reach)
    if p and places.get("main_tree") is not None and len(qi):
        on_main = np.zeros(p, bool)
        on_main[qi[network.component[network.edge_from[edges]] == 0]] = True
        need = np.nonzero(~on_main & (near <= max_access_m))[0]
        if len(need):
            (mi, mt), md = places["main_tree"].query_nearest(pts[need], max_distance=max_access_m,
                                                             return_distance=True, all_matches=False)
            me = places["main"][mt]
            mq = need[mi]
            qi = np.concatenate([qi, mq]).astype(np.int64)
            edges = np.concatenate([edges, me]).astype(np.int64)
            walk = np.concatenate([walk, md])
            mf = shapely.line_locate_point(network.edge_geometry[me], pts[mq], normalized=True)
            frac = np.concatenate([frac, np.clip(np.nan_to_num(mf, nan=0.0), 0.0, 1.0)])

    leg_point = np.concatenate([qi, npt]).astype(np.int64)
    leg_edge = np.concatenate([edges, np.full(len(npt), -1)]).astype(np.int64)
    leg_node = np.concatenate([np.full(len(qi), -1), nnode]).astype(np.int64)
    leg_frac = np.concatenate([frac, np.zeros(len(npt))])
    leg_walk = np.concatenate([walk, nwalk]).astype(np.float64)

    # --- keep every entry within max_access_m; access_m is the nearest one's distance
    access = np.full(p, np.inf)
    np.minimum.at(access, leg_point, leg_walk)
    if p and places["tree"] is not None:
        access = np.minimum(access, near)  # real distance also for points beyond max_access_m
    if p and places["kd"] is not None:
        nd, _ = places["kd"].query(xy)
        access = np.minimum(access, nd)
    keep = leg_walk <= max_access_m
    # offered: entries within extra_walk_m of the nearest, and the nearest onto the largest component
    main_leg = np.zeros(len(leg_point), bool)
    if len(leg_edge):
        le = np.maximum(leg_edge, 0)
        main_leg = (leg_edge >= 0) & (network.component[network.edge_from[le]] == 0)
    first_main = np.full(p, np.inf)
    if main_leg.any():
        np.minimum.at(first_main, leg_point[main_leg], leg_walk[main_leg])
    keep &= (leg_walk <= access[leg_point] + extra_walk_m) | (main_leg & (leg_walk <= first_main[leg_point] + TIE_M))
    if not weight.walk_costed:
        keep &= leg_walk <= access[leg_point] + TIE_M   # free walking: the nearest entries only
    order = np.argsort(leg_point[keep], kind="stable")
    leg_point, leg_edge, leg_node, leg_frac, leg_walk = (a[keep][order] for a in
                                                         (leg_point, leg_edge, leg_node, leg_frac, leg_walk))
    return Attachment(weight, float(walk_kmh), float(max_access_m), xy, access, leg_point, leg_edge,
                      leg_node, leg_frac, leg_walk)

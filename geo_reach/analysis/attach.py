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
network component, and the search picks the cheapest trip over all of them
(walk + network): a hub 20 m from a slow track and 200 m from a fast road may
well be reached by the road.  Adding a road never makes a trip dearer unless
the new road is cheaper to walk to than the old cheapest entry, *and* an
entry more than ``extra_walk_m`` of walking beyond the new cheapest was the
cheapest trip (it would have to save more than the 12 minutes that 1 km
takes on foot).  Legs are directed (a trip only leaves an origin and only
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
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight

__all__ = ["Attachment", "ArcDetail", "DirectWalks", "Priced", "StraightWalk", "attach_points", "walk_cost",
           "ROLES", "EXTRA_WALK_M"]

#: The two ways a point meets the network: a trip *leaves* an origin, *arrives* at a destination.
ROLES = ("leave", "arrive")

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


def walk_cost(walk_m, weight: Weight | str, walk_kmh: float) -> np.ndarray:
    """Cost of a straight walk on flat open ground (see :meth:`Weight.walk_cost`).

    Parameters
    ----------
    walk_m : array_like of float
        Walk length in metres.
    weight : Weight or str
    walk_kmh : float
        Walking speed, km/h (5 km/h is common practice for walking).

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


class Priced(NamedTuple):
    """What a walk pricer returns for a batch of legs (see :class:`StraightWalk`).

    Attributes
    ----------
    leave, arrive : ndarray of float64, shape (k,)
        Cost of the walk from the point to the target (``leave``) and from the
        target to the point (``arrive``), in the weight's unit; ``inf`` where
        the walk cannot be made; NaN for a role that was not asked for.
    walk_m : ndarray of float64, shape (k,)
        Walked length, metres (``inf`` where the walk cannot be made).
    """

    leave: np.ndarray
    arrive: np.ndarray
    walk_m: np.ndarray


class StraightWalk:
    """Straight-line walking on flat open ground at the walking speed (no friction inputs).

    Parameters
    ----------
    weight : Weight
    walk_kmh : float
        Walking speed, km/h.
    max_access_m : float
        Longest walk, metres (straight line).
    """

    on_grid = False

    def __init__(self, weight: Weight, walk_kmh: float, max_access_m: float):
        self.weight = as_weight(weight)
        self.walk_kmh = float(walk_kmh)
        self.max_access_m = float(max_access_m)

    def price(self, xy, leg_point, target_xy, roles=ROLES, reach=None) -> Priced:
        """Cost of walking between ``xy[leg_point]`` and ``target_xy`` (row by row).

        Parameters
        ----------
        xy : ndarray of float64, shape (n, 2)
            The points (working CRS, metres).
        leg_point : ndarray of int64, shape (k,)
            The point each target belongs to.
        target_xy : ndarray of float64, shape (k, 2)
            Where each walk ends (leave) or starts (arrive).
        roles : iterable of {'leave', 'arrive'}
            The directions to price (both are the same on flat ground).
        reach : ndarray of float64, shape (n,), optional
            How far each point may walk, metres (a pricer on a grid bounds
            its search by it; straight walks need no bound).
        """
        xy = np.asarray(xy, np.float64).reshape(-1, 2)
        t = np.asarray(target_xy, np.float64).reshape(-1, 2)
        d = np.hypot(*(t - xy[np.asarray(leg_point, np.int64)]).T) if len(t) else np.zeros(0)
        c = self.weight.walk_cost(d, self.walk_kmh)
        nan = np.full(len(d), np.nan)
        return Priced(c if "leave" in roles else nan, c.copy() if "arrive" in roles else nan, d)


class DirectWalks(NamedTuple):
    """Walks straight from one place to another, with no network between (from a walk model).

    Attributes
    ----------
    src, dst : ndarray of int64, shape (k,)
        Index of the place the walk leaves and the place it reaches.
    cost : ndarray of float64, shape (k,)
        Cost of the walk in the weight's unit.
    walk_m : ndarray of float64, shape (k,)
        Walked length, metres.
    """

    src: np.ndarray
    dst: np.ndarray
    cost: np.ndarray
    walk_m: np.ndarray

    @classmethod
    def none(cls) -> "DirectWalks":
        z = np.zeros(0, np.int64)
        return cls(z, z.copy(), np.zeros(0), np.zeros(0))

    def subset(self, src=None, dst=None) -> "DirectWalks":
        """The walks between ``src`` and ``dst`` only (each renumbered 0..k-1 in the given order)."""
        keep = np.ones(len(self.src), bool)
        s, d = self.src.copy(), self.dst.copy()
        for sel, arr, name in ((src, s, "src"), (dst, d, "dst")):
            if sel is None:
                continue
            sel = np.asarray(sel, np.int64)
            size = int(max(arr.max(initial=-1), sel.max(initial=-1))) + 1
            new = np.full(size, -1, np.int64)
            new[sel] = np.arange(len(sel))
            mapped = new[arr]
            keep &= mapped >= 0
            arr[:] = mapped
        return DirectWalks(s[keep], d[keep], self.cost[keep], self.walk_m[keep])


class ArcDetail(NamedTuple):
    """The virtual arcs of an :class:`Attachment` (see :meth:`Attachment.arc_detail`)."""

    point: np.ndarray   # int64: the point the arc joins
    node: np.ndarray    # int64: the network node it joins
    cost: np.ndarray    # float64: walk + share of the edge, weight unit
    leg: np.ndarray     # int64: the leg behind the arc
    share: np.ndarray   # float64: fraction of the entered edge travelled (0 for node legs)


@dataclass(frozen=True, eq=False)
class Attachment:
    """Where each of ``n_points`` off-network points may join a network, for one weight.

    Attributes
    ----------
    weight : Weight
        The weight the legs were chosen for (edges without it are not entered).
    walk_kmh, max_access_m : float
        Walking speed on flat open ground (km/h) and the largest access distance (m).
    point_xy : ndarray of float64, shape (n_points, 2)
        The points, in the network's working CRS (m).
    access_m : ndarray of float64, shape (n_points,)
        Straight-line distance in metres to the nearest place the point may
        join (``inf`` if the network has none); larger than ``max_access_m``
        for points left out.
    leg_point : ndarray of int64, shape (n_legs,)
        The point each leg belongs to (sorted).
    leg_edge : ndarray of int64, shape (n_legs,)
        The edge entered part-way, or -1 for an entry at a node.
    leg_node : ndarray of int64, shape (n_legs,)
        The node entered directly, or -1 for an edge leg.
    leg_fraction : ndarray of float64, shape (n_legs,)
        Position along ``leg_edge`` from its ``from_node`` (0..1); 0 for node legs.
    leg_walk_m : ndarray of float64, shape (n_legs,)
        Walked length of the leg, metres (the straight distance when walking
        is straight; around barriers on a friction grid).
    leg_leave_cost, leg_arrive_cost : ndarray of float64, shape (n_legs,)
        Cost of walking the leg from the point to the network (``leave``) and
        from the network to the point (``arrive``), in the weight's unit; NaN
        for a role that was not priced.  Default: straight walking at
        ``walk_kmh``.
    blocked : ndarray of bool, shape (n_points,)
        Points with entries within reach that the walk cannot reach (a barrier
        all round); they have no legs.  All false by default.
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
    leg_leave_cost: np.ndarray | None = None
    leg_arrive_cost: np.ndarray | None = None
    blocked: np.ndarray | None = None

    def __post_init__(self):
        if self.leg_leave_cost is None or self.leg_arrive_cost is None:
            c = self.weight.walk_cost(self.leg_walk_m, self.walk_kmh)
            if self.leg_leave_cost is None:
                object.__setattr__(self, "leg_leave_cost", c)
            if self.leg_arrive_cost is None:
                object.__setattr__(self, "leg_arrive_cost", c.copy())
        if self.blocked is None:
            object.__setattr__(self, "blocked", np.zeros(len(self.point_xy), bool))

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
                          self.leg_node[take], self.leg_fraction[take], self.leg_walk_m[take],
                          self.leg_leave_cost[take], self.leg_arrive_cost[take], self.blocked[points])

    def walk(self, role: str) -> np.ndarray:
        """Cost of each leg's walk in ``role`` (weight unit)."""
        if role not in ROLES:
            raise OptionError(f"unknown role '{role}'; choose 'leave' or 'arrive'")
        c = self.leg_leave_cost if role == "leave" else self.leg_arrive_cost
        if len(c) and np.isnan(c).any():
            raise OptionError(f"these points were attached without pricing the '{role}' walk; attach them "
                              f"for that role")
        return c

    # ------------------------------------------------------------------ arcs
    def arc_detail(self, network: Network, role: str) -> ArcDetail:
        """The virtual arcs joining each point to the network, with the share of the edge each travels.

        Parameters
        ----------
        network : Network
            The network the points were attached to.
        role : {'leave', 'arrive'}
            ``leave``: arcs from the point onto the network (the point is an
            origin).  ``arrive``: arcs from the network to the point (the
            point is a destination).
        """
        walk = self.walk(role)
        nleg = len(self.leg_point)
        legs = np.arange(nleg)
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
            fwd_node, fwd_share = network.edge_to[e], 1.0 - f
            back_node, back_share = network.edge_from[e], f
        else:
            fwd_node, fwd_share = network.edge_from[e], f
            back_node, back_share = network.edge_to[e], 1.0 - f
        back = ~one | (back_share == 0.0)
        el = legs[is_edge]
        nl = legs[~is_edge]
        leg = np.concatenate([el, el[back], nl])
        node = np.concatenate([fwd_node, back_node[back], self.leg_node[nl]])
        share = np.concatenate([fwd_share, back_share[back], np.zeros(len(nl))])
        ce = np.concatenate([c, c[back], np.zeros(len(nl))])
        cost = share * ce + walk[leg]
        return ArcDetail(self.leg_point[leg].astype(np.int64), node.astype(np.int64), cost.astype(np.float64),
                         leg.astype(np.int64), share.astype(np.float64))

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
            Walk plus the share of the edge, in the weight's unit.
        leg : ndarray of int64, shape (k,)
            The leg behind each arc (index into the ``leg_*`` arrays).
        """
        d = self.arc_detail(network, role)
        return d.point, d.node, d.cost, d.leg

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
                  always_join: bool = False) -> Attachment:
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
        same, at the places within ``extra_walk_m`` of its nearest (for places
        whose people count, such as settlements, as every cell of the
        travel-time surface counts).  Its ``access_m`` stays above
        ``max_access_m``, so callers can report it.

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
    places = _entry_places(network, weight)
    pts = shapely.points(xy[:, 0], xy[:, 1])
    # straight walking is cheapest at the nearest places; a friction grid may make any place within
    # reach the cheapest, so there every place within max_access_m is a candidate
    extra_query = np.inf if walk.on_grid else extra_walk_m

    # --- the nearest place, and how far each point may walk (its reach)
    near = np.full(p, np.inf)
    if p and places["tree"] is not None:
        (qi, _), dmin = places["tree"].query_nearest(pts, return_distance=True, all_matches=False)
        near[qi] = dmin
    nd = places["kd"].query(xy)[0] if p and places["kd"] is not None else np.full(p, np.inf)
    access = np.minimum(near, nd)   # the straight distance to the nearest place, also beyond reach
    lim = np.full(p, float(max_access_m))
    if always_join:
        far = np.isfinite(access) & (access > max_access_m)
        lim[far] = access[far] + min(extra_walk_m, max_access_m) + TIE_M
    # --- road edges: every edge within reach of the nearest
    if p and places["tree"] is not None:
        ok = near <= lim
        reach = np.minimum(near[ok] + extra_query, lim[ok]) + TIE_M
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
    else:
        offered = sel <= best[leg_point] + TIE_M   # free walking: the nearest entries only
    keep = reach & offered
    order = np.argsort(leg_point[keep], kind="stable")
    cols = [a[keep][order] for a in (leg_point, leg_edge, leg_node, leg_frac, walk_m, leave, arrive)]
    blocked = had & ~np.isfinite(best)
    return Attachment(weight, float(walk_kmh), float(max_access_m), xy, access, *cols, blocked=blocked)


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

"""The legs between off-network places and the network: the data a walk model hands to routing.

:class:`Attachment` says where each point joins a network and what each
walk costs (both ways); :class:`DirectWalks` are walks straight from place to
place; :class:`StraightWalk` is the walk pricer without friction inputs
(straight lines at the walking speed).  The places themselves are found by
:func:`~geo_reach.analysis.attach.attach_points`; the walk with friction
inputs is :class:`~geo_reach.analysis.walkgrid.GridWalk`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight

__all__ = ["Attachment", "ArcDetail", "DirectWalks", "Priced", "StraightWalk", "walk_cost", "ROLES"]

#: The two ways a point meets the network: a trip *leaves* an origin, *arrives* at a destination.
ROLES = ("leave", "arrive")


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

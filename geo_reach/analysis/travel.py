"""The travel model: one way of pricing every trip, from the exact places it starts and ends.

A trip walks from its start to the network, rides the network, and walks
from the network to its end - or walks the whole way when that is cheaper.
:class:`TravelModel` holds the one walk rule every view uses: the hubs and
settlements of a study run, the origins and destinations of ``od`` and
``route``, the hubs of ``access``, and any engine that needs the cost of a
trip between places (accessibility indices, link criticality).  Build it
once per run, from the routing options and the optional friction inputs,
and ask it for trips; never price a walk anywhere else.

The walk
--------
* Without friction inputs: a straight line at the walking speed
  (:class:`~geo_reach.analysis.attach.StraightWalk`).
* With terrain, land cover or barriers: across the friction grid from the
  place's exact position, by the same kernel and move rule as the
  travel-time surface (:mod:`~geo_reach.analysis.walkgrid`): slowed by
  Tobler's hiking function on slopes, by land cover, and never across a
  barrier.

A walk joins the network at the entries of
:func:`~geo_reach.analysis.attach.attach_points` within ``max_access_m``; two
places within ``max_access_m`` of each other may also walk straight from one
to the other (on weights where walking is costed; a place to itself costs
nothing on every weight).

Results are model estimates; local surveys, codes and licensed professional
practice decide.

References
----------
.. [1] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling. NCGIA Technical Report 93-1.
.. [2] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from __future__ import annotations

from dataclasses import replace as _replace

import numpy as np

from ..network.model import Network
from ..network.weights import Weight, as_weight
from .attach import EXTRA_WALK_M, ROLES, Attachment, DirectWalks, StraightWalk, attach_points
from .options import RoutingOptions
from .routing import NearestHub, nearest_hub
from .trips import HubTrips, ODMatrix, Route, nearest_hub_trips, od_matrix, shortest_path
from .walkgrid import GridWalk, WalkGrid

__all__ = ["TravelModel", "WalkGrid", "DirectWalks", "HubTrips", "keep_legs"]


class TravelModel:
    """The one travel model of a run: how every trip between places is priced.

    Parameters
    ----------
    options : RoutingOptions, optional
        Weight, direction, ``max_access_m`` and ``walk_kmh`` (defaults if not
        given).
    walk_grid : WalkGrid, optional
        The friction grid walks cross; ``None``: straight-line walking.
        Made for ``options.walk_kmh``.

    Examples
    --------
    >>> from geo_reach.analysis.routing import _demo_chain
    >>> model = TravelModel(RoutingOptions(weight="minutes", walk_kmh=5.0))
    >>> r = model.route(_demo_chain(3), [0.0, 50.0], [2000.0, 50.0])
    >>> round(r.cost, 3)   # 50 m on foot (0.6 min), 2 km of road (2 min), 50 m on foot
    3.2
    >>> model.route(_demo_chain(3), [0.0, 50.0], [0.0, 50.0]).cost   # a place to itself
    0.0
    """

    def __init__(self, options: RoutingOptions | None = None, walk_grid: WalkGrid | None = None):
        self.options = options if options is not None else RoutingOptions()
        self.walk_grid = walk_grid
        if walk_grid is not None:
            self._pricer = GridWalk(walk_grid, self.options.weight, self.options.walk_kmh, self.options.max_access_m)
        else:
            self._pricer = StraightWalk(self.options.weight, self.options.walk_kmh, self.options.max_access_m)

    @classmethod
    def build(cls, options: RoutingOptions | None = None, grid=None, *, terrain=None, landcover=None,
              landcover_speeds=None, barriers=None, barrier_classes=(), landcover_source: str = "land cover",
              neighbours: int | None = None) -> "TravelModel":
        """The model from routing options and friction inputs on ``grid`` (straight walking when there are none).

        Parameters
        ----------
        options : RoutingOptions, optional
        grid : Grid, optional
            The friction grid (needed when any friction input is given).
        terrain, landcover, landcover_speeds, barriers, barrier_classes
            As :meth:`WalkGrid.build` (and the travel-time surface).
        """
        options = options if options is not None else RoutingOptions()
        if terrain is None and landcover is None and barriers is None:
            return cls(options)
        if grid is None:
            from ..errors import OptionError

            raise OptionError("friction inputs need a grid; give the study's grid or --cell-m")
        wg = WalkGrid.build(grid, options.walk_kmh, terrain=terrain, landcover=landcover,
                            landcover_speeds=landcover_speeds, barriers=barriers, barrier_classes=barrier_classes,
                            landcover_source=landcover_source, neighbours=neighbours)
        return cls(options, wg)

    # ------------------------------------------------------------------ what it is
    @property
    def weight(self) -> Weight:
        return self.options.weight

    @property
    def walk_kmh(self) -> float:
        return self.options.walk_kmh

    @property
    def max_access_m(self) -> float:
        return self.options.max_access_m

    @property
    def direction(self) -> str:
        return self.options.direction

    @property
    def on_grid(self) -> bool:
        """True when walks cross a friction grid (terrain, land cover or barriers)."""
        return self.walk_grid is not None

    def describe(self) -> str:
        """One line: how walks are priced."""
        how = "straight lines" if self.walk_grid is None else self.walk_grid.describe()
        return f"walks at {self.walk_kmh:g} km/h over {how}, up to {self.max_access_m:g} m to the network"

    def for_weight(self, weight) -> "TravelModel":
        """The same walk for another weight (the friction grid is shared)."""
        weight = as_weight(weight)
        if weight == self.weight:
            return self
        return TravelModel(_replace(self.options, weight=weight), self.walk_grid)

    def for_direction(self, direction: str) -> "TravelModel":
        """The same model for trips the other way (``to-hub`` or ``from-hub``)."""
        if direction == self.direction:
            return self
        return TravelModel(_replace(self.options, direction=direction), self.walk_grid)

    # ------------------------------------------------------------------ walks
    @property
    def walker(self):
        """What prices this model's walks (give it as ``walk=`` to
        :func:`~geo_reach.analysis.attach.attach_points` to attach with this model)."""
        return self._pricer

    def attach(self, network: Network, xy, *, roles=ROLES, always_join: bool = False,
               extra_walk_m: float = EXTRA_WALK_M, reach_m=None) -> Attachment:
        """Where each point joins ``network``, every leg priced by this model.

        Parameters
        ----------
        network : Network
        xy : array_like of float, shape (n, 2)
            Points in the network's working CRS, metres.
        roles : iterable of {'leave', 'arrive'}
            The walks to price (see :func:`~geo_reach.analysis.attach.attach_points`).
        always_join : bool, default False
            Points farther than ``max_access_m`` join at their nearest places
            all the same (settlements: their people count).
        reach_m : array_like of float, shape (n,), optional
            Offer each point every entry within this many metres, unpruned
            (see :func:`~geo_reach.analysis.attach.attach_points`).
        """
        return attach_points(network, xy, self.weight, max_access_m=self.max_access_m, walk_kmh=self.walk_kmh,
                             extra_walk_m=extra_walk_m, walk=self._pricer, roles=roles, always_join=always_join,
                             reach_m=reach_m)

    def least_walk_cost_per_m(self) -> float:
        """A lower bound on the cost of walking one metre of straight-line distance, in the weight's unit.

        Straight walks cost exactly ``weight.walk_cost(1 m)``.  On a friction
        grid a walk is a chain of pieces no shorter in all than the straight
        line, each at most as fast as the fastest cell (land cover) on its
        best slope (Tobler 1993), so the bound divides by that speed; a
        walked length (``length_m``) is never shorter than the straight line.
        0 where walking is free.
        """
        w = self.weight
        if not w.walk_costed:
            return 0.0
        if self.walk_grid is None or w.walk != "time":
            return float(w.walk_cost(1.0, self.walk_kmh))
        from .friction import TOBLER_BEST_SLOPE, slope_factor

        kmh = np.asarray(self.walk_grid.kmh, np.float64)
        top = max(float(np.nanmax(kmh)) if kmh.size else 0.0, self.walk_kmh) * float(slope_factor(TOBLER_BEST_SLOPE))
        return float(w.walk_cost(1.0, top))

    def walk(self, from_xy, to_xy):
        """Cost and walked length of walking from each ``from_xy[i]`` to ``to_xy[i]``.

        Returns
        -------
        cost : ndarray of float64, shape (n,)
            Weight unit; ``inf`` beyond ``max_access_m`` or where no walk
            gets through.
        walk_m : ndarray of float64, shape (n,)
            Walked length, metres.
        """
        a = np.asarray(from_xy, np.float64).reshape(-1, 2)
        b = np.asarray(to_xy, np.float64).reshape(-1, 2)
        n = len(a)
        pr = self._pricer.price(a, np.arange(n), b, ("leave",))
        far = np.hypot(*(b - a).T) > self.max_access_m if n else np.zeros(0, bool)
        return np.where(far, np.inf, pr.leave), np.where(far, np.inf, pr.walk_m)

    def direct(self, from_xy, to_xy) -> DirectWalks:
        """Every walk straight from a ``from_xy`` place to a ``to_xy`` place within ``max_access_m``.

        On weights where walking is free (``hops``, ``latency_ms``) only a
        place to itself (the same position) walks, at cost 0.
        """
        from scipy.spatial import cKDTree

        a = np.asarray(from_xy, np.float64).reshape(-1, 2)
        b = np.asarray(to_xy, np.float64).reshape(-1, 2)
        if not len(a) or not len(b):
            return DirectWalks.none()
        reach = self.max_access_m if self.weight.walk_costed else 0.0
        found = cKDTree(b).query_ball_point(a, reach + 1e-9)
        src = np.repeat(np.arange(len(a), dtype=np.int64), [len(f) for f in found])
        dst = np.concatenate([np.asarray(f, np.int64) for f in found]) if len(src) else np.zeros(0, np.int64)
        if not len(src):
            return DirectWalks.none()
        pr = self._pricer.price(a, src, b[dst], ("leave",))
        ok = np.isfinite(pr.leave)
        return DirectWalks(src[ok], dst[ok], pr.leave[ok], pr.walk_m[ok])

    # ------------------------------------------------------------------ trips
    def _attached(self, network, place, role):
        if isinstance(place, Attachment):
            return place
        return self.attach(network, place, roles=(role,))

    def _direct_between(self, a: Attachment, b: Attachment) -> DirectWalks:
        """Direct walks from the places of ``a`` to those of ``b``, both joined (a place left out stays out)."""
        ia, ib = np.nonzero(a.attached)[0], np.nonzero(b.attached)[0]
        d = self.direct(a.point_xy[ia], b.point_xy[ib])
        return DirectWalks(ia[d.src], ib[d.dst], d.cost, d.walk_m)

    def route(self, network: Network, origin, destination, *, exact: bool = False) -> Route:
        """The cheapest trip between two places (coordinates, or one-point attachments from :meth:`attach`).

        ``exact``: over every entry of both places, however far, as
        :meth:`hub_trips` with ``exact`` prices a settlement (one trip, one
        number); a trip the pruned entries do not find stays unfound.
        """
        o = self._attached(network, np.asarray(origin, np.float64).reshape(1, 2)
                           if not isinstance(origin, Attachment) else origin, "leave")
        d = self._attached(network, np.asarray(destination, np.float64).reshape(1, 2)
                           if not isinstance(destination, Attachment) else destination, "arrive")
        r = shortest_path(network, o, d, self.weight, direct=self._direct_between(o, d))
        per_m = self.least_walk_cost_per_m()
        if not exact or per_m <= 0 or not np.isfinite(r.cost):
            return r
        o, d = self._widened(network, o, [r.cost], "leave"), self._widened(network, d, [r.cost], "arrive")
        return shortest_path(network, o, d, self.weight, direct=self._direct_between(o, d))

    def _widened(self, network, att: Attachment, bound, role) -> Attachment:
        """``att`` plus every entry within ``bound / c`` metres of each joined point (``bound`` finite)."""
        bound = np.asarray(bound, np.float64)
        rows = att.attached & np.isfinite(bound) & (bound >= 0)
        if not rows.any():
            return att
        reach = np.where(rows, bound / self.least_walk_cost_per_m(), np.nan)
        return keep_legs(att, self.attach(network, att.point_xy, roles=(role,), reach_m=reach), rows)

    def od(self, network: Network, origins, destinations, *, batch: int | None = None,
           exact: bool = False) -> ODMatrix:
        """Cost and length of the cheapest trip from every origin to every destination.

        ``origins`` and ``destinations`` are coordinates (n, 2) or
        attachments made by :meth:`attach`; places left out (not joined to
        the network) get ``inf``, also for a trip to themselves.  ``exact``:
        as :meth:`route` (each origin widened by its dearest trip found,
        each destination by its own).
        """
        o = self._attached(network, origins, "leave")
        d = self._attached(network, destinations, "arrive")
        m = od_matrix(network, o, d, self.weight, batch=batch, direct=self._direct_between(o, d))
        if not exact or self.least_walk_cost_per_m() <= 0 or not m.cost.size:
            return m
        c = np.where(np.isfinite(m.cost), m.cost, -np.inf)
        o = self._widened(network, o, np.where(np.isfinite(c.max(axis=1)), c.max(axis=1), np.nan), "leave")
        d = self._widened(network, d, np.where(np.isfinite(c.max(axis=0)), c.max(axis=0), np.nan), "arrive")
        return od_matrix(network, o, d, self.weight, batch=batch, direct=self._direct_between(o, d))

    def nearest_hub(self, network: Network, hubs) -> NearestHub:
        """Every node's nearest hub and the cost of the trip (in the model's direction).

        ``hubs``: coordinates (n, 2) or an attachment made by :meth:`attach`.
        """
        role = "arrive" if self.options.reverse else "leave"
        return nearest_hub(network, self._attached(network, hubs, role), self.weight, self.direction)

    def hub_trips(self, network: Network, places, hubs, groups=None, *, exact: bool = False) -> dict:
        """Each place's trip to its nearest hub (in the model's direction), for all hubs and per group.

        Parameters
        ----------
        network : Network
        places, hubs : ndarray of float64, shape (n, 2), or Attachment
            Coordinates in the working CRS, or attachments from :meth:`attach`.
        groups : dict of name to array_like of int, optional
            Hub indices per group (e.g. per hub kind).

        exact : bool, default False
            Price each joined place's trip over *every* entry, however far
            (settlements, attached with ``always_join``): adding a road then
            never makes a trip dearer.  ``False``: the entries of
            :func:`~geo_reach.analysis.attach.attach_points` only.

        Returns
        -------
        dict of name to HubTrips
            ``None`` for all hubs, then each group (hub indices into
            ``hubs``, not the group).

        Notes
        -----
        With ``exact``, on weights where walking is costed, the trip is
        ``T*(p) = min over every entry a of the place and b of a hub of
        walk(a) + network(a, b) + walk(b)`` (and the direct walk), found in
        at most three passes:

        1. the pruned entries give a trip ``U(p)`` for all hubs and for each
           group (``inf`` if none);
        2. a place with no trip to some group is also offered every entry
           out to the nearest one from which that group's hubs are reached
           (node costs of :meth:`nearest_hub`), so ``U(p)`` is finite
           wherever ``T*(p)`` is;
        3. every entry whose straight distance is at most
           ``max U(p) / c`` is offered to the place, and to every hub out to
           ``max over places of U / c``, with ``c`` the least cost of
           walking a metre (:meth:`least_walk_cost_per_m`), unpruned.

        Exactness: a walk costs at least ``c`` per metre of straight
        distance, and a trip costs at least its walks, so the best trip's
        entries lie within ``T*(p) / c <= U(p) / c`` of the place and of its
        hub; pass 3 offers them all, and the search takes the cheapest.
        Monotonicity: a network with lines added keeps every old entry at
        the same walk, and no network cost between old entries grows
        (Cormen et al. 2009, ch. 24), so ``T*`` can only fall.  Hops and
        latency (free walks) keep the nearest-entry rule, which is not
        monotone.  Cost: up to two more attachments and searches per call.
        """
        to_hub = self.options.reverse
        p_att = self._attached(network, places, "leave" if to_hub else "arrive")
        h_att = self._attached(network, hubs, "arrive" if to_hub else "leave")
        out = self._hub_trips(network, p_att, h_att, groups)
        per_m = self.least_walk_cost_per_m()
        if not exact or per_m <= 0 or not p_att.n_points:
            return out
        role = ("leave",) if to_hub else ("arrive",)
        # A place whose pruned entries reach no hub (of some group): add every entry out to the nearest
        # one from which that group's hubs can be reached, so that a trip is found if one exists.
        costs = np.column_stack([t.cost for t in out.values()])
        need = p_att.attached & ~np.isfinite(costs).all(axis=1)
        if need.any():
            far = np.full(p_att.n_points, np.nan)
            for j, members in enumerate([None] + [np.asarray(m, np.int64) for m in (groups or {}).values()]):
                rows = need & ~np.isfinite(costs[:, j])
                if rows.any():
                    sub = h_att if members is None else h_att.subset(members)
                    d = _nearest_useful(network, self, sub, p_att.point_xy[rows])
                    far[rows] = np.fmax(far[rows], np.where(np.isfinite(d), d, np.nan))
            more = np.isfinite(far)
            if more.any():
                wide = self.attach(network, p_att.point_xy, roles=role, reach_m=np.where(more, far, np.nan))
                p_att = keep_legs(p_att, wide, more)
                out = self._hub_trips(network, p_att, h_att, groups)
                costs = np.column_stack([t.cost for t in out.values()])
        # Second pass: every entry whose walk alone costs no more than a trip already found (the dearest
        # over all hubs and every group, so each group's trip is exact too).
        bound = np.where(np.isfinite(costs), costs, -np.inf).max(axis=1)
        redo = p_att.attached & np.isfinite(bound) & (bound >= 0)
        if not redo.any():
            return out
        reach = np.where(redo, bound / per_m, np.nan)
        exact = self.attach(network, p_att.point_xy, roles=role, reach_m=reach)
        # the hubs' side of every such trip walks no more than the dearest of these trips either
        h_role = ("arrive",) if to_hub else ("leave",)
        h_redo = h_att.attached
        if h_redo.any():
            h_reach = np.where(h_redo, bound[redo].max() / per_m, np.nan)
            h_att = keep_legs(h_att, self.attach(network, h_att.point_xy, roles=h_role, reach_m=h_reach), h_redo)
        return self._hub_trips(network, keep_legs(p_att, exact, redo), h_att, groups)

    def _hub_trips(self, network, p_att, h_att, groups) -> dict:
        to_hub = self.options.reverse
        direct = self._direct_between(p_att, h_att) if to_hub else self._direct_between(h_att, p_att)
        out = {None: nearest_hub_trips(network, p_att, h_att, self.weight, self.direction, direct=direct)}
        for name, members in (groups or {}).items():
            members = np.asarray(members, np.int64)
            sub = direct.subset(dst=members) if to_hub else direct.subset(src=members)
            t = nearest_hub_trips(network, p_att, h_att.subset(members), self.weight, self.direction, direct=sub)
            hub = np.where(t.hub >= 0, members[np.maximum(t.hub, 0)], -1)
            out[name] = HubTrips(t.cost, hub, t.network_m)
        return out


def keep_legs(first: Attachment, second: Attachment, rows) -> Attachment:
    """``first``'s legs plus ``second``'s legs of the points in ``rows`` (mask), sorted by point."""
    take = np.asarray(rows, bool)[second.leg_point]
    cols = [np.concatenate([getattr(first, f), getattr(second, f)[take]])
            for f in ("leg_point", "leg_edge", "leg_node", "leg_fraction", "leg_walk_m", "leg_leave_cost",
                      "leg_arrive_cost")]
    order = np.argsort(cols[0], kind="stable")
    return Attachment(first.weight, first.walk_kmh, first.max_access_m, first.point_xy, first.access_m,
                      *(c[order] for c in cols), blocked=first.blocked)


def _nearest_useful(network: Network, model: "TravelModel", hubs: Attachment, xy) -> np.ndarray:
    """Straight distance (m) from each point to the nearest entry from which a trip reaches ``hubs``.

    An entry is useful when the leg's arcs (see ``Attachment.arc_detail``) lead to a node with a finite
    cost to (``to-hub``) or from (``from-hub``) the nearest hub; where there is none, the farthest edge a
    hub stands on (a trip along that edge only).  ``inf`` where there is neither.
    """
    import shapely

    from .attach import _entry_places

    if not len(xy):
        return np.zeros(0)
    node_cost = model.nearest_hub(network, hubs).cost
    ok = np.isfinite(node_cost)
    places = _entry_places(network, model.weight)
    along, nodes = places["along"], places["nodes"]
    one = network.edge_oneway[along]
    ahead, back = (network.edge_to, network.edge_from) if model.options.reverse else \
        (network.edge_from, network.edge_to)
    useful = along[ok[ahead[along]] | (~one & ok[back[along]])]
    pts = shapely.points(xy[:, 0], xy[:, 1])
    d = np.full(len(xy), np.inf)
    if len(useful):
        tree = shapely.STRtree(network.edge_geometry[useful])
        (qi, _), dist = tree.query_nearest(pts, return_distance=True, all_matches=False)
        d[qi] = np.minimum(d[qi], dist)
    good = nodes[ok[nodes]]
    if len(good):
        from scipy.spatial import cKDTree

        d = np.minimum(d, cKDTree(np.column_stack([network.node_x[good], network.node_y[good]])).query(xy)[0])
    # no such node: the trip can only ride the edge a hub stands on (one-way, from its start); offer every
    # edge out to the farthest of those
    on = np.unique(hubs.leg_edge[hubs.leg_edge >= 0])
    lost = ~np.isfinite(d)
    if lost.any() and len(on):
        far = shapely.distance(pts[lost][:, None], network.edge_geometry[on][None, :]).max(axis=1)
        d[lost] = far
    return d

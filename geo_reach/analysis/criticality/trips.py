"""Everyone's cheapest trip to the nearest hub of each kind, kept so that changes can be repaired.

:class:`HubTrips` is the baseline every criticality question starts from:
the hubs and the places where people live (settlements, or the nodes
themselves) joined to the network by their walk legs
(:func:`~geo_reach.analysis.attach.attach_points`), and one
:class:`~.forest.HubForest` per hub kind.  From it:

* :meth:`HubTrips.close` - the trips after closing a set of links (hazard
  closures): the baseline's walk legs stay, those entering a closed link
  are gone, and only the subtrees below the closed links are searched again;
* :meth:`HubTrips.update` - the trips on a changed, id-stable network (a
  scenario that adds, upgrades or closes links, or adds or removes hubs),
  from the baseline's forests (:func:`~.incremental.update_forest`); the
  points are attached to the changed network as the full path does, so the
  result equals :meth:`HubTrips.prepare` on the changed network;
* :func:`~.links.link_criticality` - every link closed in turn.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ...errors import LayerError, OptionError
from ..attach import EXTRA_WALK_M, attach_points
from . import _kernels as K
from .forest import grow_forest
from .graph import Places, SearchGraph, Seeds, check_direction, check_weight
from .incremental import GraphChange, network_change, update_forest

__all__ = ["HubTrips", "Closure", "kind_names"]


def kind_names(kinds):
    """Field-name part of each hub kind, and the sorted distinct names.

    Returns (index per hub into the names, names, original kind per name).
    With no kinds every hub is of kind ``hub``.

    Raises
    ------
    LayerError
        Two kinds give the same field name.
    """
    from ..access import kind_name

    if kinds is None:
        return None, ["hub"], ["hub"]
    kinds = np.asarray(kinds, dtype=object)
    names = {}
    for k in dict.fromkeys(kinds.tolist()):
        nm = kind_name(k)
        if nm in names and names[nm] != k:
            raise LayerError(f"hub kinds {names[nm]!r} and {k!r} give the same field name '{nm}'; rename one of them")
        names[nm] = k
    order = sorted(names)
    pos = {names[nm]: i for i, nm in enumerate(order)}
    return np.array([pos[k] for k in kinds], np.int64), order, [names[nm] for nm in order]


@dataclass(eq=False)
class Closure:
    """Trips after closing some links (from :meth:`HubTrips.close`).

    Attributes
    ----------
    closed : ndarray of int64
        The closed edges.
    forests : list of HubForest
        Per kind, after the closure.
    place_cost : ndarray of float64, shape (n_kinds, n_places)
        Per kind, each place's cost after (``inf`` = cut off); places are the
        settlements, or the nodes when none were given.
    work : int
        Settlements plus scans of the repairs (the units of ``HubForest.work``).
    """

    closed: np.ndarray
    forests: list
    place_cost: np.ndarray
    work: int


@dataclass(eq=False)
class HubTrips:
    """The baseline: hubs, people and one forest of cheapest trips per hub kind.

    Build it with :meth:`prepare`.

    Attributes
    ----------
    network : Network
    weight, direction : str
    hub_xy : ndarray, shape (n_hubs, 2)
        Working CRS, metres.
    hub_ids : ndarray of object
    hub_kind : ndarray of int64
        Index of each hub's kind into ``kinds``.
    kinds : list of str
        Field-name parts of the kinds (``['hub']`` when no kinds are given).
    has_kinds : bool
        Whether kinds were given (per-kind fields are written only then).
    hub_att : Attachment
    seeds : list of Seeds
        Per kind.
    forests : list of HubForest
        Per kind.
    place_att : Attachment or None
        The settlements' legs; ``None`` when nodes stand in for people.
    place_ids : ndarray
    people : ndarray of float64
        People per place (per node when there are no settlements: 1 each).
    places : Places
        The kernels' view of the settlements (empty when none).
    place_cost : ndarray of float64, shape (n_kinds, n_places)
        Baseline cost per kind and place (per node when no settlements).
    options : dict
        ``max_access_m``, ``walk_kmh``, ``extra_walk_m`` of the attachment.
    update_work : dict
        After :meth:`update`: the work per kind.
    """

    network: object
    weight: str
    direction: str
    hub_xy: np.ndarray
    hub_ids: np.ndarray
    hub_kind: np.ndarray
    kinds: list
    has_kinds: bool
    hub_att: object
    seeds: list
    forests: list
    place_att: object
    place_ids: np.ndarray
    people: np.ndarray
    places: Places
    place_cost: np.ndarray
    options: dict = field(default_factory=dict)
    _graph: SearchGraph | None = None
    update_work: dict = field(default_factory=dict)
    travel: object = None   # the TravelModel pricing walks (straight walks when none was given)

    # ------------------------------------------------------------------ build
    @classmethod
    def prepare(cls, network, hub_xy, hub_ids=None, hub_kinds=None, *, weight: str = "minutes",
                direction: str = "to-hub", place_xy=None, people=None, place_ids=None,
                max_access_m: float = 5000.0, walk_kmh: float = 5.0, extra_walk_m: float = EXTRA_WALK_M,
                graph: SearchGraph | None = None, travel=None) -> "HubTrips":
        """Attach hubs (and settlements) and grow one forest per hub kind.

        Parameters
        ----------
        network : Network
        hub_xy : array_like, shape (n_hubs, 2)
            Hub points in the working CRS (metres).
        hub_ids : array_like, optional
            Default: 1..n_hubs.
        hub_kinds : array_like of str, optional
            One forest per kind; without kinds, one for all hubs.
        weight : str, default 'minutes'
        direction : {'to-hub', 'from-hub'}, default 'to-hub'
        place_xy, people, place_ids : array_like, optional
            Settlements (working CRS, metres), their people and ids.  Without
            them every node stands in for one person.
        max_access_m, walk_kmh, extra_walk_m : float
            As :func:`~geo_reach.analysis.attach.attach_points`.
        graph : SearchGraph, optional
            The network's arcs when already made.
        travel : TravelModel, optional
            The run's travel model (:class:`geo_reach.analysis.travel.TravelModel`):
            hubs and settlements then walk to the network as it prices walks
            (terrain, land cover, barriers); its ``max_access_m`` and
            ``walk_kmh`` replace the ones given here.  Default: straight walks.

        Raises
        ------
        OptionError
            Unknown weight or direction, people without places, negative people.
        LayerError
            Two hub kinds give the same field name.
        """
        check_weight(weight)
        check_direction(direction)
        hub_xy = np.asarray(hub_xy, np.float64).reshape(-1, 2)
        H = len(hub_xy)
        hub_ids = np.arange(1, H + 1).astype(object) if hub_ids is None else np.asarray(hub_ids, dtype=object)
        hk, kinds, _ = kind_names(hub_kinds)
        has_kinds = hk is not None
        hk = np.zeros(H, np.int64) if hk is None else hk
        opts = dict(max_access_m=float(max_access_m), walk_kmh=float(walk_kmh), extra_walk_m=float(extra_walk_m))
        if travel is not None:
            t = travel.for_weight(weight)
            opts.update(max_access_m=float(t.max_access_m), walk_kmh=float(t.walk_kmh), walk=t.walker)
        graph = graph if graph is not None else SearchGraph.from_network(network, weight, direction)
        att = attach_points(network, hub_xy, weight, **opts)
        seeds = [Seeds.from_attachment(network, att, direction, hubs=np.nonzero(hk == k)[0])
                 for k in range(len(kinds))]
        forests = [grow_forest(graph, s) for s in seeds]
        out = cls(network, weight, direction, hub_xy, hub_ids, hk, kinds, has_kinds, att, seeds, forests,
                  None, np.zeros(0, object), np.zeros(0), Places.empty(network.n_nodes, network.n_edges, len(kinds)),
                  np.zeros((len(kinds), 0)), opts, graph)
        out.travel = travel
        out._set_places(place_xy, people, place_ids)
        return out

    def _model(self):
        """The travel model for this weight and direction (straight walks when the caller gave none)."""
        from ..options import RoutingOptions
        from ..travel import TravelModel

        t = self.travel if self.travel is not None else TravelModel(RoutingOptions(
            weight=self.weight, direction=self.direction, max_access_m=self.options["max_access_m"],
            walk_kmh=self.options["walk_kmh"]))
        return t.for_weight(self.weight).for_direction(self.direction)

    def _direct_walks(self, xy):
        """Walks straight between each place and each hub within reach, as (place, hub, cost)."""
        t = self._model()
        if check_direction(self.direction):
            w = t.direct(xy, self.hub_xy)
            return w.src, w.dst, w.cost
        w = t.direct(self.hub_xy, xy)
        return w.dst, w.src, w.cost

    def _set_places(self, place_xy, people, place_ids):
        net = self.network
        nk = len(self.kinds)
        if place_xy is None:
            if people is not None:
                raise OptionError("people given without the places they live at")
            self.place_att = None
            self.place_ids = np.arange(net.n_nodes)
            self.people = np.ones(net.n_nodes)
            self.places = Places.empty(net.n_nodes, net.n_edges, nk)
            self.place_cost = self._place_costs(self.forests, None)
            return
        xy = np.asarray(place_xy, np.float64).reshape(-1, 2)
        pp = np.ones(len(xy)) if people is None else np.asarray(people, np.float64)
        if len(pp) != len(xy):
            raise OptionError(f"{len(pp)} people values for {len(xy)} places")
        if np.any(~np.isfinite(pp)) or np.any(pp < 0):
            raise OptionError("people per place must be finite and zero or more")
        att = attach_points(net, xy, self.weight, **self.options)
        self.place_att = att
        self.place_ids = np.arange(1, len(xy) + 1).astype(object) if place_ids is None else np.asarray(place_ids, object)
        self.people = pp
        self.places = Places.from_attachment(net, att, pp, self.direction, self.hub_att, self.hub_kind, nk,
                                             walks=self._direct_walks(xy))
        self.place_cost = self._place_costs(self.forests, np.zeros(net.n_edges, np.bool_))

    def _place_costs(self, forests, closed):
        pl = self.places
        if not forests:
            return np.zeros((0, self.network.n_nodes if self.place_att is None else self.place_att.n_points))
        if self.place_att is None:
            return np.stack([f.cost for f in forests])
        return np.stack([K.place_costs(f.cost, closed, pl.leg_ptr, pl.leg_node, pl.leg_cost, pl.leg_edge,
                                       pl.dir_ptr[k], pl.dir_cost, pl.dir_edge) for k, f in enumerate(forests)])

    # ------------------------------------------------------------------ views
    @property
    def graph(self) -> SearchGraph:
        """The network's arcs in the search direction (made on first use)."""
        if self._graph is None:
            self._graph = SearchGraph.from_network(self.network, self.weight, self.direction)
        return self._graph

    @property
    def has_places(self) -> bool:
        return self.place_att is not None

    def kind_costs(self) -> dict:
        """``{kind: (cost, hub)}`` per node, as :class:`~geo_reach.analysis.access.HubAccess` gives them.

        ``cost`` is NaN where no hub of the kind is reachable, ``hub`` the
        hub's index (-1 = none).
        """
        return {k: (np.where(np.isfinite(f.cost), f.cost, np.nan), f.hub.copy())
                for k, f in zip(self.kinds, self.forests)}

    def nearest_any(self):
        """(cost, hub) per node to the nearest hub of any kind (ties: the lowest hub index)."""
        cost = np.full(self.network.n_nodes, np.inf)
        hub = np.full(self.network.n_nodes, -1, np.int64)
        for f in self.forests:
            big = np.where(hub < 0, K.NO_HUB, hub)
            fh = np.where(f.hub < 0, K.NO_HUB, f.hub)
            take = (f.cost < cost) | ((f.cost == cost) & (fh < big))
            cost = np.where(take, f.cost, cost)
            hub = np.where(take, f.hub, hub)
        return cost, hub

    # ------------------------------------------------------------------ closures
    def close(self, edges) -> Closure:
        """The trips with ``edges`` closed (the baseline's legs stay, except those entering them).

        Only the subtrees below the closed links are searched again.
        """
        net = self.network
        change = GraphChange.closing(self.graph, edges)
        mask = np.zeros(net.n_edges, np.bool_)
        mask[change.removed] = True
        forests, work = [], 0
        for s, f in zip(self.seeds, self.forests):
            nf = update_forest(self.graph, f, change, s.without_edges(mask), old_seeds=s)
            forests.append(nf)
            work += nf.work
        return Closure(change.removed, forests, self._place_costs(forests, mask), work)

    # ------------------------------------------------------------------ scenarios
    def update(self, new_network, *, edges=None, hub_xy=None, hub_ids=None, hub_kinds=None,
               place_xy=None, people=None, place_ids=None, full: bool = False) -> "HubTrips":
        """The trips on a changed, id-stable network, repaired from these (see :mod:`.incremental`).

        Parameters
        ----------
        new_network : Network
            Keeps every base node and edge id; new ones appended; closed
            links have a NaN cost (or are changed in place).
        edges : array_like of int, optional
            The base edges changed, when the caller knows them (saves a
            comparison of every edge).
        hub_xy, hub_ids, hub_kinds : optional
            The hubs of the scenario (default: the baseline's).  Hubs are
            matched by id; a hub that keeps its id keeps its place in the
            order, so ties resolve as in a full run.
        place_xy, people, place_ids : optional
            The settlements (default: the baseline's).
        full : bool, default False
            Grow every forest from scratch instead (the reference path).

        Returns
        -------
        HubTrips
            Its ``update_work`` holds the work per kind (settlements plus scans).
        """
        net = new_network
        if hub_xy is None:
            hub_xy, hub_ids, kinds_in = self.hub_xy, self.hub_ids, (
                np.asarray(self.kinds, object)[self.hub_kind] if self.has_kinds else None)
        else:
            kinds_in = hub_kinds
        hub_xy = np.asarray(hub_xy, np.float64).reshape(-1, 2)
        H = len(hub_xy)
        hub_ids = np.arange(1, H + 1).astype(object) if hub_ids is None else np.asarray(hub_ids, object)
        hk, kinds, _ = kind_names(kinds_in)
        has_kinds = hk is not None
        hk = np.zeros(H, np.int64) if hk is None else hk
        att = attach_points(net, hub_xy, self.weight, **self.options)
        # base hub -> new hub, by id (and kind)
        pos = {h: i for i, h in enumerate(hub_ids.tolist())}
        hub_map = np.array([pos.get(h, -1) for h in self.hub_ids.tolist()], np.int64)
        same_kind = np.array([j < 0 or kinds[hk[j]] == self.kinds[self.hub_kind[i]]
                              for i, j in enumerate(hub_map)], bool)
        hub_map[~same_kind] = -1
        kept = hub_map[hub_map >= 0]
        ordered = bool(np.all(np.diff(kept) > 0))
        change = None if full else network_change(self.network, net, self.weight, self.direction, edges)
        graph = None
        seeds, forests, work = [], [], {}
        for k, name in enumerate(kinds):
            s = Seeds.from_attachment(net, att, self.direction, hubs=np.nonzero(hk == k)[0])
            seeds.append(s)
            if not full and ordered and name in self.kinds:
                kb = self.kinds.index(name)
                f = update_forest(self.graph, self.forests[kb], change, s, hub_map, old_seeds=self.seeds[kb])
            else:
                if graph is None:
                    graph = SearchGraph.from_network(net, self.weight, self.direction)
                f = grow_forest(graph, s)
            forests.append(f)
            work[name] = f.work
        opts = dict(self.options)
        out = HubTrips(net, self.weight, self.direction, hub_xy, hub_ids, hk, kinds, has_kinds, att, seeds,
                       forests, None, np.zeros(0, object), np.zeros(0),
                       Places.empty(net.n_nodes, net.n_edges, len(kinds)), np.zeros((len(kinds), 0)), opts, graph)
        if place_xy is None and self.has_places:
            place_xy, people, place_ids = self.place_att.point_xy, self.people, self.place_ids
        out.travel = self.travel
        out._set_places(place_xy, people, place_ids)
        out.update_work = work
        return out

"""Hub access for every node: the nearest hub (per kind) and its cost, and what each hub serves.

One code path for ``geo-reach access`` and for the access step of a study run.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import LayerError
from .options import RoutingOptions

__all__ = ["HubAccess", "Repair", "hub_access", "kind_name", "kind_groups"]


def kind_name(kind) -> str:
    """A hub kind as a field-name part: lower case, letters/digits/underscore.

    >>> kind_name("Health Post")
    'health_post'
    """
    s = re.sub(r"[^0-9a-z]+", "_", str(kind).strip().lower()).strip("_")
    return s or "kind"


def kind_groups(kinds) -> list:
    """``(field-name part, hub indices)`` per hub kind, sorted by name.

    Raises
    ------
    LayerError
        Two kinds would give the same field name.

    >>> [(n, m.tolist()) for n, m in kind_groups(["Clinic", "market", "clinic "])]
    Traceback (most recent call last):
    ...
    geo_reach.errors.LayerError: hub kinds 'Clinic' and 'clinic ' give the same field name 'clinic'; rename one of them
    >>> [(n, m.tolist()) for n, m in kind_groups(["clinic", "market", "clinic"])]
    [('clinic', [0, 2]), ('market', [1])]
    """
    kinds = np.asarray(kinds, dtype=object)
    names = {}
    for k in pd.unique(kinds):
        nm = kind_name(k)
        if nm in names and names[nm] != k:
            raise LayerError(f"hub kinds {names[nm]!r} and {k!r} give the same field name '{nm}'; "
                             "rename one of them")
        names[nm] = k
    return [(nm, np.nonzero(kinds == k)[0]) for nm, k in sorted(names.items())]


@dataclass
class HubAccess:
    """Result of :func:`hub_access`.

    Attributes
    ----------
    node_fields : dict of str to ndarray, each shape (n_nodes,)
        ``nearest_hub`` and ``hub_cost`` for all hubs, then
        ``nearest_hub_<kind>`` and ``hub_cost_<kind>`` per kind (nulls where
        no hub is reachable).  Costs are in the weight's unit (``weight``).
    node_cost : ndarray of float64, shape (n_nodes,)
        Cost to the nearest hub of any kind (NaN = none reachable).
    node_hub : ndarray of int64, shape (n_nodes,)
        0-based index of that hub (-1 = none).
    kind_costs : dict of kind to (cost, hub index) arrays
    hubs : pandas.DataFrame, one row per hub
        ``hub_id``, ``kind`` (when kinds are given), ``joined`` (1 when the
        hub joins the network within reach), ``access_m``, ``served_nodes``,
        ``served_length_m``, ``component``, ``isolated`` (1 when the hub's
        component holds no other hub and is not the largest).
    weight : Weight
        The weight of every cost here.
    notes : list of str
        What was left out or is suspect (hubs beyond reach, hubs alone in a
        component, nodes reaching no hub).
    forests : dict
        Per group (``None`` = all hubs, else the kind's field-name part):
        ``(graph, seeds, forest)`` - the search graph (None when the forest
        was repaired), the hubs' legs and the
        :class:`~geo_reach.analysis.criticality.forest.HubForest` the costs
        come from.  A scenario repairs them (:class:`Repair`).
    work : int
        Node settlements plus arc and seed scans of the searches or repairs.
    """

    node_fields: dict
    node_cost: np.ndarray
    node_hub: np.ndarray
    kind_costs: dict
    hubs: pd.DataFrame
    weight: object = None
    notes: list = field(default_factory=list)
    forests: dict = field(default_factory=dict)
    work: int = 0


@dataclass(frozen=True, eq=False)
class Repair:
    """What :func:`hub_access` needs to repair a baseline's forests instead of searching a changed network.

    Attributes
    ----------
    base : HubAccess
        The baseline's access (its ``forests``, grown on ``network``).
    network : Network
        The baseline network.  The changed network keeps its node and edge
        ids (see :mod:`geo_reach.analysis.criticality.incremental`).
    edges : ndarray of int64
        The base edges whose cost, direction or ends changed.
    hub_map : ndarray of int64
        Each base hub's index among the new hubs (-1 = removed), keeping the
        order of the hubs that stay.
    """

    base: HubAccess
    network: object
    edges: np.ndarray
    hub_map: np.ndarray


def _id_column(values, present):
    vals = np.asarray(values, dtype=object)
    if len(vals) and all(isinstance(v, (int, np.integer)) for v in vals[present]):
        out = pd.array(np.where(present, vals, 0).astype(np.int64), dtype="Int64")
        out[~present] = pd.NA
        return out
    return pd.Series(np.where(present, vals, None), dtype=object).to_numpy()


def hub_access(network, xy, ids, kinds=None, options: RoutingOptions | None = None, *, travel=None,
               repair: Repair | None = None) -> HubAccess:
    """Nearest hub and cost for every node, for all hubs and per hub kind.

    Parameters
    ----------
    network : Network
    xy : ndarray of float64, shape (n_hubs, 2)
        Hub points in the network's working CRS (metres).
    ids : array_like, shape (n_hubs,)
        Hub ids (written in ``nearest_*`` fields).
    kinds : array_like of str, shape (n_hubs,), optional
        Hub kinds; each kind gets its own pair of fields.
    options : RoutingOptions, optional
        Weight, direction and the walk to the network (defaults if not given;
        ignored when ``travel`` is given).
    travel : TravelModel, optional
        The run's travel model: how each hub's walk to and from the network
        is priced (default: straight-line walking with ``options``).
    repair : Repair, optional
        ``network`` is a baseline's network changed in place (ids kept):
        each group's forest is repaired from the baseline's
        (:func:`~geo_reach.analysis.criticality.incremental.update_forest`)
        instead of grown again.  Every result is identical to the search
        from scratch.

    Returns
    -------
    HubAccess

    Notes
    -----
    One multi-source Dijkstra search [1]_ per group (all hubs, then each
    kind), compiled (:func:`~geo_reach.analysis.criticality.forest.grow_forest`):
    O((n + m) log n) each.  Ties between equally cheap hubs go to the lowest
    hub index.  A repair touches only the nodes whose trip changes [2]_.

    References
    ----------
    .. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
       graphs. Numerische Mathematik 1, 269-271.
    .. [2] Ramalingam, G. and Reps, T. (1996). An incremental algorithm for a
       generalization of the shortest-path problem. Journal of Algorithms
       21(2), 267-305 (from memory).

    Raises
    ------
    LayerError
        Two kinds would give the same field name.
    """
    from .travel import TravelModel

    net = network
    if travel is None:
        travel = TravelModel(options if options is not None else RoutingOptions())
    opt = travel.options
    weight = opt.weight
    ids = np.asarray(ids, dtype=object)
    n_hub = len(ids)
    groups = [(None, np.arange(n_hub))]
    if kinds is not None:
        kinds = np.asarray(kinds, dtype=object)
        groups += kind_groups(kinds)
    notes = []
    fields = {}
    attached = np.zeros(n_hub, bool)
    access_m = np.full(n_hub, np.inf)
    comp = np.full(n_hub, -1, np.int64)
    node_cost = node_hub = None
    kind_costs = {}
    role = "arrive" if opt.reverse else "leave"
    every = travel.attach(net, np.asarray(xy, np.float64).reshape(-1, 2), roles=(role,))   # each hub walks once
    forests, work = _forests(net, every, groups, weight, opt.direction, repair)
    for name, members in groups:
        att = every if name is None else every.subset(members)
        f = forests[name][2]
        cost, hub_all = f.cost, f.hub          # hub: index into all hubs (the seeds' labels)
        has = (hub_all >= 0) & np.isfinite(cost)
        cost = np.where(has, cost, np.nan)
        hub_all = np.where(has, hub_all, -1)
        col_id = "nearest_hub" if name is None else f"nearest_hub_{name}"
        col_cost = "hub_cost" if name is None else f"hub_cost_{name}"
        per_node = np.empty(net.n_nodes, dtype=object)
        per_node[has] = ids[hub_all[has]]
        fields[col_id] = _id_column(per_node, has)
        fields[col_cost] = cost
        if name is None:
            node_cost, node_hub = cost, hub_all
            attached[:] = att.attached
            access_m[:] = att.access_m
            first_leg = np.full(n_hub, -1)
            first_leg[att.leg_point[::-1]] = np.arange(len(att.leg_point))[::-1]
            for i, lg in enumerate(first_leg):
                if lg >= 0:
                    nd = att.leg_node[lg] if att.leg_edge[lg] < 0 else net.edge_from[att.leg_edge[lg]]
                    comp[i] = net.component[nd]
            left = np.nonzero(~att.attached & ~att.blocked)[0]
            if len(left):
                sample = ", ".join(f"id {ids[i]} ({att.access_m[i]:,.0f} m)" if np.isfinite(att.access_m[i])
                                   else f"id {ids[i]} (no network to join)" for i in left[:3])
                notes.append(f"{len(left)} hubs farther than the largest access distance ({opt.max_access_m:g} m) "
                             f"from the network are left out: {sample}{' ...' if len(left) > 3 else ''}")
            shut = np.nonzero(att.blocked)[0]
            if len(shut):
                notes.append(f"{len(shut)} hubs cannot walk to any place to join the network within "
                             f"{opt.max_access_m:g} m (barriers or impassable ground all round) and are left out: "
                             + ", ".join(f"id {ids[i]}" for i in shut[:3]) + (" ..." if len(shut) > 3 else ""))
        else:
            kind_costs[name] = (cost, hub_all)
        unreached = int((~has).sum())
        if unreached:
            notes.append(f"{unreached} of {net.n_nodes} nodes reach no {'hub' if name is None else name} "
                         f"(null {col_id}, {col_cost})")
    # what each hub serves (all kinds together): nodes, and half of each routable edge per end
    served_nodes = np.bincount(node_hub[node_hub >= 0], minlength=n_hub)
    half = np.where(np.isnan(net.cost(weight)), 0.0, net.edge_length_m) / 2.0
    served_len = np.zeros(n_hub)
    for end in (net.edge_from, net.edge_to):
        h = node_hub[end]
        ok = h >= 0
        served_len += np.bincount(h[ok], weights=half[ok], minlength=n_hub)
    alone = np.array([comp[i] > 0 and np.sum(comp == comp[i]) == 1 for i in range(n_hub)], dtype=bool)
    if alone.any():
        first = np.nonzero(alone)[0][:3]
        notes.append(f"{int(alone.sum())} hubs are alone in a component of their own, cut off from the largest "
                     "network component: " + ", ".join(f"id {ids[i]} (component {comp[i]}, "
                                                       f"{int(np.sum(net.component == comp[i]))} nodes)" for i in first))
    data = {"hub_id": ids}
    if kinds is not None:
        data["kind"] = kinds
    data.update({"joined": attached.astype(np.int32),
                 "access_m": np.where(np.isfinite(access_m), access_m, np.nan),
                 "served_nodes": served_nodes, "served_length_m": served_len,
                 "component": comp, "isolated": alone.astype(np.int32)})
    frame = pd.DataFrame(data)
    if all(isinstance(v, (int, np.integer)) for v in ids):
        frame["hub_id"] = frame["hub_id"].astype(np.int64)
    return HubAccess(fields, node_cost, node_hub, kind_costs, frame, weight, notes, forests, work)


def _forests(net, every, groups, weight, direction, repair):
    """Per group, ``(graph, seeds, forest)``: grown from scratch, or repaired from ``repair.base``."""
    from .criticality import SearchGraph, Seeds, grow_forest, network_change, update_forest

    out, work, graph, change = {}, 0, None, None
    for name, members in groups:
        seeds = Seeds.from_attachment(net, every, direction, hubs=members)
        old = repair.base.forests.get(name) if repair is not None else None
        if old is not None and old[0] is not None:
            if change is None:
                change = network_change(repair.network, net, weight.name, direction, repair.edges)
            f = update_forest(old[0], old[2], change, seeds, repair.hub_map, old_seeds=old[1])
            out[name] = (None, seeds, f)
        else:
            if graph is None:
                graph = SearchGraph.from_network(net, weight.name, direction)
            f = grow_forest(graph, seeds)
            out[name] = (graph, seeds, f)
        work += f.work
    return out, int(work)

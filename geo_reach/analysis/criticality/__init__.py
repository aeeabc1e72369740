"""Criticality: which closure hurts most, hazard closures, and incremental updates of hub trips.

Planners ask "if this bridge washes out, who is cut off from the clinic, and
how much longer do the others travel?".  This package answers it for every
link at once, for one real event that closes many links, and for scenarios
that change a few links, always by repairing the baseline's forest of
cheapest trips to the nearest hub rather than searching the whole network
again.

Modules
-------
``graph``        the arcs in the search direction, hub seeds and people's legs
``forest``       :class:`HubForest` and :func:`grow_forest` (the full search)
``incremental``  :func:`update_forest` after a change (closures repaired,
                 decreases spread), :func:`network_change`, :class:`GraphChange`
``trips``        :class:`HubTrips`: hubs, people and one forest per hub kind;
                 :meth:`HubTrips.close`, :meth:`HubTrips.update`
``links``        :func:`link_criticality`: every link closed in turn
``hazard``       :func:`hazard_links`, :func:`raster_hazard`, :func:`hazard_impact`
``_kernels``     the compiled (numba) search and repair kernels

What the scenario runner calls::

    base = HubTrips.prepare(net, hubs.xy, hubs.ids, hubs.kinds, weight=w, direction=d,
                            place_xy=xy, people=pop, max_access_m=a, walk_kmh=v)
    scen = base.update(changed_net, edges=changed_edge_ids,       # id-stable network
                       hub_xy=..., hub_ids=..., hub_kinds=...)    # when hubs change
    scen.kind_costs()      # {kind: (cost per node, NaN = none; hub index, -1 = none)}
    scen.place_cost        # (n_kinds, n_places) per settlement

Results are model estimates; local surveys, codes and licensed professional
practice decide.

References
----------
.. [1] Jenelius, E., Petersen, T. and Mattsson, L.-G. (2006). Importance
   and exposure in road network vulnerability analysis. Transportation
   Research Part A 40(7), 537-560.
.. [2] Scott, D. M., Novak, D. C., Aultman-Hall, L. and Guo, F. (2006).
   Network Robustness Index: a new method for identifying critical links
   and evaluating the performance of transportation networks. Journal of
   Transport Geography 14(3), 215-227.
.. [3] Ramalingam, G. and Reps, T. (1996). An incremental algorithm for a
   generalization of the shortest-path problem. Journal of Algorithms
   21(2), 267-305 (from memory).
.. [4] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from .forest import HubForest, grow_forest
from .graph import Places, SearchGraph, Seeds
from .hazard import (HazardImpact, HazardLinks, grade_separated, hazard_impact, hazard_layers, hazard_links,
                     raster_hazard)
from .incremental import GraphChange, changed_seeds, network_change, update_forest
from .links import LinkCriticality, UnknownLinkError, added_field, check_links, link_criticality, read_link_ids
from .trips import Closure, HubTrips

__all__ = [
    "HubForest", "grow_forest", "SearchGraph", "Seeds", "Places",
    "GraphChange", "network_change", "update_forest", "changed_seeds",
    "HubTrips", "Closure",
    "LinkCriticality", "link_criticality", "added_field", "check_links", "read_link_ids", "UnknownLinkError",
    "HazardLinks", "HazardImpact", "hazard_links", "raster_hazard", "hazard_impact", "grade_separated", "hazard_layers",
]

"""Analysis: routing, network figures, reach profiles, travel-time surfaces, bands and weak regions.

Arrays in, arrays out; every function takes a
:class:`~geo_reach.network.model.Network` and typed options, and returns
arrays or small result objects.  Geometry is attached only where a result is
a layer.  The most used functions are re-exported here; the modules hold the
rest.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from .access import HubAccess, hub_access
from .attach import Attachment, attach_points
from .metrics import diameter, global_efficiency, mean_path, network_figures
from .options import DIRECTIONS, MetricsOptions, RoutingOptions, SurfaceOptions
from .profile import ReachProfile, reach_profile, sample_profile
from .routing import NearestHub, excluded_edges, nearest_hub, nearest_hub_route_m, one_to_all
from .surface import SurfaceResult, compute_surface
from .trips import ODMatrix, Route, od_matrix, shortest_path

__all__ = [
    "HubAccess", "hub_access", "Attachment", "attach_points",
    "diameter", "global_efficiency", "mean_path", "network_figures",
    "DIRECTIONS", "MetricsOptions", "RoutingOptions", "SurfaceOptions",
    "ReachProfile", "reach_profile", "sample_profile",
    "NearestHub", "excluded_edges", "nearest_hub", "nearest_hub_route_m", "one_to_all",
    "SurfaceResult", "compute_surface", "ODMatrix", "Route", "od_matrix", "shortest_path",
]

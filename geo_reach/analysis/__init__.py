"""Analysis: routing, network figures, reach profiles, travel-time surfaces, bands and weak regions.

Arrays in, arrays out; every function takes a
:class:`~geo_reach.network.model.Network` and typed options, and returns
arrays or small result objects.  Geometry is attached only where a result is
a layer.  The most used functions are re-exported here; the modules hold the
rest.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

#: Public name -> the module that defines it (imported on first use, so start-up stays fast).
_API = {
    "HubAccess": ".access",
    "hub_access": ".access",
    "Attachment": ".attach",
    "attach_points": ".attach",
    "DirectWalks": ".legs",
    "diameter": ".metrics",
    "global_efficiency": ".metrics",
    "mean_path": ".metrics",
    "network_figures": ".metrics",
    "DIRECTIONS": ".options",
    "MetricsOptions": ".options",
    "RoutingOptions": ".options",
    "SurfaceOptions": ".options",
    "ReachProfile": ".profile",
    "reach_profile": ".profile",
    "sample_profile": ".profile",
    "NearestHub": ".routing",
    "excluded_edges": ".routing",
    "nearest_hub": ".routing",
    "nearest_hub_route_m": ".routing",
    "one_to_all": ".routing",
    "SurfaceResult": ".surface",
    "compute_surface": ".surface",
    "TravelModel": ".travel",
    "HubTrips": ".trips",
    "ODMatrix": ".trips",
    "Route": ".trips",
    "nearest_hub_trips": ".trips",
    "od_matrix": ".trips",
    "shortest_path": ".trips",
    "WalkGrid": ".walkgrid",
}

__all__ = list(_API)


def __getattr__(name):
    if name in _API:
        import importlib

        value = getattr(importlib.import_module(_API[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_API))

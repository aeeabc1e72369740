"""Accessibility indices: how much hub supply each settlement reaches, beyond the nearest hub.

Modules
-------
trips
    :func:`trip_costs`, the one cost function: settlement-to-hub trips within a
    bound T, walk legs at both ends, one-way links respected (shared with
    :mod:`geo_reach.analysis.siting`).
measures
    The formulas on sparse pairs: cumulative (Wachs and Kumagai 1973), gravity
    (Hansen 1959; decay forms compared by Kwan 1998), 2SFCA (Luo and Wang
    2003), E2SFCA (Luo and Qi 2009), BFCA (Paez, Higgins and Vivona 2019).
layer
    :func:`access_index` (one measure from the trips) and :func:`index_layer`
    (the ``access_index`` layer, per hub kind).
inputs
    :func:`read_weighted_points`: hubs with capacity, settlements with population.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

#: Public name -> the module that defines it (imported on first use, so start-up stays fast).
_API = {
    "WeightedPoints": ".inputs",
    "read_weighted_points": ".inputs",
    "AccessIndex": ".layer",
    "access_index": ".layer",
    "catchment_bound": ".layer",
    "index_layer": ".layer",
    "DECAYS": ".measures",
    "E2SFCA_WEIGHTS": ".measures",
    "E2SFCA_ZONE_FRACTIONS": ".measures",
    "MEASURES": ".measures",
    "balanced": ".measures",
    "cumulative": ".measures",
    "decay_weight": ".measures",
    "enhanced_two_step": ".measures",
    "gravity": ".measures",
    "two_step": ".measures",
    "TripCosts": ".trips",
    "trip_costs": ".trips",
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

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

from .inputs import WeightedPoints, read_weighted_points
from .layer import AccessIndex, access_index, catchment_bound, index_layer
from .measures import (DECAYS, E2SFCA_WEIGHTS, E2SFCA_ZONE_FRACTIONS, MEASURES, balanced, cumulative,
                       decay_weight, enhanced_two_step, gravity, two_step)
from .trips import TripCosts, trip_costs

__all__ = ["TripCosts", "trip_costs", "AccessIndex", "access_index", "index_layer", "catchment_bound",
           "WeightedPoints", "read_weighted_points", "MEASURES", "DECAYS", "E2SFCA_ZONE_FRACTIONS",
           "E2SFCA_WEIGHTS", "cumulative", "gravity", "two_step", "enhanced_two_step", "balanced",
           "decay_weight"]

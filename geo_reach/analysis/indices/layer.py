"""One accessibility index per settlement: the measure, the hubs within reach, the nearest hub, and why not.

:func:`access_index` turns settlement-hub trip costs into one measure;
:func:`index_layer` runs the whole chain (costs, measure, per hub kind) and
returns the ``access_index`` layer.  A settlement that reaches no hub (or is
too far from the network to join it) keeps its row: index 0, and a
``reason``.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import OptionError
from . import measures as M
from .trips import TripCosts, trip_costs

__all__ = ["AccessIndex", "access_index", "index_layer", "catchment_bound", "UNIT"]

#: Unit words of the weights the indices accept.
UNIT = {"minutes": "minutes", "length_m": "m"}


@dataclass(frozen=True)
class AccessIndex:
    """One measure for every settlement (from :func:`access_index`).

    Attributes
    ----------
    measure : str
    index : ndarray of float64, shape (n_settlements,)
        A_i (0 where no hub is within reach).
    hubs_within : ndarray of int64
        Hubs within the bound T.
    nearest : ndarray of float64
        Least cost to any hub (NaN where none), in the weight's unit.
    reason : ndarray of object
        ``None``, or why the settlement reaches no hub within T.
    ratio : ndarray of float64 or None, shape (n_hubs,)
        Supply-to-demand ratio R_j of the catchment measures.
    """

    measure: str
    index: np.ndarray
    hubs_within: np.ndarray
    nearest: np.ndarray
    reason: np.ndarray
    ratio: np.ndarray | None


def catchment_bound(measure: str, within, weight: str = "minutes", zones=None) -> float:
    """The search bound T a measure needs: checked, with E2SFCA's default from its zones.

    Every measure but gravity is defined by its catchment and needs T; gravity
    runs unbounded unless T is given (``inf`` also means no bound).  For
    E2SFCA without T, T is the last zone limit; with neither, the command
    refuses.
    """
    if measure not in M.MEASURES:
        raise OptionError(f"--measure '{measure}' is not a measure; choose one of {', '.join(M.MEASURES)}")
    unit = UNIT.get(weight, weight)
    if within is not None:
        t = float(within)
        if np.isnan(t) or t <= 0:
            raise OptionError(f"--within-minutes {within}: give a positive bound ({unit})")
        if np.isinf(t) and measure == "e2sfca" and zones is None:
            raise OptionError("--measure e2sfca needs a finite --within-minutes (its zones are thirds of it) "
                              "or --zone-minutes")
        return t
    if measure == "gravity":
        return np.inf
    if measure == "e2sfca" and zones is not None and len(zones):
        return float(np.asarray(zones, float)[-1])
    raise OptionError(f"--measure {measure} needs --within-minutes T, the catchment ({unit}), e.g. 30")


def _gravity_decay(decay, param):
    if decay is None:
        raise OptionError("--measure gravity needs --decay exponential|power|gaussian and --decay-param B")
    return M.check_decay(decay, param)


def access_index(trips: TripCosts, measure: str, supply=None, demand=None, *, decay: str | None = None,
                 decay_param: float | None = None, zones=None, zone_weights=None,
                 hub_word: str = "hub") -> AccessIndex:
    """One accessibility measure for every settlement, from its trips within T.

    Parameters
    ----------
    trips : TripCosts
        From :func:`~geo_reach.analysis.indices.trips.trip_costs` (pairs within T, nearest computed).
    measure : {'cumulative', 'gravity', '2sfca', 'e2sfca', 'bfca'}
    supply : array_like of float, shape (n_hubs,), optional
        Hub capacity S_j, zero or more; 1 per hub when not given.
    demand : array_like of float, shape (n_settlements,)
        Population D_i (needed by the catchment measures).
    decay, decay_param
        Gravity's decay form and B (see :func:`~geo_reach.analysis.indices.measures.decay_weight`).
    zones, zone_weights : array_like of float, optional
        E2SFCA sub-zone limits (weight's unit) and weights; default
        :data:`~geo_reach.analysis.indices.measures.E2SFCA_ZONE_FRACTIONS` x T and
        :data:`~geo_reach.analysis.indices.measures.E2SFCA_WEIGHTS` (Luo and Qi 2009).
    hub_word : str
        How reasons name the hubs (a kind, e.g. ``clinic``).

    Returns
    -------
    AccessIndex

    References
    ----------
    .. [1] Wachs, M. and Kumagai, T. G. (1973). Physical accessibility as a
       social indicator. Socio-Economic Planning Sciences 7(5), 437-456.
    .. [2] Hansen, W. G. (1959). How accessibility shapes land use. Journal
       of the American Institute of Planners 25(2), 73-76.
    .. [3] Kwan, M.-P. (1998). Geographical Analysis 30(3), 191-216.
    .. [4] Luo, W. and Wang, F. (2003). Environment and Planning B 30(6),
       865-884.
    .. [5] Luo, W. and Qi, Y. (2009). Health & Place 15(4), 1100-1107.
    .. [6] Paez, A., Higgins, C. D. and Vivona, S. F. (2019). PLOS ONE 14(6),
       e0218773.
    """
    if measure not in M.MEASURES:
        raise OptionError(f"--measure '{measure}' is not a measure; choose one of {', '.join(M.MEASURES)}")
    n, nh = trips.n_settlements, trips.n_hubs
    supply = np.ones(nh) if supply is None else np.asarray(supply, dtype=np.float64)
    if supply.shape != (nh,) or not np.all(np.isfinite(supply)) or np.any(supply < 0):
        raise OptionError("supply: give one finite capacity of zero or more per hub")
    if measure in ("2sfca", "e2sfca", "bfca"):
        if demand is None:
            raise OptionError(f"--measure {measure} needs the settlements' population (--population-field)")
    if demand is not None:
        demand = np.asarray(demand, dtype=np.float64)
        if demand.shape != (n,) or not np.all(np.isfinite(demand)) or np.any(demand < 0):
            raise OptionError("demand: give one finite population of zero or more per settlement")
    i, j, c = trips.settlement, trips.hub, trips.cost
    ratio = None
    if measure == "cumulative":
        index = M.cumulative(i, j, supply, n)
    elif measure == "gravity":
        decay, b = _gravity_decay(decay, decay_param)
        index = M.gravity(i, j, c, supply, n, decay, b)
    elif measure == "2sfca":
        index, ratio = M.two_step(i, j, supply, demand, n)
    elif measure == "e2sfca":
        t = trips.within
        z = np.asarray(zones, float) if zones is not None else np.asarray(M.E2SFCA_ZONE_FRACTIONS) * t
        w = np.asarray(zone_weights, float) if zone_weights is not None else np.asarray(M.E2SFCA_WEIGHTS)
        if not np.isfinite(z).all():
            raise OptionError("--measure e2sfca needs a finite catchment: give --within-minutes or --zone-minutes")
        z, w = M.check_zones(z, w, t)
        index, ratio = M.enhanced_two_step(i, j, c, supply, demand, n, z, w)
    else:
        index, ratio = M.balanced(i, j, supply, demand, n)
    within = np.bincount(i, minlength=n).astype(np.int64)
    nearest = np.where(np.isfinite(trips.nearest_cost), trips.nearest_cost, np.nan)
    unit = UNIT.get(trips.weight, trips.weight)
    reason = np.full(n, None, dtype=object)
    far = ~trips.settlement_attached
    nopath = trips.settlement_attached & ~np.isfinite(trips.nearest_cost)
    beyond = trips.settlement_attached & np.isfinite(trips.nearest_cost) & (within == 0)
    for k in np.nonzero(far)[0]:
        d = trips.settlement_access_m[k]
        reason[k] = (f"{d:,.0f} m from the network, beyond the access limit" if np.isfinite(d)
                     else "no network to join")
    reason[nopath] = f"no path to any {hub_word}"
    if np.isfinite(trips.within):
        reason[beyond] = f"no {hub_word} within {trips.within:g} {unit}"
    index = np.where(within > 0, index, 0.0)
    return AccessIndex(measure, index, within, nearest, reason, ratio)


def index_layer(network, settlements, hubs, measure: str, *, within=None, weight: str = "minutes",
                decay: str | None = None, decay_param: float | None = None, zones=None, zone_weights=None,
                max_access_m: float = 5000.0, walk_kmh: float = 5.0, capacity: bool = True, travel=None,
                always_join: bool = False):
    """The ``access_index`` layer: one row per settlement (per hub kind when the hubs have kinds).

    Parameters
    ----------
    network : Network
    settlements : WeightedPoints
        Settlement points with their population as ``values``.
    hubs : WeightedPoints
        Hub points with their capacity as ``values`` (1 each when no field
        was given), and kinds if any.
    measure : {'cumulative', 'gravity', '2sfca', 'e2sfca', 'bfca'}
    within : float, optional
        The catchment T (weight's unit); see :func:`catchment_bound`.
    weight : {'minutes', 'length_m'}
    decay, decay_param, zones, zone_weights
        As in :func:`access_index`.
    max_access_m, walk_kmh : float
        As in :func:`~geo_reach.analysis.attach.attach_points`.
    travel : TravelModel, optional
        The run's travel model; walks are priced as it prices them (see
        :func:`~geo_reach.analysis.indices.trips.trip_costs`).
    always_join : bool, default False
        Settlements beyond ``max_access_m`` join the network all the same.

    Returns
    -------
    layer : geopandas.GeoDataFrame
        Point layer in the network's CRS: ``settlement_id``, ``kind`` (when
        the hubs have kinds), ``measure``, ``index``, ``hubs_within``,
        ``nearest_<weight>`` (``nearest_minutes`` by default, ``nearest_length_m``: the
        cheapest trip to the nearest hub of the kind, unbounded), ``reason``.
    hub_layer : geopandas.GeoDataFrame
        The ``hub_catchments`` layer, one row per hub: ``hub_id``, ``kind``
        (when kinds are given), ``capacity``, ``joined`` (1 where the hub
        joins the network), ``settlements_within`` (settlements within T),
        ``capacity_per_person`` (the catchment measures' supply-to-demand
        ratio R_j, else NaN).  Names from :mod:`geo_reach.glossary`.
    notes : list of str
        Hubs left out (too far from the network), settlements reaching none.

    Notes
    -----
    The costs are :func:`~geo_reach.analysis.indices.trips.trip_costs`
    (settlement to hub, bounded by T), run once per hub kind.

    References
    ----------
    .. [1] Wachs, M. and Kumagai, T. G. (1973). Physical accessibility as a
       social indicator. Socio-Economic Planning Sciences 7(5), 437-456.
    .. [2] Hansen, W. G. (1959). How accessibility shapes land use. Journal
       of the American Institute of Planners 25(2), 73-76.
    .. [3] Kwan, M.-P. (1998). Geographical Analysis 30(3), 191-216.
    .. [4] Luo, W. and Wang, F. (2003). Environment and Planning B 30(6),
       865-884.
    .. [5] Luo, W. and Qi, Y. (2009). Health & Place 15(4), 1100-1107.
    .. [6] Paez, A., Higgins, C. D. and Vivona, S. F. (2019). PLOS ONE 14(6),
       e0218773.
    """
    import geopandas as gpd
    import pandas as pd
    import shapely

    if weight not in UNIT:
        raise OptionError(f"--weight {weight}: the indices take minutes or length_m")
    t = catchment_bound(measure, within, weight, zones)
    if measure == "gravity":
        _gravity_decay(decay, decay_param)
    groups = [(None, np.arange(len(hubs.ids)))]
    if hubs.kinds is not None:
        groups = [(k, np.nonzero(hubs.kinds == k)[0]) for k in sorted(pd.unique(hubs.kinds), key=str)]
    frames, tables, notes = [], [], []
    for kind, members in groups:
        tc = trip_costs(network, settlements.xy, hubs.xy[members], within=t, weight=weight,
                        max_access_m=max_access_m, walk_kmh=walk_kmh, travel=travel, always_join=always_join)
        word = "hub" if kind is None else str(kind)
        res = access_index(tc, measure, hubs.values[members], settlements.values, decay=decay,
                           decay_param=decay_param, zones=zones, zone_weights=zone_weights, hub_word=word)
        data = {"settlement_id": settlements.ids}
        if kind is not None:
            data["kind"] = np.full(len(settlements.ids), kind, dtype=object)
        data.update({"measure": np.full(len(settlements.ids), measure, dtype=object), "index": res.index,
                     "hubs_within": res.hubs_within, f"nearest_{weight}": res.nearest, "reason": res.reason})
        frames.append(pd.DataFrame(data))
        hub = {"hub_id": hubs.ids[members]}
        if kind is not None:
            hub["kind"] = hubs.kinds[members]
        hub.update({"capacity": hubs.values[members], "joined": tc.hub_attached.astype(np.int32),
                    "settlements_within": np.bincount(tc.hub, minlength=len(members)).astype(np.int64),
                    "capacity_per_person": res.ratio if res.ratio is not None else np.full(len(members), np.nan)})
        tables.append(gpd.GeoDataFrame(pd.DataFrame(hub), geometry=shapely.points(hubs.xy[members]),
                                       crs=network.crs))
        left = np.nonzero(~tc.hub_attached)[0]
        if len(left):
            notes.append(f"{len(left)} {word} hubs farther than {max_access_m:g} m from the network are left out "
                         f"(first: id {hubs.ids[members][left[0]]})")
        far = ~tc.settlement_attached
        if far.any():
            notes.append(f"{int(far.sum())} settlements farther than {max_access_m:g} m from the network reach no "
                         f"{word} (index 0; first: id {settlements.ids[far][0]})")
        nopath = tc.settlement_attached & ~np.isfinite(tc.nearest_cost)
        if nopath.any():
            notes.append(f"{int(nopath.sum())} settlements have no path to any {word} (index 0; first: id "
                         f"{settlements.ids[nopath][0]})")
        beyond = tc.settlement_attached & np.isfinite(tc.nearest_cost) & (res.hubs_within == 0)
        if beyond.any() and np.isfinite(t):
            notes.append(f"{int(beyond.sum())} settlements have no {word} within {t:g} {UNIT[weight]} (index 0)")
    frame = pd.concat(frames, ignore_index=True)
    if all(isinstance(v, (int, np.integer)) for v in settlements.ids):
        frame["settlement_id"] = frame["settlement_id"].astype(np.int64)
    geom = shapely.points(np.tile(settlements.xy, (len(groups), 1)))
    layer = gpd.GeoDataFrame(frame, geometry=geom, crs=network.crs)
    hub_layer = gpd.GeoDataFrame(pd.concat(tables, ignore_index=True), crs=network.crs)
    if all(isinstance(v, (int, np.integer)) for v in hubs.ids):
        hub_layer["hub_id"] = hub_layer["hub_id"].astype(np.int64)
    return layer, hub_layer, notes

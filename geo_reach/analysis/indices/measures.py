"""Accessibility measures on sparse settlement-hub pairs: cumulative, gravity and floating catchments.

Every measure takes the pairs within the bound T as three arrays (settlement
``i``, hub ``j``, cost ``c``: the output of
:func:`~geo_reach.analysis.indices.trips.trip_costs`), the hubs' supply
``S_j`` (capacity; 1 per hub when none is given) and, for the catchment
measures, the settlements' demand ``D_i`` (population).  All are vectorised
sums over the pairs (``numpy.bincount``): O(pairs + settlements + hubs).

Where a formula divides by a hub's catchment demand and that demand is zero
(no one, or only settlements of population 0, within reach), the hub's ratio
is 0: it serves no demand, so it adds nothing to anyone's index.

Results are model estimates; local surveys, codes and licensed professional
practice decide.

References
----------
.. [1] Wachs, M. and Kumagai, T. G. (1973). Physical accessibility as a
   social indicator. Socio-Economic Planning Sciences 7(5), 437-456.
.. [2] Hansen, W. G. (1959). How accessibility shapes land use. Journal of
   the American Institute of Planners 25(2), 73-76.
.. [3] Kwan, M.-P. (1998). Space-time and integral measures of individual
   accessibility: a comparative analysis using a point-based framework.
   Geographical Analysis 30(3), 191-216.
.. [4] Luo, W. and Wang, F. (2003). Measures of spatial accessibility to
   health care in a GIS environment: synthesis and a case study in the
   Chicago region. Environment and Planning B 30(6), 865-884.
.. [5] Luo, W. and Qi, Y. (2009). An enhanced two-step floating catchment
   area (E2SFCA) method for measuring spatial accessibility to primary care
   physicians. Health & Place 15(4), 1100-1107.
.. [6] Paez, A., Higgins, C. D. and Vivona, S. F. (2019). Demand and level
   of service inflation in Floating Catchment Area (FCA) methods. PLOS ONE
   14(6), e0218773.
"""

from __future__ import annotations

import numpy as np

from ...errors import OptionError

__all__ = ["MEASURES", "DECAYS", "E2SFCA_ZONE_FRACTIONS", "E2SFCA_WEIGHTS", "decay_weight", "cumulative",
           "gravity", "two_step", "enhanced_two_step", "balanced", "zone_weight", "check_decay",
           "check_zones", "POWER_FLOOR"]

#: The measures, as the command line names them.
MEASURES = ("cumulative", "gravity", "2sfca", "e2sfca", "bfca")
#: Distance-decay forms of the gravity measure.
DECAYS = ("exponential", "power", "gaussian")
#: The power decay's cost floor, in the weight's unit (1 minute): c^-B is taken at max(c, 1).
POWER_FLOOR = 1.0

#: E2SFCA sub-zone limits as fractions of the catchment T.  Luo and Qi (2009) split a 30-minute
#: catchment into 0-10, 10-20 and 20-30 minutes; at T = 30 these fractions give exactly those zones.
#: (From memory of the paper.)
E2SFCA_ZONE_FRACTIONS = (1.0 / 3.0, 2.0 / 3.0, 1.0)
#: E2SFCA weights of those zones: 1.00, 0.68 and 0.22, the Gaussian-based weights Luo and Qi (2009)
#: use for their slow-decay case.  (From memory of the paper.)
E2SFCA_WEIGHTS = (1.0, 0.68, 0.22)


def _sum_by(idx, weights=None, minlength=0):
    """``numpy.bincount`` that stays float when there is nothing to sum (bincount gives int then)."""
    return np.bincount(idx, weights=weights, minlength=minlength).astype(np.float64)


def check_decay(decay: str, param) -> tuple[str, float]:
    """Validate a decay form and its parameter B (positive, finite)."""
    if decay not in DECAYS:
        raise OptionError(f"--decay '{decay}' is not a decay form; choose one of {', '.join(DECAYS)}")
    if param is None:
        raise OptionError(f"--decay {decay} needs --decay-param B (a positive number: "
                          + {"exponential": "exp(-B c)", "power": "c^-B with c floored at 1",
                             "gaussian": "exp(-c^2 / B)"}[decay] + ")")
    b = float(param)
    if not np.isfinite(b) or b <= 0:
        raise OptionError(f"--decay-param {param}: give a positive number")
    return decay, b


def decay_weight(cost, decay: str, param: float) -> np.ndarray:
    """The distance-decay weight f(c) of the gravity measure.

    Parameters
    ----------
    cost : array_like of float
        Trip costs c in the weight's unit (minutes, or metres for ``length_m``).
    decay : {'exponential', 'power', 'gaussian'}
        ``exponential``: exp(-B c); ``power``: c^-B with c floored at
        :data:`POWER_FLOOR` (1 unit, so a hub next door does not weigh
        infinitely); ``gaussian``: exp(-c^2 / B).
    param : float
        B, positive.

    Returns
    -------
    ndarray of float64

    References
    ----------
    .. [1] Hansen, W. G. (1959). How accessibility shapes land use. Journal
       of the American Institute of Planners 25(2), 73-76.
    .. [2] Kwan, M.-P. (1998). Space-time and integral measures of
       individual accessibility. Geographical Analysis 30(3), 191-216.

    Examples
    --------
    >>> decay_weight([0.0, 0.5, 2.0], "power", 2.0).tolist()
    [1.0, 1.0, 0.25]
    >>> round(float(decay_weight(10.0, "gaussian", 100.0)), 6)   # exp(-1)
    0.367879
    """
    decay, b = check_decay(decay, param)
    c = np.asarray(cost, dtype=np.float64)
    if decay == "exponential":
        return np.exp(-b * c)
    if decay == "power":
        return np.maximum(c, POWER_FLOOR) ** (-b)
    return np.exp(-(c * c) / b)


def cumulative(i, j, supply, n_settlements: int) -> np.ndarray:
    """Cumulative opportunities: A_i = sum of S_j over the hubs j within T (the pairs given).

    References
    ----------
    .. [1] Wachs, M. and Kumagai, T. G. (1973). Physical accessibility as a
       social indicator. Socio-Economic Planning Sciences 7(5), 437-456.
    """
    supply = np.asarray(supply, dtype=np.float64)
    return _sum_by(np.asarray(i, np.int64), weights=supply[np.asarray(j, np.int64)], minlength=n_settlements)


def gravity(i, j, c, supply, n_settlements: int, decay: str, param: float) -> np.ndarray:
    """Gravity (potential) access: A_i = sum over j of S_j f(c_ij), over the pairs given.

    With pairs cut at T the sum leaves out hubs beyond T; with no bound it is
    Hansen's full sum.

    References
    ----------
    .. [1] Hansen, W. G. (1959). How accessibility shapes land use. Journal
       of the American Institute of Planners 25(2), 73-76.
    .. [2] Kwan, M.-P. (1998). Geographical Analysis 30(3), 191-216.
    """
    supply = np.asarray(supply, dtype=np.float64)
    j = np.asarray(j, np.int64)
    return _sum_by(np.asarray(i, np.int64), weights=supply[j] * decay_weight(c, decay, param),
                       minlength=n_settlements)


def _ratio(supply, demand_at_hub) -> np.ndarray:
    supply = np.asarray(supply, dtype=np.float64)
    out = np.zeros(len(supply))
    np.divide(supply, demand_at_hub, out=out, where=demand_at_hub > 0)
    return out


def two_step(i, j, supply, demand, n_settlements: int):
    """Two-step floating catchment area (2SFCA).

    Step 1: R_j = S_j / (sum of D_k over settlements k with c_kj <= T).
    Step 2: A_i = sum of R_j over hubs j with c_ij <= T.

    Parameters
    ----------
    i, j : array_like of int
        The pairs within T (settlement, hub).
    supply : array_like of float, shape (n_hubs,)
    demand : array_like of float, shape (n_settlements,)
    n_settlements : int

    Returns
    -------
    index : ndarray, shape (n_settlements,)
        A_i, supply per unit of demand (e.g. clinics per person).
    ratio : ndarray, shape (n_hubs,)
        R_j (0 for a hub whose catchment holds no demand).

    Notes
    -----
    Sum over i of D_i A_i = sum over j of R_j (sum of D_i in j's catchment)
    = sum of S_j over the hubs whose catchment holds any demand.

    References
    ----------
    .. [1] Luo, W. and Wang, F. (2003). Measures of spatial accessibility to
       health care in a GIS environment. Environment and Planning B 30(6),
       865-884.
    """
    i = np.asarray(i, np.int64)
    j = np.asarray(j, np.int64)
    demand = np.asarray(demand, dtype=np.float64)
    supply = np.asarray(supply, dtype=np.float64)
    ratio = _ratio(supply, _sum_by(j, weights=demand[i], minlength=len(supply)))
    return _sum_by(i, weights=ratio[j], minlength=n_settlements), ratio


def check_zones(zones, weights, within: float):
    """Validate E2SFCA zone limits (increasing, positive, the last <= T) and weights (>= 0, one per zone)."""
    z = np.asarray(zones, dtype=np.float64).ravel()
    w = np.asarray(weights, dtype=np.float64).ravel()
    if len(z) == 0 or not np.all(np.isfinite(z)) or np.any(z <= 0) or np.any(np.diff(z) <= 0):
        raise OptionError(f"--zone-minutes {','.join(f'{v:g}' for v in z)}: give increasing positive limits, "
                          "e.g. 10,20,30")
    if len(w) != len(z):
        raise OptionError(f"--zone-weights: give one weight per zone ({len(z)} zones, {len(w)} weights)")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise OptionError("--zone-weights: give weights of zero or more, e.g. 1,0.68,0.22")
    if z[-1] > within * (1 + 1e-12):
        raise OptionError(f"--zone-minutes: the last zone ends at {z[-1]:g}, beyond the catchment "
                          f"--within-minutes {within:g}; make them equal")
    return z, w


def zone_weight(c, zones, weights) -> np.ndarray:
    """The E2SFCA step weight of each cost: weights[r] for zones[r-1] < c <= zones[r] (0 beyond the last)."""
    zones = np.asarray(zones, dtype=np.float64)
    w = np.append(np.asarray(weights, dtype=np.float64), 0.0)
    return w[np.searchsorted(zones, np.asarray(c, dtype=np.float64), side="left")]


def enhanced_two_step(i, j, c, supply, demand, n_settlements: int, zones, weights):
    """Enhanced two-step floating catchment area (E2SFCA): 2SFCA with stepwise decay weights W_r.

    Step 1: R_j = S_j / (sum over k of D_k W(c_kj)).
    Step 2: A_i = sum over j of R_j W(c_ij).
    W(c) is the weight of the sub-zone c falls in (see :func:`zone_weight`).

    Returns
    -------
    index : ndarray, shape (n_settlements,)
    ratio : ndarray, shape (n_hubs,)

    References
    ----------
    .. [1] Luo, W. and Qi, Y. (2009). An enhanced two-step floating catchment
       area (E2SFCA) method for measuring spatial accessibility to primary
       care physicians. Health & Place 15(4), 1100-1107.
    """
    i = np.asarray(i, np.int64)
    j = np.asarray(j, np.int64)
    demand = np.asarray(demand, dtype=np.float64)
    supply = np.asarray(supply, dtype=np.float64)
    w = zone_weight(c, zones, weights)
    ratio = _ratio(supply, _sum_by(j, weights=demand[i] * w, minlength=len(supply)))
    return _sum_by(i, weights=ratio[j] * w, minlength=n_settlements), ratio


def balanced(i, j, supply, demand, n_settlements: int):
    """Balanced floating catchment area (BFCA): no demand or supply counted twice.

    With G_ij = 1 / (number of hubs within T of settlement i) for the pairs
    within T (each settlement's demand split evenly among the hubs it reaches):

    Step 1: R_j = S_j / (sum over i of D_i G_ij)  (each person counted once in all).
    Step 2: A_i = sum over j of G_ij R_j.

    Equivalently hub j's supply is split among the settlements in its reach
    in shares D_i G_ij / (sum over k of D_k G_kj), which add up to 1, and A_i
    is settlement i's share of supply per unit of its demand.  Hence the
    defining property: sum over i of D_i A_i = total supply of the hubs that
    anyone reaches (with any demand), while the catchment demands add up to
    the demand of the settlements that reach any hub (2SFCA's add up to more
    where catchments overlap: demand inflation).

    Returns
    -------
    index : ndarray, shape (n_settlements,)
    ratio : ndarray, shape (n_hubs,)

    Notes
    -----
    Paez, Higgins and Vivona (2019) standardise the impedance weights by row
    (splitting demand) and by column (splitting supply).  This form, written
    from memory of the paper with binary weights within T, is the one whose
    conservation property the issue states; the paper's own notation may
    differ.

    References
    ----------
    .. [1] Paez, A., Higgins, C. D. and Vivona, S. F. (2019). Demand and
       level of service inflation in Floating Catchment Area (FCA) methods.
       PLOS ONE 14(6), e0218773.
    """
    i = np.asarray(i, np.int64)
    j = np.asarray(j, np.int64)
    demand = np.asarray(demand, dtype=np.float64)
    supply = np.asarray(supply, dtype=np.float64)
    reach = _sum_by(i, minlength=n_settlements)
    g = 1.0 / reach[i] if len(i) else np.zeros(0)
    ratio = _ratio(supply, _sum_by(j, weights=demand[i] * g, minlength=len(supply)))
    return _sum_by(i, weights=g * ratio[j], minlength=n_settlements), ratio

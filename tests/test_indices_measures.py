"""Accessibility measures against hand arithmetic, the published formulas and their properties.

Sources (written beside each check):
* Wachs, M. and Kumagai, T. G. (1973). Physical accessibility as a social indicator.
  Socio-Economic Planning Sciences 7: cumulative opportunities.
* Hansen, W. G. (1959). How accessibility shapes land use. JAIP 25(2): gravity A_i = sum S_j f(c_ij);
  Kwan, M.-P. (1998). Geographical Analysis 30(3): the exponential, power and Gaussian decay forms.
* Luo, W. and Wang, F. (2003). Environment and Planning B 30(6): 2SFCA, R_j = S_j / sum D_k, A_i = sum R_j;
  conservation sum_i D_i A_i = sum of S_j over hubs with demand follows from the two steps.
* Luo, W. and Qi, Y. (2009). Health & Place 15(4): E2SFCA, zones 0-10, 10-20, 20-30 minutes with weights
  1, 0.68, 0.22 (from memory of the paper).
* Paez, A., Higgins, C. D. and Vivona, S. F. (2019). PLOS ONE 14(6): BFCA; its defining property
  sum_i D_i A_i = total supply reachable by anyone, and no demand counted twice.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import grid, make_network, random_network  # noqa: E402

from geo_reach.analysis.attach import attach_points  # noqa: E402
from geo_reach.analysis.indices import measures as M  # noqa: E402
from geo_reach.analysis.indices.layer import access_index, catchment_bound  # noqa: E402
from geo_reach.analysis.indices.trips import TripCosts, trip_costs  # noqa: E402
from geo_reach.analysis.trips import od_matrix  # noqa: E402
from geo_reach.errors import OptionError  # noqa: E402

SETTINGS = settings(max_examples=60, deadline=None)

# ------------------------------------------------------------------ the worked example
# Settlements A (population 1000), B (2000), C (500); hubs H1 (capacity 2), H2 (capacity 1); T = 30 minutes.
# Costs: A-H1 10, A-H2 25, B-H1 20, C-H2 5 (within T); B-H2 40 and C-H1 50 are beyond T, so not pairs.
I = np.array([0, 0, 1, 2])
J = np.array([0, 1, 0, 1])
C = np.array([10.0, 25.0, 20.0, 5.0])
S = np.array([2.0, 1.0])
D = np.array([1000.0, 2000.0, 500.0])


def hand_trips(within=30.0):
    nearest = np.array([10.0, 20.0, 5.0])
    return TripCosts(I, J, C, 3, 2, within, "minutes", "to-hub", nearest, np.array([0, 0, 1]),
                     np.ones(3, bool), np.ones(2, bool), np.zeros(3), np.zeros(2))


def test_cumulative_by_hand():
    # A reaches H1 and H2: 2 + 1 = 3; B reaches H1: 2; C reaches H2: 1   (Wachs and Kumagai 1973)
    assert M.cumulative(I, J, S, 3).tolist() == [3.0, 2.0, 1.0]


def test_gravity_by_hand():
    # power, B = 2: A = 2/10^2 + 1/25^2 = 0.02 + 0.0016 = 0.0216; B = 2/20^2 = 0.005; C = 1/5^2 = 0.04
    np.testing.assert_allclose(M.gravity(I, J, C, S, 3, "power", 2.0), [0.0216, 0.005, 0.04], rtol=1e-12)
    # exponential, B = 0.1: A = 2 e^-1 + e^-2.5; B = 2 e^-2; C = e^-0.5      (Hansen 1959; Kwan 1998)
    np.testing.assert_allclose(M.gravity(I, J, C, S, 3, "exponential", 0.1),
                               [2 * math.exp(-1) + math.exp(-2.5), 2 * math.exp(-2), math.exp(-0.5)], rtol=1e-12)
    # Gaussian, B = 100: A = 2 e^-(100/100) + e^-(625/100); B = 2 e^-4; C = e^-0.25
    np.testing.assert_allclose(M.gravity(I, J, C, S, 3, "gaussian", 100.0),
                               [2 * math.exp(-1) + math.exp(-6.25), 2 * math.exp(-4), math.exp(-0.25)], rtol=1e-12)
    # power decay floors c at 1 minute: a hub 0.2 minutes away weighs 1, not 25
    assert M.decay_weight([0.2, 1.0, 4.0], "power", 2.0).tolist() == [1.0, 1.0, 1 / 16]


def test_2sfca_by_hand():
    # Step 1: R1 = 2 / (1000 + 2000) = 1/1500; R2 = 1 / (1000 + 500) = 1/1500.
    # Step 2: A_A = R1 + R2 = 2/1500 = 1/750; A_B = R1 = 1/1500; A_C = R2 = 1/1500.
    index, ratio = M.two_step(I, J, S, D, 3)
    np.testing.assert_allclose(ratio, [1 / 1500, 1 / 1500], rtol=1e-12)
    np.testing.assert_allclose(index, [1 / 750, 1 / 1500, 1 / 1500], rtol=1e-12)
    # conservation: 1000/750 + 2000/1500 + 500/1500 = 4/3 + 4/3 + 1/3 = 3 = S1 + S2
    assert float(D @ index) == pytest.approx(3.0, rel=1e-12)


def test_e2sfca_by_hand():
    # Zones (Luo and Qi 2009, at T = 30): 0-10 w 1, 10-20 w 0.68, 20-30 w 0.22.
    # A-H1 10 -> w 1 (10 is in the first zone); A-H2 25 -> 0.22; B-H1 20 -> 0.68; C-H2 5 -> 1.
    # R1 = 2 / (1000*1 + 2000*0.68) = 2/2360; R2 = 1 / (1000*0.22 + 500*1) = 1/720.
    # A_A = 1*2/2360 + 0.22/720; A_B = 0.68*2/2360; A_C = 1/720.
    zones = np.array(M.E2SFCA_ZONE_FRACTIONS) * 30.0
    np.testing.assert_allclose(zones, [10.0, 20.0, 30.0], rtol=1e-15)
    assert M.E2SFCA_WEIGHTS == (1.0, 0.68, 0.22)
    index, ratio = M.enhanced_two_step(I, J, C, S, D, 3, zones, M.E2SFCA_WEIGHTS)
    np.testing.assert_allclose(ratio, [2 / 2360, 1 / 720], rtol=1e-12)
    np.testing.assert_allclose(index, [2 / 2360 + 0.22 / 720, 1.36 / 2360, 1 / 720], rtol=1e-12)
    # the default zones through access_index give the same
    got = access_index(hand_trips(), "e2sfca", S, D)
    np.testing.assert_allclose(got.index, index, rtol=1e-15)


def test_bfca_by_hand():
    # A reaches 2 hubs: its demand splits 1/2 + 1/2; B and C reach one hub each.
    # R1 = 2 / (1000/2 + 2000) = 2/2500 = 0.0008; R2 = 1 / (1000/2 + 500) = 1/1000 = 0.001.
    # A_A = (1/2)(0.0008) + (1/2)(0.001) = 0.0009; A_B = 0.0008; A_C = 0.001.
    index, ratio = M.balanced(I, J, S, D, 3)
    np.testing.assert_allclose(ratio, [0.0008, 0.001], rtol=1e-12)
    np.testing.assert_allclose(index, [0.0009, 0.0008, 0.001], rtol=1e-12)
    # sum D_i A_i = 0.9 + 1.6 + 0.5 = 3 = total supply; catchment demands 2500 + 1000 = 3500 = all people,
    # where 2SFCA's catchments hold 3000 + 1500 = 4500 (A counted twice: demand inflation)
    assert float(D @ index) == pytest.approx(3.0, rel=1e-12)
    assert float((S / ratio).sum()) == pytest.approx(3500.0, rel=1e-12)
    assert float((S / M.two_step(I, J, S, D, 3)[1]).sum()) == pytest.approx(4500.0, rel=1e-12)


def test_access_index_fields_and_reasons():
    trips = TripCosts(np.array([0, 0]), np.array([0, 1]), np.array([3.0, 7.0]), 4, 2, 10.0, "minutes", "to-hub",
                      np.array([3.0, 14.0, np.inf, np.inf]), np.array([0, 1, -1, -1]),
                      np.array([True, True, True, False]), np.ones(2, bool), np.array([5.0, 5.0, 5.0, 8000.0]),
                      np.zeros(2))
    res = access_index(trips, "2sfca", None, np.array([10.0, 20.0, 30.0, 40.0]), hub_word="clinic")
    # only settlement 0 reaches hubs (both, 1 capacity each, demand 10): A_0 = 1/10 + 1/10
    np.testing.assert_allclose(res.index, [0.2, 0.0, 0.0, 0.0])
    assert res.hubs_within.tolist() == [2, 0, 0, 0]
    np.testing.assert_array_equal(res.nearest, [3.0, 14.0, np.nan, np.nan])
    assert res.reason[0] is None
    assert res.reason[1] == "no clinic within 10 minutes"
    assert res.reason[2] == "no path to any clinic"
    assert res.reason[3] == "8,000 m from the network, beyond the access limit"


# ------------------------------------------------------------------ properties on random instances
def random_pairs(rng, n, m, p=0.4):
    mask = rng.random((n, m)) < p
    i, j = np.nonzero(mask)
    return i, j, rng.uniform(0.0, 30.0, len(i))


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 30), m=st.integers(1, 12))
def test_2sfca_conservation(seed, n, m):
    """sum_i D_i A_i = sum of S_j over the hubs whose catchment holds any demand (Luo and Wang 2003)."""
    rng = np.random.default_rng(seed)
    i, j, _ = random_pairs(rng, n, m)
    supply = rng.uniform(0, 10, m) * (rng.random(m) > 0.2)
    demand = rng.uniform(0, 1000, n) * (rng.random(n) > 0.2)
    index, _ = M.two_step(i, j, supply, demand, n)
    has_demand = np.bincount(j, weights=demand[i], minlength=m) > 0
    assert float(demand @ index) == pytest.approx(float(supply[has_demand].sum()), rel=1e-10, abs=1e-10)


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 30), m=st.integers(1, 12))
def test_bfca_defining_property(seed, n, m):
    """sum_i D_i A_i = total supply reachable by anyone (with demand), and the catchment demands add up to
    the demand of the settlements that reach a hub: nobody counted twice (Paez, Higgins and Vivona 2019)."""
    rng = np.random.default_rng(seed)
    i, j, _ = random_pairs(rng, n, m)
    supply = rng.uniform(0, 10, m)
    demand = rng.uniform(0, 1000, n) * (rng.random(n) > 0.2)
    index, ratio = M.balanced(i, j, supply, demand, n)
    reached_by_demand = np.zeros(m, bool)
    reached_by_demand[j[demand[i] > 0]] = True
    assert float(demand @ index) == pytest.approx(float(supply[reached_by_demand].sum()), rel=1e-10, abs=1e-10)
    reach = np.bincount(i, minlength=n)
    catch = np.bincount(j, weights=demand[i] / reach[i], minlength=m)
    assert float(catch.sum()) == pytest.approx(float(demand[reach > 0].sum()), rel=1e-10, abs=1e-10)
    # each hub's supply is split among the settlements in its reach in shares adding up to 1
    share = demand[i] / reach[i] / np.where(catch[j] > 0, catch[j], 1.0)
    sums = np.bincount(j, weights=share, minlength=m)
    np.testing.assert_allclose(sums[reached_by_demand], 1.0, rtol=1e-10)


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), decay=st.sampled_from(M.DECAYS), b=st.floats(0.05, 3.0))
def test_gravity_against_direct_numpy(seed, decay, b):
    """The whole chain (bounded sparse trips -> gravity) against a direct numpy evaluation of
    A_i = sum_j S_j f(c_ij) on the full od_matrix costs (Hansen 1959; Kwan 1998 for the forms)."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, 30, 80)
    s_xy = rng.uniform(0, 5000, (12, 2))
    h_xy = rng.uniform(0, 5000, (5, 2))
    supply = rng.uniform(0, 5, 5)
    cmat = od_matrix(net, attach_points(net, s_xy, "minutes"), attach_points(net, h_xy, "minutes"), "minutes").cost
    fin = np.unique(cmat[np.isfinite(cmat)])
    k = int(0.6 * (len(fin) - 1))
    t = float(fin[k] + fin[k + 1]) / 2.0 if len(fin) > 1 else 10.0   # halfway between two costs, not at one
    within = np.isfinite(cmat) & (cmat <= t)
    c = np.where(within, cmat, 1.0)
    f = {"exponential": np.exp(-b * c), "power": np.maximum(c, 1.0) ** -b, "gaussian": np.exp(-(c ** 2) / b)}[decay]
    want = (supply[None, :] * np.where(within, f, 0.0)).sum(axis=1)
    trips = trip_costs(net, s_xy, h_xy, within=t)
    got = access_index(trips, "gravity", supply, decay=decay, decay_param=b)
    np.testing.assert_allclose(got.index, want, rtol=1e-9, atol=1e-300)
    # unbounded: Hansen's full sum over every reachable hub
    full = access_index(trip_costs(net, s_xy, h_xy), "gravity", supply, decay=decay, decay_param=b)
    cf = np.where(np.isfinite(cmat), cmat, 1.0)
    ff = {"exponential": np.exp(-b * cf), "power": np.maximum(cf, 1.0) ** -b, "gaussian": np.exp(-(cf ** 2) / b)}[decay]
    np.testing.assert_allclose(full.index, (supply[None, :] * np.where(np.isfinite(cmat), ff, 0.0)).sum(axis=1),
                               rtol=1e-9, atol=1e-300)


def test_2sfca_with_a_very_large_catchment_is_supply_over_demand():
    """With T beyond every trip, every settlement reaches every hub: A_i = total supply / total demand
    for all i (follows from the two steps of Luo and Wang 2003)."""
    rng = np.random.default_rng(11)
    net = grid(8, 8, spacing=500.0, minutes=1.0)
    s_xy = rng.uniform(0, 3500, (25, 2))
    h_xy = rng.uniform(0, 3500, (6, 2))
    supply = rng.uniform(0.5, 4.0, 6)
    demand = rng.uniform(10, 5000, 25)
    trips = trip_costs(net, s_xy, h_xy, within=1e9)
    assert trips.n_pairs == 25 * 6
    for measure in ("2sfca", "bfca"):
        res = access_index(trips, measure, supply, demand)
        np.testing.assert_allclose(res.index, supply.sum() / demand.sum(), rtol=1e-12)


def test_one_way_links_change_the_index():
    """Cumulative counts on a one-way loop differ by direction (costs worked in test_indices_trips:
    S -> H is 2.2 minutes, H -> S 4.2)."""
    xy = np.array([[0, 0], [1000, 0], [1000, 1000], [0, 1000]], float)
    net = make_network([(0, 1), (1, 2), (2, 3), (3, 0)], xy, minutes=1.0, oneway=True)
    s, h = [[500.0, -50.0]], [[1050.0, 500.0]]
    to = trip_costs(net, s, h, within=3.0, max_access_m=100.0)
    fro = trip_costs(net, s, h, within=3.0, max_access_m=100.0, direction="from-hub")
    assert access_index(to, "cumulative").index.tolist() == [1.0]
    assert access_index(fro, "cumulative").index.tolist() == [0.0]


def test_refusals():
    trips = hand_trips()
    with pytest.raises(OptionError, match="not a measure"):
        access_index(trips, "3sfca", S, D)
    with pytest.raises(OptionError, match="not a decay form"):
        access_index(trips, "gravity", S, decay="linear", decay_param=1.0)
    with pytest.raises(OptionError, match="needs --decay"):
        access_index(trips, "gravity", S)
    with pytest.raises(OptionError, match="--decay-param"):
        access_index(trips, "gravity", S, decay="power", decay_param=0.0)
    with pytest.raises(OptionError, match="population"):
        access_index(trips, "2sfca", S)
    with pytest.raises(OptionError, match="beyond the catchment"):
        access_index(trips, "e2sfca", S, D, zones=[10, 20, 40], zone_weights=[1, 0.5, 0.1])
    with pytest.raises(OptionError, match="one weight per zone"):
        access_index(trips, "e2sfca", S, D, zones=[10, 30], zone_weights=[1, 0.5, 0.1])
    with pytest.raises(OptionError, match="positive bound"):
        catchment_bound("2sfca", 0.0)
    with pytest.raises(OptionError, match="positive bound"):
        catchment_bound("cumulative", -5.0)
    with pytest.raises(OptionError, match="needs --within-minutes"):
        catchment_bound("2sfca", None)
    assert catchment_bound("gravity", None) == np.inf
    assert catchment_bound("e2sfca", None, zones=[5, 15, 45]) == 45.0


def test_no_pairs_gives_float_zeros():
    z = np.zeros(0, np.int64)
    for index in (M.cumulative(z, z, S, 3), M.gravity(z, z, np.zeros(0), S, 3, "power", 1.0),
                  M.two_step(z, z, S, D, 3)[0], M.enhanced_two_step(z, z, np.zeros(0), S, D, 3, [10.0], [1.0])[0],
                  M.balanced(z, z, S, D, 3)[0]):
        assert index.dtype == np.float64 and index.tolist() == [0.0, 0.0, 0.0]

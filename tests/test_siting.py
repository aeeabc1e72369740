"""Location models against brute-force enumeration, LP bounds and the p-median of a path.

Sources (written beside each check):
* Church, R. and ReVelle, C. (1974). The maximal covering location problem. Papers of the Regional
  Science Association 32: coverage = people within T of an open facility.
* Hakimi, S. L. (1964). Operations Research 12(3); ReVelle, C. S. and Swain, R. W. (1970).
  Geographical Analysis 2(1): the p-median, total weighted distance to the nearest open facility.
* Teitz, M. B. and Bart, P. (1968). Operations Research 16(5): vertex substitution, a heuristic, so its
  objective can never beat a valid lower (upper, for coverage) bound such as the LP relaxation's.
* The 1-median of weighted points on a line is a weighted median (common practice; e.g. Hakimi 1964's
  vertex optimality on a path), and an optimal p-median on a line splits the points into contiguous
  clusters, each served at its weighted median, which a dynamic programme over the sorted points finds
  (Hassin, R. and Tamir, A. (1991). Improved complexity bounds for location problems on the real line.
  Operations Research Letters 10(7), 395-402).
"""

from __future__ import annotations

import itertools
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network, random_network  # noqa: E402

from geo_reach.analysis.attach import attach_points  # noqa: E402
from geo_reach.analysis.trips import od_matrix  # noqa: E402
from geo_reach.analysis.siting import build_problem, choose_sites, solve, solve_milp  # noqa: E402
from geo_reach.errors import OptionError  # noqa: E402

SETTINGS = settings(max_examples=40, deadline=None)
TOL = 1e-7


# ------------------------------------------------------------------ brute-force references
def coverage_people(D, e, C, S, T):
    """People within T of an existing hub (cost e) or an open candidate (columns S of C): Church and
    ReVelle's (1974) objective, evaluated directly."""
    near = np.minimum(e, C[:, list(S)].min(axis=1)) if len(S) else e
    return float(D[near <= T].sum())


def median_minutes(D, e, C, S, T):
    """Person-minutes to the nearest open hub (Hakimi 1964), candidates counting only within T.
    A settlement that some hub or candidate reaches but no open one does counts U = (largest finite
    cost) + 1 per person; one that nothing reaches is left out (the rule of geo-reach sites)."""
    Cw = np.where(C <= T, C, np.inf)
    fin = np.concatenate([e[np.isfinite(e)], Cw[np.isfinite(Cw)]])
    U = (fin.max() if len(fin) else 0.0) + 1.0
    any_reach = np.isfinite(e) | np.isfinite(Cw).any(axis=1)
    near = np.minimum(e, Cw[:, list(S)].min(axis=1)) if len(S) else e.copy()
    near = np.where(np.isfinite(near), near, U)
    return float(D[any_reach] @ near[any_reach])


def brute_force(objective, D, e, C, T, p):
    K = C.shape[1]
    if objective == "coverage":
        return max(coverage_people(D, e, C, S, T) for S in itertools.combinations(range(K), p))
    return min(median_minutes(D, e, C, S, T) for S in itertools.combinations(range(K), p))


def network_instance(seed, objective):
    """Settlement-candidate and settlement-hub costs from a random network (od_matrix), as geo-reach
    prices trips."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, 30, 90, nan_prob=0.05)
    n, K, H = int(rng.integers(4, 25)), int(rng.integers(2, 13)), int(rng.integers(0, 3))
    s_xy = rng.uniform(0, 5000, (n, 2))
    c_xy = rng.uniform(0, 5000, (K, 2))
    sa = attach_points(net, s_xy, "minutes")
    C = od_matrix(net, sa, attach_points(net, c_xy, "minutes"), "minutes").cost
    e = (od_matrix(net, sa, attach_points(net, rng.uniform(0, 5000, (H, 2)), "minutes"), "minutes").cost.min(axis=1)
         if H else np.full(n, np.inf))
    D = np.round(rng.uniform(0, 500, n))
    fin = np.unique(C[np.isfinite(C)])
    if objective == "coverage" or rng.random() < 0.5:
        T = float(fin[len(fin) // 3] + fin[len(fin) // 3 + 1]) / 2 if len(fin) > 2 else 30.0
    else:
        T = np.inf
    return net, s_xy, c_xy, D, e, C, T, int(rng.integers(1, min(3, K) + 1)), rng


def problem_of(objective, D, e, C, T):
    i, k = np.nonzero(np.isfinite(C) & (C <= T))
    return build_problem(objective, D, e, i, k, C[i, k], C.shape[1], T), (i, k, C[i, k])


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), objective=st.sampled_from(["coverage", "total-minutes"]))
def test_exact_equals_brute_force_and_heuristic_respects_the_bound(seed, objective):
    """Up to 12 candidates, P up to 3: the integer programme's objective equals enumeration of every set
    of P candidates; the heuristic's never beats the LP-relaxation bound, and equals the optimum here."""
    _, _, _, D, e, C, T, p, _ = network_instance(seed, objective)
    pr, _ = problem_of(objective, D, e, C, T)
    best = brute_force(objective, D, e, C, T, p)
    ex = solve(pr, p, method="exact")
    assert ex.optimal and ex.gap == 0.0 and ex.method == "exact"
    assert ex.objective == pytest.approx(best, rel=TOL, abs=TOL)
    # the chosen set scores its objective in the brute-force evaluation too
    score = (coverage_people if objective == "coverage" else median_minutes)(D, e, C, ex.sites, T)
    assert score == pytest.approx(best, rel=TOL, abs=TOL)
    # the integer programme itself (solve may stop at an integral LP solution without running it)
    mi = solve_milp(pr, p)
    assert mi.proven and pr.reported(pr.value(mi.sites)) == pytest.approx(best, rel=TOL, abs=TOL)
    he = solve(pr, p, method="heuristic")
    assert he.method == "heuristic" and he.bound is not None
    if objective == "coverage":      # maximise: the LP bound is an upper bound
        assert he.objective <= he.bound + TOL * max(1.0, abs(he.bound))
    else:                            # minimise: a lower bound
        assert he.objective >= he.bound - TOL * max(1.0, abs(he.bound))
    assert he.objective == pytest.approx(best, rel=TOL, abs=TOL)
    assert he.gap >= 0.0


@pytest.mark.parametrize("seed", range(150))
def test_exact_and_heuristic_on_random_cost_tables(seed):
    """Random (non-network) cost tables, where local search is weakest: exact == enumeration, and the
    heuristic (greedy + substitution from several starts) reaches the optimum."""
    rng = np.random.default_rng(seed)
    objective = ("coverage", "total-minutes")[seed % 2]
    n, K = int(rng.integers(3, 30)), int(rng.integers(2, 13))
    p = int(rng.integers(1, min(3, K) + 1))
    C = rng.uniform(0, 60, (n, K))
    C[rng.random((n, K)) < 0.3] = np.inf
    e = rng.uniform(10, 80, n)
    e[rng.random(n) < 0.3] = np.inf
    T = 30.0 if objective == "coverage" else (np.inf, 40.0)[seed % 4 // 2]
    D = rng.uniform(0, 100, n)
    pr, _ = problem_of(objective, D, e, C, T)
    best = brute_force(objective, D, e, C, T, p)
    assert solve(pr, p, method="exact").objective == pytest.approx(best, rel=TOL, abs=TOL)
    mi = solve_milp(pr, p)
    assert mi.proven and pr.reported(pr.value(mi.sites)) == pytest.approx(best, rel=TOL, abs=TOL)
    assert solve(pr, p, method="heuristic").objective == pytest.approx(best, rel=TOL, abs=TOL)


# ------------------------------------------------------------------ the p-median of a path
def line_median_dp(x, w, p):
    """Optimal p-median of weighted points on a line by dynamic programming over contiguous clusters
    (Hassin and Tamir 1991), each cluster served at its best point (brute force over its points)."""
    order = np.argsort(x)
    x, w = x[order], w[order]
    n = len(x)
    one = np.full((n, n), np.inf)
    for a in range(n):
        for b in range(a, n):
            seg = slice(a, b + 1)
            one[a, b] = min(float(w[seg] @ np.abs(x[seg] - x[m])) for m in range(a, b + 1))
    best = np.full((p + 1, n + 1), np.inf)
    best[0, 0] = 0.0
    for q in range(1, p + 1):
        for b in range(1, n + 1):
            best[q, b] = min(best[q - 1, a] + one[a, b - 1] for a in range(b))
    return float(best[p, n])


@pytest.mark.parametrize("seed", range(12))
def test_p_median_on_a_path(seed):
    """Settlements on a straight road (1 minute per km); candidate sites at the settlements.  Every open
    site is a weighted median of the settlements it serves, and the total equals the line DP."""
    rng = np.random.default_rng(seed)
    nodes = 41
    xy = np.column_stack([np.arange(nodes) * 1000.0, np.zeros(nodes)])
    net = make_network([(a, a + 1) for a in range(nodes - 1)], xy, minutes=1.0)
    n = int(rng.integers(6, 14))
    x = np.sort(rng.choice(np.arange(1, 40_000, 250), n, replace=False)).astype(float)   # metres along
    s_xy = np.column_stack([x, np.zeros(n)])
    D = np.round(rng.uniform(1, 100, n))
    p = int(rng.integers(2, 4))
    res = choose_sites(net, s_xy, D, np.zeros((0, 2)), s_xy, p, "total-minutes", method="exact")
    assert res.optimal
    km = x / 1000.0
    assert res.objective == pytest.approx(line_median_dp(km, D, p), rel=1e-9)
    sites = km[res.sites]
    serve = np.argmin(np.abs(km[:, None] - sites[None, :]), axis=1)
    for s in range(p):
        members = serve == s
        w, pos = D[members], km[members]
        total = w.sum()
        # weighted median: at most half of the cluster's weight lies strictly on either side
        assert w[pos < sites[s]].sum() <= total / 2 + 1e-9
        assert w[pos > sites[s]].sum() <= total / 2 + 1e-9


# ------------------------------------------------------------------ gains, limits and refusals
def test_site_gains_add_up():
    """People newly within T add up to the coverage gain; with every settlement already reaching a hub,
    person-minutes saved add up to the total-minutes gain."""
    rng = np.random.default_rng(5)
    nodes = 21
    xy = np.column_stack([np.arange(nodes) * 1000.0, np.zeros(nodes)])
    net = make_network([(a, a + 1) for a in range(nodes - 1)], xy, minutes=1.0)
    s_xy = np.column_stack([rng.uniform(0, 20_000, 15), rng.uniform(-200, 200, 15)])
    D = np.round(rng.uniform(1, 100, 15))
    hub = [[0.0, 0.0]]
    cand = np.column_stack([np.arange(1, 20) * 1000.0, np.zeros(19)])
    cov = choose_sites(net, s_xy, D, hub, cand, 3, "coverage", within=4.0)
    assert cov.people_newly_within.sum() == pytest.approx(cov.objective - cov.objective_before)
    assert np.all(np.diff(cov.people_newly_within) <= 1e-9)         # greedy pick order: biggest first
    med = choose_sites(net, s_xy, D, hub, cand, 3, "total-minutes")
    assert med.person_minutes_saved.sum() == pytest.approx(med.objective_before - med.objective)
    assert np.all(np.diff(med.person_minutes_saved) <= 1e-9)
    assert med.people_unreachable == 0.0


def test_auto_switches_to_the_heuristic_past_the_size_limit():
    rng = np.random.default_rng(2)
    C = rng.uniform(0, 60, (40, 12))
    D = rng.uniform(1, 100, 40)
    pr, _ = problem_of("coverage", D, np.full(40, np.inf), C, 20.0)
    res = solve(pr, 3, exact_max_size=10)
    assert res.method == "heuristic" and res.bound is not None and res.bound >= res.objective - 1e-9
    assert any("past the exact limit" in n for n in res.notes)
    # with a time limit already spent, the integer programme hands over to the heuristic
    res = solve(pr, 3, method="exact", time_limit=0.0)
    assert res.method in ("exact", "exact+heuristic")
    if res.method == "exact+heuristic":
        assert any("before proving optimality" in n for n in res.notes)
    assert res.objective == pytest.approx(brute_force("coverage", D, np.full(40, np.inf), C, 20.0, 3), rel=TOL)


def test_refusals():
    C = np.array([[1.0, 2.0], [3.0, 4.0]])
    pr, _ = problem_of("total-minutes", np.ones(2), np.full(2, np.inf), C, np.inf)
    with pytest.raises(OptionError, match="--count 3"):
        solve(pr, 3)
    with pytest.raises(OptionError, match="--count 0"):
        solve(pr, 0)
    with pytest.raises(OptionError, match="needs --within-minutes"):
        build_problem("coverage", np.ones(2), np.full(2, np.inf), [0], [0], [1.0], 2, np.inf)
    with pytest.raises(OptionError, match="not an objective"):
        build_problem("nearest", np.ones(2), np.full(2, np.inf), [0], [0], [1.0], 2, 5.0)
    net = make_network([(0, 1)], np.array([[0.0, 0.0], [1000.0, 0.0]]))
    with pytest.raises(OptionError, match="positive bound"):
        choose_sites(net, [[0, 0]], [1], np.zeros((0, 2)), [[10, 0]], 1, "coverage", within=0.0)
    import geo_reach.analysis.siting.solver as S

    keep = S.MAX_UNBOUNDED_PAIRS
    try:
        S.MAX_UNBOUNDED_PAIRS = 3
        with pytest.raises(OptionError, match="give --within-minutes"):
            choose_sites(net, [[0, 0], [5, 0]], [1, 1], np.zeros((0, 2)), [[10, 0], [20, 0]], 1, "total-minutes")
        assert choose_sites(net, [[0, 0], [5, 0]], [1, 1], np.zeros((0, 2)), [[10, 0], [20, 0]], 1, "total-minutes",
                            within=5.0).optimal
    finally:
        S.MAX_UNBOUNDED_PAIRS = keep

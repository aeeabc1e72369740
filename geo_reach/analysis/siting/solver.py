"""Choose where P new hubs should go: exact when the integer programme is small enough, else greedy plus substitution.

:func:`solve` picks the method, runs it and reports the objective, whether it
is proven optimal, a bound and the gap; :func:`site_gains` says what each
chosen site adds, in pick order; :func:`choose_sites` runs the whole chain
from points (costs by :func:`~geo_reach.analysis.indices.trips.trip_costs`).

Results are model estimates; local surveys, codes and licensed professional
practice decide.

References
----------
.. [1] Church, R. and ReVelle, C. (1974). The maximal covering location
   problem. Papers of the Regional Science Association 32, 101-118.
.. [2] Hakimi, S. L. (1964). Optimum locations of switching centers and the
   absolute centers and medians of a graph. Operations Research 12(3),
   450-459.
.. [3] ReVelle, C. S. and Swain, R. W. (1970). Central facilities location.
   Geographical Analysis 2(1), 30-42.
.. [4] Teitz, M. B. and Bart, P. (1968). Heuristic methods for estimating
   the generalized vertex median of a weighted graph. Operations Research
   16(5), 955-961.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from ...errors import OptionError
from .exact import model_size, solve_milp
from .heuristic import multi_start
from .problem import OBJECTIVES, SitingProblem, build_problem

__all__ = ["SitingResult", "solve", "site_gains", "choose_sites", "METHODS", "EXACT_MAX_SIZE", "LP_MAX_SIZE",
           "MAX_UNBOUNDED_PAIRS"]

#: Ways to solve: ``auto`` (exact up to :data:`EXACT_MAX_SIZE`, else heuristic), ``exact``, ``heuristic``.
METHODS = ("auto", "exact", "heuristic")
#: Largest integer programme (constraint nonzeros) solved exactly by ``auto``: a few thousand candidates by
#: a few thousand settlements with a bound T.  Past it, greedy plus vertex substitution.
EXACT_MAX_SIZE = 3_000_000
#: Largest LP relaxation attempted for the bound of a heuristic solution (constraint nonzeros).
LP_MAX_SIZE = 30_000_000
#: Largest candidates x settlements table kept without a bound T (total-minutes); past it T is required.
MAX_UNBOUNDED_PAIRS = 20_000_000


@dataclass
class SitingResult:
    """The chosen sites and how good they are.

    Attributes
    ----------
    objective_name : str
        ``coverage`` or ``total-minutes``.
    sites : ndarray of int64
        Chosen candidates, in pick order (see :func:`site_gains`).
    people_newly_within : ndarray of float64
        People each site brings within T of an open hub for the first time,
        given the existing hubs and the sites before it (without T: people
        who reach a hub for the first time).
    person_minutes_saved : ndarray of float64
        Person-minutes each site saves for people who already reached a hub
        (weight's unit x people), given the same.
    objective : float
        People within T of an open hub (coverage, to maximise) or total
        person-minutes to the nearest open hub (total-minutes, to minimise;
        people no open hub reaches count ``unreached_cost`` each).
    objective_before : float
        The same with the existing hubs only.
    optimal : bool
        Proven optimal.
    bound : float or None
        A bound on the best objective: upper for coverage, lower for
        total-minutes (the integer programme's dual bound, or the LP
        relaxation's optimum); None when none could be computed.
    gap : float or None
        |bound - objective| / |objective or bound|, 0 when proven optimal.
    method : str
        ``exact``, ``heuristic`` or ``exact+heuristic`` (time limit reached).
    unreached_cost : float
        U (total-minutes only; NaN for coverage).
    people_unreachable : float
        People that no hub and no candidate reaches (outside the objective).
    starts : int
        Heuristic starts run (0 when not used).
    seconds : float
    notes : list of str
    """

    objective_name: str
    sites: np.ndarray
    people_newly_within: np.ndarray
    person_minutes_saved: np.ndarray
    objective: float
    objective_before: float
    optimal: bool
    bound: float | None
    gap: float | None
    method: str
    unreached_cost: float
    people_unreachable: float
    starts: int = 0
    seconds: float = 0.0
    notes: list = field(default_factory=list)

    def summary(self) -> dict:
        """The figures ``--json`` prints."""
        return {"objective_name": self.objective_name, "objective": self.objective,
                "objective_before": self.objective_before, "optimal": self.optimal, "bound": self.bound,
                "gap": self.gap, "method": self.method, "heuristic_starts": self.starts,
                "unreached_cost": None if not np.isfinite(self.unreached_cost) else self.unreached_cost,
                "people_unreachable": self.people_unreachable, "notes": list(self.notes),
                "timing": {"seconds": round(self.seconds, 3)}}


def _gap(problem: SitingProblem, f: float, f_bound: float):
    if not np.isfinite(f_bound):
        return None, None
    f_bound = min(f_bound, f)     # a bound past the solution is rounding
    rep, rb = problem.reported(f), problem.reported(f_bound)
    den = max(abs(rb), abs(rep))
    return rb, (abs(rb - rep) / den if den > 0 else 0.0)


def solve(problem: SitingProblem, p: int, *, method: str = "auto", time_limit: float = 300.0,
          exact_max_size: int = EXACT_MAX_SIZE, restarts: int = 8, seed: int = 0) -> SitingResult:
    """Choose ``p`` sites for ``problem``.

    Parameters
    ----------
    problem : SitingProblem
    p : int
        Sites to open, 1..n_candidates.
    method : {'auto', 'exact', 'heuristic'}, default 'auto'
        ``auto``: the integer programme when its size (constraint nonzeros)
        is at most ``exact_max_size``, else greedy plus vertex substitution
        with the LP-relaxation bound.
    time_limit : float, default 300
        Seconds for the integer programme; past it its best solution and
        bound are kept and the heuristic runs too (the better solution wins).
        The heuristic starts no new random start past it either.
    restarts : int, default 8
        Seeded random starts of the heuristic after the greedy one.

    Returns
    -------
    SitingResult
        ``sites`` as chosen (not yet in pick order; see :func:`site_gains`).

    References
    ----------
    .. [1] Church, R. and ReVelle, C. (1974). Papers of the Regional Science
       Association 32, 101-118.
    .. [2] ReVelle, C. S. and Swain, R. W. (1970). Geographical Analysis
       2(1), 30-42.
    .. [3] Teitz, M. B. and Bart, P. (1968). Operations Research 16(5),
       955-961.
    """
    if method not in METHODS:
        raise OptionError(f"method '{method}': choose one of {', '.join(METHODS)}")
    K = problem.n_candidates
    if not 1 <= p <= K:
        raise OptionError(f"--count {p}: give 1 to {K} (the number of candidates)")
    t0 = time.perf_counter()
    notes: list[str] = []
    size = model_size(problem)
    exact = method == "exact" or (method == "auto" and size <= exact_max_size)
    sites, f, f_bound, optimal, used, starts = None, np.inf, -np.inf, False, [], 0
    if exact:
        used.append("exact")
        # the LP relaxation first: it is the bound, and when its solution is integral it is optimal
        lp = solve_milp(problem, p, time_limit=time_limit, relax=True)
        f_bound = lp.f_bound
        if lp.sites is not None and len(lp.sites) == p and np.isfinite(lp.f_bound):
            fl = problem.value(lp.sites)
            if fl <= lp.f_bound + 1e-7 * max(1.0, abs(fl)):
                sites, f, optimal = lp.sites, fl, True
                notes.append("the LP relaxation's solution is integral, hence optimal")
        if not optimal:
            out = solve_milp(problem, p, time_limit=max(time_limit - (time.perf_counter() - t0), 0.0))
            if out.sites is not None and len(out.sites) == p:
                sites, f = out.sites, problem.value(out.sites)
            f_bound = max(f_bound, out.f_bound)
            optimal = out.proven
            if not optimal:
                notes.append(f"the integer programme stopped before proving optimality ({out.message.strip()}); "
                             "greedy plus vertex substitution ran too")
    else:
        notes.append(f"the integer programme ({size:,} nonzeros) is past the exact limit ({exact_max_size:,}): "
                     "greedy plus vertex substitution, with the LP-relaxation bound")
    if not optimal:
        h, starts = multi_start(problem, p, restarts=restarts, seed=seed, deadline=t0 + time_limit)
        used.append("heuristic")
        fh = problem.value(h)
        if sites is None or fh < f:
            sites, f = h, fh
        if not exact:
            if size <= LP_MAX_SIZE:
                lp = solve_milp(problem, p, time_limit=max(time_limit - (time.perf_counter() - t0), 1.0), relax=True)
                if np.isfinite(lp.f_bound):
                    f_bound = lp.f_bound
                else:
                    notes.append(f"the LP relaxation did not finish ({lp.message.strip()}): no bound")
            else:
                notes.append(f"the LP relaxation ({size:,} nonzeros) is too large to bound this solution: no bound")
    bound, gap = _gap(problem, f, f_bound)
    if optimal:
        bound, gap = problem.reported(f), 0.0
    elif gap is not None and gap == 0.0:
        optimal = True      # the solution meets the bound
    return SitingResult(problem.objective, np.asarray(sites, np.int64), np.zeros(p), np.zeros(p), problem.reported(f),
                        problem.reported(problem.value([])), optimal, bound, gap, "+".join(used),
                        problem.unreached if problem.objective == "total-minutes" else np.nan,
                        problem.people_unreachable, starts, time.perf_counter() - t0, notes)


def site_gains(problem: SitingProblem, sites, demand, existing_cost, i, k, c, within: float):
    """Pick order of ``sites`` and what each adds, given the existing hubs and the sites before it.

    The order is greedy on the objective (the site adding most first), so the
    first sites are the ones to build first.

    Parameters
    ----------
    problem : SitingProblem
        For the order.
    sites : array_like of int
    demand, existing_cost : array_like, shape (n,)
        Population, and least cost to an existing hub (``inf``: none).
    i, k, c : array_like
        Every settlement-candidate pair within T, with its cost.
    within : float
        T (``inf``: none).

    Returns
    -------
    order : ndarray of int64
        The sites in pick order.
    people_newly_within, person_minutes_saved : ndarray of float64
        Per site in that order (see :class:`SitingResult`).

    References
    ----------
    .. [1] Church, R. and ReVelle, C. (1974). The maximal covering location
       problem. Papers of the Regional Science Association 32, 101-118.
    .. [2] Hakimi, S. L. (1964). Operations Research 12(3), 450-459.
    """
    sites = [int(s) for s in sites]
    d = np.asarray(demand, dtype=np.float64)
    i = np.asarray(i, np.int64)
    k = np.asarray(k, np.int64)
    c = np.asarray(c, dtype=np.float64)
    m = c <= within
    i, k, c = i[m], k[m], c[m]
    # pick order: greedy on F among the chosen sites
    left = list(sites)
    order = []
    cur = problem.base.copy()
    while left:
        gains = []
        for s in left:
            mm = problem.k == s
            gains.append(float(np.sum(problem.demand[problem.i[mm]] * np.maximum(0.0, cur[problem.i[mm]]
                                                                                   - problem.c[mm]))))
        s = left.pop(int(np.argmax(gains)))
        order.append(s)
        mm = problem.k == s
        np.minimum.at(cur, problem.i[mm], problem.c[mm])
    # what each adds, on the plain costs
    cost = np.asarray(existing_cost, dtype=np.float64).copy()
    newly, saved = [], []
    for s in order:
        mm = k == s
        ii, cc = i[mm], c[mm]
        before = cost[ii]
        reached = np.isfinite(before) & (before <= within)
        newly.append(float(d[ii][~reached].sum()))
        had = np.isfinite(before)
        saved.append(float(np.sum(d[ii][had] * np.maximum(0.0, before[had] - cc[had]))))
        np.minimum.at(cost, ii, cc)
    return np.array(order, np.int64), np.array(newly), np.array(saved)


def choose_sites(network, settlement_xy, demand, hub_xy, candidate_xy, p: int, objective: str, *,
                 within=None, weight: str = "minutes", max_access_m: float = 5000.0, walk_kmh: float = 5.0,
                 method: str = "auto", time_limit: float = 300.0, restarts: int = 8,
                 executor=None) -> SitingResult:
    """Where P new hubs should go: the whole chain from points.

    Parameters
    ----------
    network : Network
    settlement_xy : array_like, shape (n, 2)
        Settlements in the working CRS (metres).
    demand : array_like, shape (n,)
        Their population.
    hub_xy : array_like, shape (h, 2)
        Existing hubs (of the kind sited), open whatever is chosen; may be empty.
    candidate_xy : array_like, shape (K, 2)
        Candidate sites.
    p : int
    objective : {'coverage', 'total-minutes'}
    within : float, optional
        T in the weight's unit: the coverage radius (needed for coverage);
        for total-minutes, a bound on the searches (a site counts for a
        settlement only within T; default: unbounded).
    weight, max_access_m, walk_kmh
        As in :func:`~geo_reach.analysis.indices.trips.trip_costs`.
    method, time_limit, restarts
        As in :func:`solve`.
    executor : geo_reach.parallel.Executor, optional
        Where the settlement-candidate searches run (default: here); the
        same costs either way.

    Returns
    -------
    SitingResult
        Sites in pick order with their gains.

    Notes
    -----
    Costs: one call of :func:`~geo_reach.analysis.indices.trips.trip_costs`
    with the existing hubs and the candidates: the nearest existing hub
    (unbounded) and every settlement-candidate pair within T.

    References
    ----------
    .. [1] Church, R. and ReVelle, C. (1974). The maximal covering location
       problem. Papers of the Regional Science Association 32, 101-118.
    .. [2] Hakimi, S. L. (1964). Optimum locations of switching centers and
       the absolute centers and medians of a graph. Operations Research
       12(3), 450-459.
    .. [3] ReVelle, C. S. and Swain, R. W. (1970). Central facilities
       location. Geographical Analysis 2(1), 30-42.
    .. [4] Teitz, M. B. and Bart, P. (1968). Operations Research 16(5),
       955-961.
    """
    from ..indices.trips import trip_costs

    if objective not in OBJECTIVES:
        raise OptionError(f"--objective '{objective}' is not an objective; choose one of {', '.join(OBJECTIVES)}")
    t = np.inf if within is None else float(within)
    if not t > 0:
        raise OptionError(f"--within-minutes {within}: give a positive bound")
    if objective == "coverage" and not np.isfinite(t):
        raise OptionError("--objective coverage needs --within-minutes T (the people within T are counted)")
    s_xy = np.asarray(settlement_xy, dtype=np.float64).reshape(-1, 2)
    c_xy = np.asarray(candidate_xy, dtype=np.float64).reshape(-1, 2)
    h_xy = np.asarray(hub_xy, dtype=np.float64).reshape(-1, 2)
    if not 1 <= p <= len(c_xy):
        raise OptionError(f"--count {p}: give 1 to {len(c_xy)} (the number of candidates)")
    if not np.isfinite(t) and (len(c_xy) + len(h_xy)) * len(s_xy) > MAX_UNBOUNDED_PAIRS:
        raise OptionError(f"{len(c_xy):,} candidates (and {len(h_xy):,} hubs) x {len(s_xy):,} settlements without a "
                          f"bound would keep up to {(len(c_xy) + len(h_xy)) * len(s_xy):,} trip costs; give "
                          "--within-minutes T (a site then counts for a settlement only within T)")
    kw = dict(weight=weight, max_access_m=max_access_m, walk_kmh=walk_kmh)
    notes = []
    # one call: the existing hubs first (nearest among them, unbounded), then the candidates (pairs within T)
    h = len(h_xy)
    both = trip_costs(network, s_xy, np.vstack([h_xy, c_xy]), within=t, nearest_among=np.arange(h),
                      executor=executor, **kw)
    existing = both.nearest_cost if h else np.full(len(s_xy), np.inf)
    if (~both.hub_attached[:h]).any():
        notes.append(f"{int((~both.hub_attached[:h]).sum())} existing hubs farther than {max_access_m:g} m from the "
                     "network are left out")
    cand = both.subset_hubs(np.arange(h, h + len(c_xy)))
    problem = build_problem(objective, demand, existing, cand.settlement, cand.hub, cand.cost, len(c_xy), t)
    res = solve(problem, p, method=method, time_limit=time_limit, restarts=restarts)
    order, newly, saved = site_gains(problem, res.sites, demand, existing, cand.settlement, cand.hub, cand.cost, t)
    res.sites, res.people_newly_within, res.person_minutes_saved = order, newly, saved
    far = int((~cand.settlement_attached).sum())
    if far:
        notes.append(f"{far} settlements farther than {max_access_m:g} m from the network reach no hub or site")
    res.notes = notes + res.notes
    return res

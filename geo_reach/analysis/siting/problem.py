"""The location problems in one form: choose P candidate sites to minimise F(S) = sum_i D_i min(b_i, min_k in S c_ik).

``b_i`` is settlement i's cost with the existing hubs only (they count as
open), ``c_ik`` its cost to candidate k, kept only where it beats ``b_i``
(the only pairs a new site can change).  Both objectives of ``geo-reach
sites`` are this form:

coverage (maximal covering location problem, Church and ReVelle 1974)
    b_i = 0 if an existing hub is within T, else 1; c_ik = 0 for the
    candidates within T.  F is the people left beyond T of every open hub;
    the objective reported is the people within T, sum_i D_i - F.
total-minutes (p-median problem, Hakimi 1964; ReVelle and Swain 1970)
    b_i = the least cost to an existing hub; c_ik = the trip cost to
    candidate k (within T when a bound is given).  A settlement that no
    existing hub reaches has b_i = U, the largest trip cost in the problem
    plus one minute, so reaching it always beats not reaching it.  Settlements
    that nothing reaches (no hub and no candidate) are left out of F and
    reported apart.  F is the total person-minutes to the nearest open hub.

References
----------
.. [1] Church, R. and ReVelle, C. (1974). The maximal covering location
   problem. Papers of the Regional Science Association 32, 101-118.
.. [2] Hakimi, S. L. (1964). Optimum locations of switching centers and the
   absolute centers and medians of a graph. Operations Research 12(3),
   450-459.
.. [3] ReVelle, C. S. and Swain, R. W. (1970). Central facilities location.
   Geographical Analysis 2(1), 30-42.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import OptionError

__all__ = ["OBJECTIVES", "SitingProblem", "build_problem"]

#: The objectives, as the command line names them.
OBJECTIVES = ("coverage", "total-minutes")


@dataclass(frozen=True)
class SitingProblem:
    """One instance of F(S) = sum_i D_i min(b_i, min over k in S of c_ik) (see the module notes).

    Attributes
    ----------
    objective : {'coverage', 'total-minutes'}
    demand : ndarray of float64, shape (n,)
        D_i (population); 0 for settlements left out.
    base : ndarray of float64, shape (n,)
        b_i.
    i, k : ndarray of int64, shape (q,)
        Settlement and candidate of each improving pair (sorted by i, then k).
    c : ndarray of float64, shape (q,)
        c_ik < b_i.
    n_candidates : int
    within : float
        T (``inf``: none).
    unreached : float
        U, the cost of reaching no hub (total-minutes); 1 for coverage.
    people_unreachable : float
        People reached by no hub and no candidate (left out of F).
    total_demand : float
        Sum of D over every settlement (for the coverage objective).
    """

    objective: str
    demand: np.ndarray
    base: np.ndarray
    i: np.ndarray
    k: np.ndarray
    c: np.ndarray
    n_candidates: int
    within: float
    unreached: float
    people_unreachable: float
    total_demand: float

    @property
    def n_settlements(self) -> int:
        return len(self.demand)

    def value(self, sites) -> float:
        """F(S) for the open candidate set ``sites`` (direct evaluation, O(pairs))."""
        cur = self.costs(sites)
        return float(self.demand @ cur)

    def costs(self, sites) -> np.ndarray:
        """min(b_i, min over k in S of c_ik) per settlement."""
        open_ = np.zeros(self.n_candidates, bool)
        open_[np.asarray(sites, dtype=np.int64)] = True
        cur = self.base.copy()
        m = open_[self.k]
        np.minimum.at(cur, self.i[m], self.c[m])
        return cur

    def reported(self, f: float) -> float:
        """The objective as reported: people within T (coverage) or person-minutes (total-minutes)."""
        return float(self.total_demand - f) if self.objective == "coverage" else float(f)

    @property
    def maximise(self) -> bool:
        return self.objective == "coverage"


def build_problem(objective: str, demand, existing_cost, i, k, c, n_candidates: int, within: float) -> SitingProblem:
    """Make the instance from the settlements' demand, their cost to the existing hubs and the candidate pairs.

    Parameters
    ----------
    objective : {'coverage', 'total-minutes'}
    demand : array_like of float, shape (n,)
        Population of each settlement (zero or more).
    existing_cost : array_like of float, shape (n,)
        Least cost to an existing hub, unbounded (``inf`` where none is reachable or there are none).
    i, k, c : array_like
        Settlement, candidate and cost of every pair within T.
    n_candidates : int
    within : float
        T (``inf`` for none; coverage needs a finite T).

    Returns
    -------
    SitingProblem
    """
    if objective not in OBJECTIVES:
        raise OptionError(f"--objective '{objective}' is not an objective; choose one of {', '.join(OBJECTIVES)}")
    d = np.asarray(demand, dtype=np.float64)
    e = np.asarray(existing_cost, dtype=np.float64)
    i = np.asarray(i, np.int64)
    k = np.asarray(k, np.int64)
    c = np.asarray(c, dtype=np.float64)
    keep = c <= within
    i, k, c = i[keep], k[keep], c[keep]
    n = len(d)
    total = float(d.sum())
    if objective == "coverage":
        if not np.isfinite(within):
            raise OptionError("--objective coverage needs --within-minutes T (the people within T are counted)")
        covered = e <= within
        base = np.where(covered, 0.0, 1.0)
        keep = ~covered[i]
        i, k, c = i[keep], k[keep], np.zeros(int(keep.sum()))
        unreached = 1.0
        unreachable = 0.0
    else:
        fin = np.isfinite(e)
        has_pair = np.zeros(n, bool)
        has_pair[i] = True
        big = max(float(e[fin].max()) if fin.any() else 0.0, float(c.max()) if len(c) else 0.0)
        unreached = big + 1.0
        base = np.where(fin, e, unreached)
        nothing = ~fin & ~has_pair
        unreachable = float(d[nothing].sum())
        d = np.where(nothing, 0.0, d)
        base = np.where(nothing, 0.0, base)
        keep = c < base[i]
        i, k, c = i[keep], k[keep], c[keep]
    order = np.lexsort((k, i))
    return SitingProblem(objective, d, base, i[order], k[order], c[order], int(n_candidates), float(within),
                         unreached, unreachable, total)

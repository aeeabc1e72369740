"""Exact solutions and LP-relaxation bounds of the location problems, as integer programmes solved by HiGHS.

coverage: Church and ReVelle's (1974) maximal covering model: binary x_k
(site k open), y_i in [0, 1] (settlement i newly covered); maximise sum D_i
y_i subject to y_i <= sum of x_k over the candidates k within T of i, and
sum x_k = P.  (y may be continuous: at integral x its best value is 0 or 1.)

total-minutes: ReVelle and Swain's (1970) p-median model, with the existing
hubs as a fallback: binary x_k, z_ik in [0, 1] (i served by k); minimise
sum D_i (c_ik - b_i) z_ik subject to z_ik <= x_k, sum over k of z_ik <= 1
(the rest stays with the existing hubs at b_i) and sum x_k = P.

Both run through :func:`scipy.optimize.milp` (HiGHS; Huangfu and Hall 2018)
with a relative gap of 0, so "optimal" means proven optimal.

References
----------
.. [1] Church, R. and ReVelle, C. (1974). The maximal covering location
   problem. Papers of the Regional Science Association 32, 101-118.
.. [2] ReVelle, C. S. and Swain, R. W. (1970). Central facilities location.
   Geographical Analysis 2(1), 30-42.
.. [3] Huangfu, Q. and Hall, J. A. J. (2018). Parallelizing the dual revised
   simplex method. Mathematical Programming Computation 10(1), 119-142.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.optimize import Bounds, LinearConstraint, milp

from .problem import SitingProblem

__all__ = ["MilpOutcome", "solve_milp", "model_size"]


@dataclass(frozen=True)
class MilpOutcome:
    """What HiGHS returned, in terms of F (see :mod:`geo_reach.analysis.siting.problem`).

    Attributes
    ----------
    sites : ndarray of int64 or None
        The open candidates of the best solution found (None: none found).
        For a relaxation, the open candidates when its x is integral (then
        they are an optimal integer solution), else None.
    proven : bool
        Proven optimal (relative gap 0).
    f : float
        F of ``sites`` as HiGHS computed it (NaN: none).
    f_bound : float
        A lower bound on F (the dual bound; the LP optimum for a relaxation).
    status : int
        scipy's status (0 optimal, 1 limit reached, 2 infeasible, ...).
    message : str
    seconds : float
    """

    sites: np.ndarray | None
    proven: bool
    f: float
    f_bound: float
    status: int
    message: str
    seconds: float


def model_size(problem: SitingProblem) -> int:
    """Nonzeros of the integer programme's constraint matrix (what makes it large)."""
    q = len(problem.i)
    if problem.objective == "coverage":
        return q + len(np.unique(problem.i)) + problem.n_candidates
    return 3 * q + problem.n_candidates


def _coverage_model(pr: SitingProblem, p: int):
    K = pr.n_candidates
    rows, inv = np.unique(pr.i, return_inverse=True)
    ny = len(rows)
    # variables: x_0..x_{K-1}, y_0..y_{ny-1}
    cost = np.concatenate([np.zeros(K), -pr.demand[rows]])
    a_cov = sp.csr_array((np.concatenate([np.ones(ny), -np.ones(len(pr.k))]),
                          (np.concatenate([np.arange(ny), inv]), np.concatenate([K + np.arange(ny), pr.k]))),
                         shape=(ny, K + ny))
    a_p = sp.csr_array((np.ones(K), (np.zeros(K, np.int64), np.arange(K))), shape=(1, K + ny))
    cons = [LinearConstraint(a_cov, -np.inf, 0.0), LinearConstraint(a_p, p, p)]
    const = float(pr.demand @ pr.base)
    return cost, cons, K + ny, const


def _median_model(pr: SitingProblem, p: int):
    K = pr.n_candidates
    q = len(pr.i)
    rows, inv = np.unique(pr.i, return_inverse=True)
    # variables: x_0..x_{K-1}, z_0..z_{q-1}
    cost = np.concatenate([np.zeros(K), pr.demand[pr.i] * (pr.c - pr.base[pr.i])])
    a_link = sp.csr_array((np.concatenate([np.ones(q), -np.ones(q)]),
                           (np.concatenate([np.arange(q), np.arange(q)]), np.concatenate([K + np.arange(q), pr.k]))),
                          shape=(q, K + q))
    a_one = sp.csr_array((np.ones(q), (inv, K + np.arange(q))), shape=(len(rows), K + q))
    a_p = sp.csr_array((np.ones(K), (np.zeros(K, np.int64), np.arange(K))), shape=(1, K + q))
    cons = [LinearConstraint(a_link, -np.inf, 0.0), LinearConstraint(a_one, -np.inf, 1.0),
            LinearConstraint(a_p, p, p)]
    const = float(pr.demand @ pr.base)
    return cost, cons, K + q, const


def solve_milp(problem: SitingProblem, p: int, *, time_limit: float = 300.0, relax: bool = False) -> MilpOutcome:
    """Solve the instance exactly (or its LP relaxation) with HiGHS.

    Parameters
    ----------
    problem : SitingProblem
    p : int
        Sites to open (1..n_candidates).
    time_limit : float, default 300
        Seconds; past it HiGHS returns its best solution and bound so far.
    relax : bool, default False
        Solve the LP relaxation (x in [0, 1]): its optimum is a lower bound on F,
        and when its x is integral it is an optimal solution (``sites``).

    Returns
    -------
    MilpOutcome

    References
    ----------
    .. [1] Church, R. and ReVelle, C. (1974). The maximal covering location
       problem. Papers of the Regional Science Association 32, 101-118.
    .. [2] ReVelle, C. S. and Swain, R. W. (1970). Central facilities
       location. Geographical Analysis 2(1), 30-42.
    """
    import time

    K = problem.n_candidates
    build = _coverage_model if problem.objective == "coverage" else _median_model
    cost, cons, nv, const = build(problem, p)
    integrality = np.zeros(nv)
    if not relax:
        integrality[:K] = 1
    t0 = time.perf_counter()
    res = milp(cost, integrality=integrality, bounds=Bounds(0.0, 1.0), constraints=cons,
               options={"time_limit": float(time_limit), "mip_rel_gap": 0.0, "disp": False})
    secs = time.perf_counter() - t0
    sites = None
    f = np.nan
    if res.x is not None:
        f = float(res.fun) + const
        x = res.x[:K]
        integral = bool(np.all(np.minimum(np.abs(x), np.abs(1.0 - x)) <= 1e-9))
        if not relax or integral:
            sites = np.sort(np.nonzero(x > 0.5)[0]).astype(np.int64)
    if relax:
        bound = f if res.status == 0 else -np.inf
    else:
        db = getattr(res, "mip_dual_bound", None)
        bound = float(db) + const if db is not None and np.isfinite(db) else -np.inf
        if res.status == 0:
            bound = max(bound, f) if np.isfinite(bound) else f
    return MilpOutcome(sites, bool(res.status == 0 and not relax), f, bound, int(res.status), str(res.message), secs)

"""Where the next hub should go: maximal covering (coverage) and p-median (total-minutes) location models.

Modules
-------
problem
    :class:`SitingProblem`, both objectives in one form, F(S) = sum_i D_i
    min(b_i, min over open k of c_ik), with the existing hubs open (b_i).
exact
    The integer programmes of Church and ReVelle (1974) and ReVelle and Swain
    (1970), solved by HiGHS through :func:`scipy.optimize.milp`, and their LP
    relaxations (bounds).
heuristic
    Greedy addition and vertex substitution (Teitz and Bart 1968), from
    several starts.
solver
    :func:`solve` (method choice, bound, gap), :func:`site_gains` (pick order,
    what each site adds) and :func:`choose_sites` (from points, costs by
    :func:`geo_reach.analysis.indices.trips.trip_costs`).

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from .exact import MilpOutcome, model_size, solve_milp
from .heuristic import greedy, multi_start, vertex_substitution
from .problem import OBJECTIVES, SitingProblem, build_problem
from .solver import METHODS, SitingResult, choose_sites, site_gains, solve

__all__ = ["OBJECTIVES", "METHODS", "SitingProblem", "build_problem", "SitingResult", "solve", "site_gains",
           "choose_sites", "solve_milp", "MilpOutcome", "model_size", "greedy", "vertex_substitution",
           "multi_start"]

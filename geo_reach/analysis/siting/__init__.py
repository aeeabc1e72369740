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

#: Public name -> the module that defines it (imported on first use, so start-up stays fast).
_API = {
    "MilpOutcome": ".exact",
    "model_size": ".exact",
    "solve_milp": ".exact",
    "greedy": ".heuristic",
    "multi_start": ".heuristic",
    "vertex_substitution": ".heuristic",
    "OBJECTIVES": ".problem",
    "SitingProblem": ".problem",
    "build_problem": ".problem",
    "METHODS": ".solver",
    "SitingResult": ".solver",
    "choose_sites": ".solver",
    "site_gains": ".solver",
    "solve": ".solver",
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

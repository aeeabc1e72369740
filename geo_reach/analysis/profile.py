"""Reach profile: how much of the network lies within each cost step from a source, and how it grows.

``nodes`` at a step counts the nodes *other than the source* whose least
cost from the source is at most the step's cost (so on a cycle C_n it is
2k for k < n/2 links, and 2, 6, 14 within 1, 2, 3 links of the root of a
complete binary tree).  ``length_m`` is the network length reachable within
the cost: an edge counts the part of it a trip can reach from either end
(from its ``from_node`` only if it is one-way), in proportion to its cost,
as a service area does (common practice).  Edges without a value for the
weight are not part of the routing and count nothing.

Growth classes (see :func:`classify_growth`): ``linear`` (a chain or ring),
``polynomial`` with its exponent (a mesh grows about quadratically) or
``exponential`` with its rate (a branching tree).

Profiles are model estimates of the network as built; local surveys, codes
and licensed professional practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight
from .routing import check_nodes, one_to_all

__all__ = ["Growth", "ReachProfile", "reach_profile", "sample_profile", "classify_growth",
           "profile_steps", "random_sources", "EARLY_FRACTION", "LINEAR_TOLERANCE", "MAX_STEPS"]

#: The fit uses the steps reaching at most this fraction of the reachable nodes.
EARLY_FRACTION = 0.5
#: A power law with |exponent - 1| at most this is called linear.
LINEAR_TOLERANCE = 0.25
#: Fewest points a growth fit needs.
MIN_FIT_POINTS = 3

#: Most steps a profile may have (each step is a pass over the edges); more is refused, not run.
MAX_STEPS = 10_000


@dataclass(frozen=True)
class Growth:
    """A fitted growth class.

    Attributes
    ----------
    kind : {'linear', 'polynomial', 'exponential', 'undetermined'}
    exponent : float or None
        Power-law exponent (for linear and polynomial): nodes ~ cost**exponent.
    rate : float or None
        Exponential rate per weight unit (for exponential): nodes ~ exp(rate * cost).
    points : int
        Profile steps the fit used.
    rss_power, rss_exponential : float or None
        Residual sums of squares of log(nodes) under each fit.
    """

    kind: str
    exponent: float | None
    rate: float | None
    points: int
    rss_power: float | None = None
    rss_exponential: float | None = None


@dataclass(frozen=True)
class ReachProfile:
    """Nodes and network length within each cost step.

    Attributes
    ----------
    cost : ndarray of float64, shape (n_steps,)
        Step limits in the weight's unit, increasing.
    nodes : ndarray of float64, shape (n_steps,)
        Nodes other than the source within each cost (a mean when sampled).
    length_m : ndarray of float64, shape (n_steps,)
        Network length within each cost, metres.
    reachable_nodes : float
        Nodes other than the source reachable at any cost.
    sources : ndarray of int64
        The source node(s).
    growth : Growth
    weight : Weight
    """

    cost: np.ndarray
    nodes: np.ndarray
    length_m: np.ndarray
    reachable_nodes: float
    sources: np.ndarray
    growth: Growth
    weight: Weight


def profile_steps(weight: Weight | str, max_cost: float, *, steps: int | None = None,
                  step: float | None = None) -> np.ndarray:
    """Step limits: ``step`` apart, or ``steps`` equal steps, up to ``max_cost``.

    Defaults: step 1 for ``hops``, else 20 equal steps.

    Examples
    --------
    >>> profile_steps("hops", 3.0).tolist()
    [1.0, 2.0, 3.0]
    >>> profile_steps("minutes", 10.0, steps=4).tolist()
    [2.5, 5.0, 7.5, 10.0]
    """
    weight = as_weight(weight)
    if steps is not None and step is not None:
        raise OptionError("steps and step: give one of them, not both", key="steps")
    if steps is not None and (int(steps) != steps or not 1 <= steps <= MAX_STEPS):
        raise OptionError(f"steps {steps}: give a whole number of steps from 1 to {MAX_STEPS:,}", key="steps")
    if step is not None and (not np.isfinite(step) or step <= 0):
        raise OptionError(f"step {step}: give a positive cost step", key="step")
    if steps is None and step is None:
        if weight.name == "hops":
            step = 1.0
        else:
            steps = 20
    if not np.isfinite(max_cost) or max_cost <= 0:
        return np.array([step if step is not None else 0.0], dtype=np.float64)
    if step is not None:
        k = max(1, int(np.ceil(max_cost / step - 1e-9)))
        if k > MAX_STEPS:
            raise OptionError(f"step {step:g}: gives {k:,} steps up to {max_cost:.6g} {weight.unit}, more than the "
                              f"limit of {MAX_STEPS:,}; give a step of at least {max_cost / MAX_STEPS:.3g}",
                              key="step")
        return step * np.arange(1, k + 1, dtype=np.float64)
    return np.linspace(max_cost / steps, max_cost, int(steps))


def _counts(network: Network, weight: Weight, dist: np.ndarray, source: int, limits: np.ndarray):
    """Nodes (excluding the source) and network length within each limit, for one distance row."""
    d = dist.copy()
    d[source] = np.inf
    fin = np.sort(d[np.isfinite(d)])
    nodes = np.searchsorted(fin, limits * (1 + 1e-12), side="right").astype(np.float64)
    d[source] = 0.0
    c = network.cost(weight)
    ok = ~np.isnan(c)
    e = np.nonzero(ok)[0]
    w = c[e]
    L = network.edge_length_m[e]
    du = d[network.edge_from[e]]
    dv = d[network.edge_to[e]]
    two = ~network.edge_oneway[e]
    lengths = np.empty(len(limits))
    with np.errstate(invalid="ignore", divide="ignore"):
        for i, lim in enumerate(limits):
            fu = np.where(w > 0, np.clip((lim - du) / w, 0.0, 1.0), (du <= lim).astype(float))
            fv = np.where(w > 0, np.clip((lim - dv) / w, 0.0, 1.0), (dv <= lim).astype(float))
            fu = np.nan_to_num(fu, nan=0.0)
            fv = np.where(two, np.nan_to_num(fv, nan=0.0), 0.0)
            lengths[i] = float(np.sum(np.minimum(1.0, fu + fv) * L))
    return nodes, lengths, float(len(fin))


def classify_growth(cost, nodes, reachable: float) -> Growth:
    """Fit the early, unsaturated part of a reach profile and name its growth.

    Parameters
    ----------
    cost, nodes : array_like, shape (n_steps,)
        Step limits (> 0) and nodes within them.
    reachable : float
        Nodes reachable at any cost (where the profile saturates).

    Returns
    -------
    Growth

    Notes
    -----
    The rule (ours, documented here): take the steps with at least one node
    and at most ``EARLY_FRACTION`` (half) of the reachable nodes, i.e.
    before the profile bends towards saturation; if fewer than 3, take every
    step short of saturation; with fewer than 3 still the class is
    ``undetermined``.  Where the steps are finer than the link costs the
    profile is a staircase; only the first step of each plateau (the
    smallest cost reaching that count) is kept.  Fit by least squares
    (i) ``log nodes = a + p log cost`` (power law) and
    (ii) ``log nodes = a + r cost`` (exponential).  The fit
    with the smaller residual sum of squares wins.  A power law with
    ``|p - 1| <= 0.25`` is ``linear`` (a chain or ring, nodes = 2k on a
    cycle); any other exponent is ``polynomial`` (about 2 for a mesh); the
    exponential fit is ``exponential`` with rate r (ln 2 per link for a
    binary tree).

    Examples
    --------
    >>> classify_growth([1, 2, 3, 4, 5], [2, 4, 6, 8, 10], 40).kind
    'linear'
    >>> g = classify_growth([1, 2, 3, 4, 5], [2, 6, 14, 30, 62], 1000)
    >>> g.kind, round(g.rate, 2)
    ('exponential', 0.85)
    """
    cost = np.asarray(cost, dtype=np.float64)
    nodes = np.asarray(nodes, dtype=np.float64)
    use = (nodes > 0) & (cost > 0) & (nodes <= EARLY_FRACTION * reachable)
    if use.sum() < MIN_FIT_POINTS:
        use = (nodes > 0) & (cost > 0) & (nodes < reachable)
    # collapse plateaus (steps finer than the link costs): keep the first step reaching each count
    idx = np.nonzero(use)[0]
    first = np.ones(len(idx), dtype=bool)
    first[1:] = nodes[idx][1:] != nodes[idx][:-1]
    use = np.zeros_like(use)
    use[idx[first]] = True
    if use.sum() < MIN_FIT_POINTS:
        return Growth("undetermined", None, None, int(use.sum()))
    x, y = cost[use], np.log(nodes[use])
    lx = np.log(x)

    def fit(u):
        a = np.column_stack([np.ones_like(u), u])
        coef, *_ = np.linalg.lstsq(a, y, rcond=None)
        return float(coef[1]), float(np.sum((a @ coef - y) ** 2))

    p, rss_p = fit(lx)
    r, rss_e = fit(x)
    n = int(use.sum())
    if rss_p <= rss_e:
        kind = "linear" if abs(p - 1.0) <= LINEAR_TOLERANCE else "polynomial"
        return Growth(kind, p, None, n, rss_p, rss_e)
    return Growth("exponential", None, r, n, rss_p, rss_e)


def reach_profile(network: Network, source: int, weight: Weight | str = "minutes", *, steps: int | None = None,
                  step: float | None = None) -> ReachProfile:
    """Nodes and network length within each cost step from ``source``.

    Parameters
    ----------
    network : Network
    source : int
        Node id.
    weight : str, default 'minutes'
    steps : int, optional
        Number of equal steps up to the source's eccentricity (default 20,
        or unit steps for ``hops``).
    step : float, optional
        Fixed step in the weight's unit instead.

    Returns
    -------
    ReachProfile

    Raises
    ------
    InputError
        ``source`` is not a node of the network.
    OptionError
        Both or bad ``steps``/``step``.

    Notes
    -----
    One Dijkstra run, then O(n_steps x n_edges) for the lengths.

    Examples
    --------
    >>> from geo_reach.analysis.routing import _demo_chain
    >>> p = reach_profile(_demo_chain(5), 0, "hops")
    >>> p.cost.tolist(), p.nodes.tolist(), p.length_m.tolist()
    ([1.0, 2.0, 3.0, 4.0], [1.0, 2.0, 3.0, 4.0], [1000.0, 2000.0, 3000.0, 4000.0])
    """
    return sample_profile(network, [source], weight, steps=steps, step=step)


def sample_profile(network: Network, sources, weight: Weight | str = "minutes", *, steps: int | None = None,
                   step: float | None = None) -> ReachProfile:
    """The reach profile averaged over ``sources`` (node ids), on common steps.

    The steps run up to the largest eccentricity among the sources; counts
    are means over the sources.  Use :func:`random_sources` to pick sources.
    """
    weight = as_weight(weight)
    sources = check_nodes(network, np.atleast_1d(sources))
    if len(sources) == 0:
        raise OptionError("give at least one source node")
    dist = one_to_all(network, sources, weight)
    fin = np.where(np.isfinite(dist), dist, -np.inf)
    ecc = float(fin.max()) if dist.size else 0.0
    limits = profile_steps(weight, max(ecc, 0.0), steps=steps, step=step)
    nodes = np.zeros(len(limits))
    lengths = np.zeros(len(limits))
    reach = 0.0
    for i, s in enumerate(sources):
        a, b, r = _counts(network, weight, dist[i], int(s), limits)
        nodes += a
        lengths += b
        reach += r
    k = len(sources)
    nodes, lengths, reach = nodes / k, lengths / k, reach / k
    return ReachProfile(limits, nodes, lengths, reach, sources, classify_growth(limits, nodes, reach), weight)


def random_sources(network: Network, k: int, seed: int = 0) -> np.ndarray:
    """``k`` distinct node ids drawn uniformly with a seeded numpy ``default_rng`` (all if k >= n)."""
    if k < 1:
        raise OptionError(f"sources {k}: give 1 or more random sources", key="sources")
    n = network.n_nodes
    if k >= n:
        return np.arange(n, dtype=np.int64)
    return np.sort(np.random.default_rng(seed).choice(n, size=k, replace=False)).astype(np.int64)

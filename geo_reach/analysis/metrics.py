"""How well a network holds together: components, diameter, mean path, efficiency, centrality.

Every figure is computed on the directed routing graph of one weight (the
network's cached CSR adjacency; edges without the weight left out, one-way
edges respected) with the routing engine of :mod:`geo_reach.analysis.routing`.
Costs are in the weight's unit (minutes, metres, milliseconds or links).

Figures are model estimates of the network as built; local surveys, codes
and licensed professional practice decide.

References
----------
.. [1] Takes, F. W. and Kosters, W. A. (2011). Determining the diameter of
   small world networks. Proc. 20th ACM Conference on Information and
   Knowledge Management (CIKM 2011), 1191-1196.
.. [2] Eppstein, D. and Wang, J. (2004). Fast approximation of centrality.
   Journal of Graph Algorithms and Applications 8(1), 39-45.
.. [3] Latora, V. and Marchiori, M. (2001). Efficient behavior of
   small-world networks. Physical Review Letters 87(19), 198701.
.. [4] Marchiori, M. and Latora, V. (2000). Harmony in the small-world.
   Physica A 285(3-4), 539-546 (harmonic mean distance / closeness).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight
from .routing import _Graph, _search

__all__ = [
    "Diameter", "MeanPath", "ComponentCounts",
    "component_counts", "largest_strong_component", "diameter", "mean_path",
    "global_efficiency", "estimate_global_efficiency", "diameter_brute_force", "eccentricity", "closeness",
    "node_centrality", "network_figures", "EXACT_MAX_NODES",
]

#: Mean path is computed exactly up to this many nodes (the issue's 5,000).
EXACT_MAX_NODES = 5000


def _matrix(network: Network, weight: Weight | str) -> sp.csr_array:
    return network.csr(weight).matrix


def _rows(m: sp.csr_array, sources, budget: float = 1e7):
    """Yield (sources_batch, dist_rows) for all ``sources``, in batches of bounded memory."""
    n = m.shape[0]
    g = _Graph(m, n, np.zeros(0, np.int64), np.zeros(0, np.int64))
    sources = np.asarray(sources, dtype=np.int64)
    step = int(max(1, min(512, budget // max(n, 1))))
    for s in range(0, len(sources), step):
        b = sources[s:s + step]
        dist, _, _ = _search(g, b)
        yield b, np.atleast_2d(dist)


# ====================================================================== components
@dataclass(frozen=True)
class ComponentCounts:
    """Component figures of a network.

    Attributes
    ----------
    components : int
        Weakly connected components (one-way direction and missing costs
        ignored, as in the build report).
    largest_component_nodes : int
    largest_strong_component_nodes : int
        Nodes in the largest strongly connected component of the routing
        graph on the weight.
    """

    components: int
    largest_component_nodes: int
    largest_strong_component_nodes: int


def largest_strong_component(network: Network, weight: Weight | str = "minutes") -> np.ndarray:
    """Node ids (sorted) of the largest strongly connected component on ``weight``.

    Ties in size go to the component holding the smallest node id.
    """
    m = _matrix(network, weight)
    if m.shape[0] == 0:
        return np.zeros(0, np.int64)
    _, labels = connected_components(m, directed=True, connection="strong")
    sizes = np.bincount(labels)
    first = np.full(len(sizes), m.shape[0], dtype=np.int64)
    np.minimum.at(first, labels, np.arange(m.shape[0]))
    best = np.lexsort((first, -sizes))[0]
    return np.nonzero(labels == best)[0].astype(np.int64)


def component_counts(network: Network, weight: Weight | str = "minutes") -> ComponentCounts:
    """Weak and strong component figures (see :class:`ComponentCounts`)."""
    comp = network.component
    largest = int(np.sum(comp == 0)) if network.n_nodes else 0
    return ComponentCounts(network.n_components, largest, len(largest_strong_component(network, weight)))


def _sub(m: sp.csr_array, nodes: np.ndarray) -> sp.csr_array:
    sub = m[nodes][:, nodes]
    sub = sp.csr_array(sub)
    sub.sort_indices()
    return sub


# ====================================================================== diameter
@dataclass(frozen=True)
class Diameter:
    """The exact diameter of the largest strongly connected component.

    Attributes
    ----------
    value : float
        The longest of all least-cost trips, in the weight's unit.
    from_node, to_node : int
        Network node ids of one pair at that cost.
    sssp_runs : int
        Single-source searches made to find it (forward and backward runs).
    path_nodes : ndarray of int64
        The nodes of one least-cost path from ``from_node`` to ``to_node``.
    """

    value: float
    from_node: int
    to_node: int
    sssp_runs: int
    path_nodes: np.ndarray


def _is_symmetric(m: sp.csr_array) -> bool:
    """True when every stored arc has its reverse at the same cost.

    Compared structurally (explicit zero-cost arcs count as arcs, unlike in
    ``m != m.T``); both matrices have sorted indices and no duplicates.
    """
    t = sp.csr_array(m.T)
    t.sort_indices()
    m = sp.csr_array(m)
    m.sort_indices()
    return (np.array_equal(m.indptr, t.indptr) and np.array_equal(m.indices, t.indices)
            and np.array_equal(m.data, t.data))


def diameter(network: Network, weight: Weight | str = "minutes") -> Diameter:
    """Exact weighted diameter of the largest strongly connected component, with eccentricity bounds.

    Parameters
    ----------
    network : Network
    weight : str, default 'minutes'

    Returns
    -------
    Diameter

    Notes
    -----
    The BoundingDiameters algorithm of Takes and Kosters [1]_, adapted to
    directed graphs.  For each node v we keep bounds on its forward
    eccentricity ``ef(v) = max_u d(v, u)`` and backward eccentricity
    ``eb(v) = max_u d(u, v)``.  A forward run from w gives ``d(w, .)`` and a
    backward run (on the reversed graph) gives ``d(., w)``; by the triangle
    inequality::

        max(d(v, w), ef(w) - d(w, v)) <= ef(v) <= d(v, w) + ef(w)
        max(d(w, v), eb(w) - d(v, w)) <= eb(v) <= d(w, v) + eb(w)

    The diameter D is both ``max ef`` and ``max eb``; the largest
    eccentricity found so far is a lower bound, and the search stops as soon
    as every forward (or every backward) upper bound is at most it, which
    proves it is D.  Nodes are chosen alternately with the largest upper
    bound and the smallest lower bound, as in [1]_.  When every arc has its
    reverse at the same cost the graph is symmetric and one run serves both
    directions; otherwise both kinds of run are made and counted in
    ``sssp_runs``.  Worst case one run per node, typically tens on road-like
    networks.

    References
    ----------
    .. [1] Takes, F. W. and Kosters, W. A. (2011). Determining the diameter
       of small world networks. CIKM 2011, 1191-1196.
    """
    nodes = largest_strong_component(network, weight)
    k = len(nodes)
    if k <= 1:
        v = int(nodes[0]) if k else -1
        return Diameter(0.0, v, v, 0, nodes.copy())
    sub = _sub(_matrix(network, weight), nodes)
    sym = _is_symmetric(sub)
    subt = sub if sym else sp.csr_array(sub.T)
    subt.sort_indices()
    gf = _Graph(sub, k, np.zeros(0, np.int64), np.zeros(0, np.int64))
    gb = _Graph(subt, k, np.zeros(0, np.int64), np.zeros(0, np.int64))

    lf = np.zeros(k)
    uf = np.full(k, np.inf)
    lb = np.zeros(k)
    ub = np.full(k, np.inf)
    done = np.zeros(k, dtype=bool)
    degree = np.diff(sub.indptr) + np.diff(subt.indptr)
    best = (-np.inf, -1, -1, None, None)  # value, from, to, pred, which
    runs = 0
    high = True
    while True:
        cand = ~done & ((uf > best[0]) | (ub > best[0]))
        if not cand.any():
            break
        idx = np.nonzero(cand)[0]
        if runs == 0:
            w = int(idx[np.argmax(degree[idx])])  # start at the highest degree, as in [1]
        elif high:
            upper = np.maximum(uf, ub)[idx]
            top = idx[upper == upper.max()]
            w = int(top[np.argmax(degree[top])])
        else:
            lower = (lf + lb)[idx]
            low = idx[lower == lower.min()]
            w = int(low[np.argmax(degree[low])])
        high = not high
        df, pf, _ = _search(gf, [w], predecessors=True)
        df, pf = df[0], pf[0]
        runs += 1
        if sym:
            db, pb = df, pf
        else:
            db, pb, _ = _search(gb, [w], predecessors=True)
            db, pb = db[0], pb[0]
            runs += 1
        ef, eb = float(df.max()), float(db.max())
        if ef > best[0]:
            best = (ef, w, int(np.argmax(df)), pf, "forward")
        if eb > best[0]:
            best = (eb, int(np.argmax(db)), w, pb, "backward")
        lf = np.maximum(lf, np.maximum(db, ef - df))
        uf = np.minimum(uf, db + ef)
        lb = np.maximum(lb, np.maximum(df, eb - db))
        ub = np.minimum(ub, df + eb)
        lf[w] = uf[w] = ef
        lb[w] = ub[w] = eb
        done[w] = True
        if uf.max() <= best[0] or ub.max() <= best[0]:
            break
    value, a, b, pred, which = best
    if which == "forward":  # tree rooted at a, path a -> b
        path = [b]
        while pred[path[-1]] >= 0:
            path.append(int(pred[path[-1]]))
        path = path[::-1]
    else:  # tree on the reversed graph rooted at b: pred points towards b
        path = [a]
        while pred[path[-1]] >= 0:
            path.append(int(pred[path[-1]]))
    return Diameter(float(value), int(nodes[a]), int(nodes[b]), runs, nodes[np.array(path, dtype=np.int64)])


def diameter_brute_force(network: Network, weight: Weight | str = "minutes") -> float:
    """Reference: the largest finite cost over all pairs of the largest strong component (one run per node)."""
    nodes = largest_strong_component(network, weight)
    if len(nodes) <= 1:
        return 0.0
    sub = _sub(_matrix(network, weight), nodes)
    return float(max(d.max() for _, d in _rows(sub, np.arange(len(nodes)))))


# ====================================================================== mean path
@dataclass(frozen=True)
class MeanPath:
    """Mean least cost over ordered pairs of distinct nodes of the largest strong component.

    Attributes
    ----------
    value : float
        The mean (exact, or the estimate), in the weight's unit.
    ci95_low, ci95_high : float
        95 % confidence interval (equal to ``value`` when exact).
    exact : bool
    sources : int
        Source nodes searched.
    """

    value: float
    ci95_low: float
    ci95_high: float
    exact: bool
    sources: int


def mean_path(network: Network, weight: Weight | str = "minutes", *, exact: bool | None = None, samples: int = 200,
              seed: int = 0, exact_max_nodes: int = EXACT_MAX_NODES) -> MeanPath:
    """Mean least-cost trip over ordered pairs of distinct nodes in the largest strong component.

    Parameters
    ----------
    network : Network
    weight : str, default 'minutes'
    exact : bool, optional
        Force (True) or forbid (False) the exact computation; by default
        exact when the component has at most ``exact_max_nodes`` nodes.
    samples : int, default 200
        Random sources for the estimate.
    seed : int, default 0
        Seed of the source sample (numpy ``default_rng``).
    exact_max_nodes : int, default 5000

    Returns
    -------
    MeanPath

    Notes
    -----
    Exact: one run per node, O(k (m + k log k)).  Estimate: sources drawn
    uniformly *without* replacement, as in Eppstein and Wang [2]_ (who draw
    with replacement; without replacement is never worse).  For each source
    s its mean ``m_s = sum_u d(s, u) / (k - 1)``; since every source has the
    same number of targets, the mean of the ``m_s`` is an unbiased estimate
    of the pair mean.  The 95 % interval is the Student t interval of the
    ``m_s`` (t quantile with samples-1 degrees of freedom) times the finite
    population correction ``sqrt((k - s) / (k - 1))``, so it shrinks to the
    exact value when every node is sampled.

    References
    ----------
    .. [2] Eppstein, D. and Wang, J. (2004). Fast approximation of
       centrality. J. Graph Algorithms Appl. 8(1), 39-45.
    """
    from scipy import stats

    nodes = largest_strong_component(network, weight)
    k = len(nodes)
    if k < 2:
        return MeanPath(float("nan"), float("nan"), float("nan"), True, k)
    if samples < 2 and not exact:
        raise OptionError(f"--samples {samples}: give at least 2 sources for an estimate")
    sub = _sub(_matrix(network, weight), nodes)
    use_exact = (k <= exact_max_nodes) if exact is None else bool(exact)
    if use_exact or samples >= k:
        total = 0.0
        for _, d in _rows(sub, np.arange(k)):
            total += float(d.sum(dtype=np.float64))
        v = total / (k * (k - 1))
        return MeanPath(v, v, v, True, k)
    rng = np.random.default_rng(seed)
    src = np.sort(rng.choice(k, size=samples, replace=False))
    means = np.concatenate([d.sum(axis=1) / (k - 1) for _, d in _rows(sub, src)])
    v = float(means.mean())
    half = (float(stats.t.ppf(0.975, samples - 1)) * float(means.std(ddof=1)) / np.sqrt(samples)
            * np.sqrt((k - samples) / (k - 1)))
    return MeanPath(v, float(v - half), float(v + half), False, int(samples))


# ====================================================================== efficiency and centrality
def _harmonic_sums(m: sp.csr_array, sources):
    """Per source: sum over other nodes of 1/d (inf where a distinct node is at zero cost), and max finite d."""
    sums, ecc = [], []
    for b, d in _rows(m, sources):
        d = d.copy()
        d[np.arange(len(b)), b] = np.inf  # leave the source itself out
        with np.errstate(divide="ignore"):
            inv = 1.0 / d
        sums.append(inv.sum(axis=1))
        d[np.arange(len(b)), b] = 0.0
        fin = np.where(np.isfinite(d), d, -np.inf)
        ecc.append(fin.max(axis=1))
    return np.concatenate(sums) if sums else np.zeros(0), np.concatenate(ecc) if ecc else np.zeros(0)


def global_efficiency(network: Network, weight: Weight | str = "minutes") -> float:
    """Global efficiency: mean of 1/cost over ordered pairs of distinct nodes of the whole network.

    Parameters
    ----------
    network : Network
    weight : str, default 'minutes'

    Returns
    -------
    float
        In 1/(weight unit).  Unreachable pairs count 0, so it is well defined
        on a disconnected network.  ``inf`` if two distinct nodes are joined
        at zero cost (the measure is undefined then); 0 for fewer than 2 nodes.

    Notes
    -----
    Exact, one run per node: O(n (m + n log n)).  With ``hops`` it equals
    networkx's (unweighted) ``global_efficiency`` on an undirected network.

    References
    ----------
    .. [3] Latora, V. and Marchiori, M. (2001). Efficient behavior of
       small-world networks. Phys. Rev. Lett. 87, 198701.
    """
    n = network.n_nodes
    if n < 2:
        return 0.0
    sums, _ = _harmonic_sums(_matrix(network, weight), np.arange(n))
    return float(sums.sum() / (n * (n - 1)))


def node_centrality(network: Network, weight: Weight | str = "minutes"):
    """Per-node eccentricity and harmonic closeness in one all-pairs sweep.

    Returns
    -------
    eccentricity : ndarray of float64, shape (n_nodes,)
        Largest finite cost of a trip *from* the node to any node it can
        reach (0 if it reaches none), in the weight's unit.
    closeness : ndarray of float64, shape (n_nodes,)
        Harmonic closeness of trips *from* the node:
        ``sum_{u != v} 1 / d(v, u) / (n - 1)`` (unreachable nodes count 0;
        ``inf`` if a distinct node is at zero cost), in 1/(weight unit).
        Harmonic, not classic (1 / mean distance), because it stays defined
        on disconnected networks (Marchiori and Latora [4]_).

    Notes
    -----
    One run per node: O(n (m + n log n)) time, memory in bounded batches.
    The mean of ``closeness`` is :func:`global_efficiency`.

    References
    ----------
    .. [4] Marchiori, M. and Latora, V. (2000). Harmony in the small-world.
       Physica A 285, 539-546.
    """
    n = network.n_nodes
    if n == 0:
        return np.zeros(0), np.zeros(0)
    sums, ecc = _harmonic_sums(_matrix(network, weight), np.arange(n))
    return np.maximum(ecc, 0.0), (sums / (n - 1) if n > 1 else np.zeros(n))


def eccentricity(network: Network, weight: Weight | str = "minutes") -> np.ndarray:
    """Per-node eccentricity (see :func:`node_centrality`)."""
    return node_centrality(network, weight)[0]


def closeness(network: Network, weight: Weight | str = "minutes") -> np.ndarray:
    """Per-node harmonic closeness of outgoing trips (see :func:`node_centrality`)."""
    return node_centrality(network, weight)[1]


def estimate_global_efficiency(network: Network, weight: Weight | str = "minutes", *, samples: int = 200,
                               seed: int = 0) -> float:
    """Global efficiency estimated from ``samples`` random sources (exact if samples >= n_nodes).

    Sources are drawn uniformly without replacement (seeded numpy
    ``default_rng``), as for :func:`mean_path` after Eppstein and Wang
    (2004); the estimate is the mean over sources of their harmonic sums
    divided by (n - 1), which is unbiased.
    """
    n = network.n_nodes
    if samples >= n:
        return global_efficiency(network, weight)
    if samples < 1:
        raise OptionError(f"--samples {samples}: give at least 1 source")
    src = np.sort(np.random.default_rng(seed).choice(n, size=samples, replace=False))
    sums, _ = _harmonic_sums(_matrix(network, weight), src)
    return float(sums.mean() / (n - 1))


def network_figures(network: Network, weight: Weight | str = "minutes", *, exact: bool = False, samples: int = 200,
                    seed: int = 0, centrality: bool | None = None):
    """All the network-wide figures in one call (what ``geo-reach metrics`` and a study run report).

    Parameters
    ----------
    network : Network
    weight : str
    exact : bool
        Exact mean path whatever the size (one search per node).
    samples, seed : int
        Sources for the sampled mean path and efficiency (Eppstein & Wang 2004).
    centrality : bool, optional
        Per-node eccentricity and harmonic closeness (one search per node).
        Default: when the network has at most :data:`EXACT_MAX_NODES` nodes.

    Returns
    -------
    figures : dict
        ``nodes``, ``edges``, ``components``, ``largest_component_nodes``,
        ``largest_two_way_component_nodes``, ``diameter`` {value, from_node,
        to_node, searches}, ``mean_path`` {value, range_95_low, range_95_high,
        exact, sources}, ``global_efficiency``, ``global_efficiency_exact``,
        ``weight``, ``unit`` (the glossary's names).
    diameter : Diameter
        With the node path, for the ``diameter_path`` layer.
    eccentricity, closeness : ndarray or None
        Per node, when ``centrality``.
    """
    weight = as_weight(weight)
    if centrality is None:
        centrality = network.n_nodes <= EXACT_MAX_NODES
    cc = component_counts(network, weight)
    dia = diameter(network, weight)
    mp = mean_path(network, weight, exact=True if exact else None, samples=samples, seed=seed)
    ecc = clo = None
    eff_exact = exact or network.n_nodes <= EXACT_MAX_NODES or samples >= network.n_nodes
    if centrality:
        ecc, clo = node_centrality(network, weight)
        # harmonic closeness (per n - 1) averaged over the nodes is the global efficiency
        eff, eff_exact = (float(clo.mean()) if network.n_nodes > 1 else 0.0), True
    elif eff_exact:
        eff = global_efficiency(network, weight)
    else:
        eff = estimate_global_efficiency(network, weight, samples=samples, seed=seed)
    figures = {
        "nodes": network.n_nodes,
        "edges": network.n_edges,
        "components": cc.components,
        "largest_component_nodes": cc.largest_component_nodes,
        "largest_two_way_component_nodes": cc.largest_strong_component_nodes,
        "diameter": {"value": dia.value, "from_node": dia.from_node, "to_node": dia.to_node,
                     "searches": dia.sssp_runs},
        "mean_path": {"value": mp.value, "range_95_low": mp.ci95_low, "range_95_high": mp.ci95_high,
                      "exact": mp.exact, "sources": mp.sources},
        "global_efficiency": eff,
        "global_efficiency_exact": bool(eff_exact),
        "weight": weight.name,
        "unit": weight.unit,
    }
    return figures, dia, ecc, clo

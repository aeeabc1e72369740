"""Reach profile: counts on graphs with known ball sizes, lengths against a slow reference, growth classes.

Sources:
* Cycle C_n: the nodes within k links of a node, the node itself not
  counted, are 2k for k < n/2 (two arcs of k nodes; elementary).
* Complete binary tree from the root: 2, 6, 14 nodes within 1, 2, 3 links
  (2 + 4 + 8; elementary).
* Square grid from an interior node far from the border: 2k(k+1) nodes
  within k links (the Manhattan ball, elementary); growth polynomial with
  exponent near 2 (a mesh grows about quadratically), exponential growth
  ln 2 per link for a binary tree.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import binary_tree, cycle, grid, random_network  # noqa: E402

from geo_reach.export.charts import plot_profile  # noqa: E402
from geo_reach.analysis.profile import (classify_growth, profile_steps,  # noqa: E402
                                        random_sources, reach_profile, sample_profile)
from geo_reach.analysis.routing import one_to_all  # noqa: E402
from geo_reach.errors import InputError, OptionError  # noqa: E402


@pytest.mark.parametrize("n", [9, 20, 31])
def test_cycle_counts_and_linear_growth(n):
    p = reach_profile(cycle(n), 0, "hops")
    k = np.arange(1, (n - 1) // 2 + 1)
    assert p.nodes[: len(k)].tolist() == (2 * k).tolist()
    assert p.nodes[-1] == n - 1 and p.reachable_nodes == n - 1
    assert p.growth.kind == "linear" and p.growth.exponent == pytest.approx(1.0, abs=1e-9)


def test_binary_tree_counts_and_exponential_growth():
    p = reach_profile(binary_tree(10), 0, "hops")
    assert p.nodes[:3].tolist() == [2, 6, 14]
    assert p.growth.kind == "exponential"
    assert p.growth.rate == pytest.approx(np.log(2), rel=0.15)


def test_grid_counts_and_polynomial_growth():
    side = 61
    c = (side // 2) * side + side // 2
    p = reach_profile(grid(side, side), c, "hops")
    k = np.arange(1, 6)
    assert p.nodes[:5].tolist() == (2 * k * (k + 1)).tolist()
    assert p.growth.kind == "polynomial" and 1.6 < p.growth.exponent < 2.2


def _slow_length_within(net, weight, source, limit):
    """Reference: walk every edge in 1000 small pieces and add up the pieces reachable within ``limit``."""
    d = one_to_all(net, source, weight)
    c = net.cost(weight)
    total = 0.0
    t = (np.arange(1000) + 0.5) / 1000  # piece midpoints along each edge
    for e in range(net.n_edges):
        if np.isnan(c[e]):
            continue
        via_u = d[net.edge_from[e]] + t * c[e]
        via_v = d[net.edge_to[e]] + (1 - t) * c[e] if not net.edge_oneway[e] else np.full(1000, np.inf)
        total += net.edge_length_m[e] * np.mean(np.minimum(via_u, via_v) <= limit)
    return total


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_length_within_matches_slow_reference(seed):
    rng = np.random.default_rng(seed)
    net = random_network(rng, 25, 60, zero_prob=0.0, nan_prob=0.1)
    p = reach_profile(net, 0, "minutes", steps=7)
    for lim, got in zip(p.cost, p.length_m):
        assert got == pytest.approx(_slow_length_within(net, "minutes", 0, lim), rel=2e-3, abs=1e-6)


def test_default_and_custom_steps():
    net = grid(5, 5, minutes=2.0)
    p = reach_profile(net, 0, "minutes")
    assert len(p.cost) == 20 and p.cost[-1] == pytest.approx(16.0)  # eccentricity of a corner: 8 links x 2 min
    p = reach_profile(net, 0, "minutes", step=5.0)
    assert p.cost.tolist() == [5.0, 10.0, 15.0, 20.0]
    assert reach_profile(net, 0, "hops").cost.tolist() == [1, 2, 3, 4, 5, 6, 7, 8]
    with pytest.raises(OptionError, match="steps and step: give one of them"):
        profile_steps("minutes", 10.0, steps=3, step=1.0)
    with pytest.raises(OptionError, match="positive"):
        reach_profile(net, 0, "minutes", step=-1.0)
    with pytest.raises(InputError, match="node id 99 is not in the network"):
        reach_profile(net, 99, "minutes")


def test_sampled_profile_is_the_mean_of_single_profiles():
    net = grid(6, 6)
    src = random_sources(net, 4, seed=3)
    assert len(set(src.tolist())) == 4
    p = sample_profile(net, src, "hops", step=1.0)
    singles = [reach_profile(net, int(s), "hops", step=1.0) for s in src]
    for i, lim in enumerate(p.cost):
        vals = [s.nodes[min(i, len(s.nodes) - 1)] for s in singles]  # a single profile stops at its eccentricity
        assert p.nodes[i] == pytest.approx(np.mean(vals))


def test_growth_fit_ignores_plateaus_of_fine_steps():
    # cycle of 1-minute links profiled in 0.25-minute steps: a staircase 0,0,0,2,2,2,2,4,...; the fit
    # keeps the first step of each plateau (1, 2, 3 ... minutes -> 2, 4, 6 ... nodes) and finds it linear.
    p = reach_profile(cycle(40), 0, "minutes", step=0.25)
    assert p.growth.kind == "linear" and p.growth.exponent == pytest.approx(1.0, abs=1e-9)


def test_growth_undetermined_with_too_few_steps():
    g = classify_growth([1.0, 2.0], [1.0, 2.0], 10.0)
    assert g.kind == "undetermined" and g.exponent is None and g.rate is None


def test_png_written(tmp_path):
    p = reach_profile(grid(8, 8), 27, "minutes")
    out = tmp_path / "p.png"
    plot_profile(p, out)
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"

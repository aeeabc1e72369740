"""The shared segment table (geo_reach.network.table) against networkx and brute force."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import shapely
from hypothesis import given, settings, strategies as st

from geo_reach.network.table import NOISE_M, LineTable, union_find_labels


@settings(max_examples=50, deadline=None)
@given(st.integers(1, 40), st.lists(st.tuples(st.integers(0, 39), st.integers(0, 39)), max_size=60))
def test_union_find_labels_are_networkx_components(n, pairs):
    pairs = [(a, b) for a, b in pairs if a < n and b < n]
    i = np.array([a for a, _ in pairs], np.int64)
    j = np.array([b for _, b in pairs], np.int64)
    lab = union_find_labels(n, i, j)
    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from(pairs)
    for comp in nx.connected_components(g):
        assert len({lab[k] for k in comp}) == 1
    assert len(set(lab.tolist())) == nx.number_connected_components(g)


def test_places_group_ends_and_pair_them_within_the_tolerance():
    """Ends at one place to 1 mm share a place (per mode); places within snap_m are paired (brute force)."""
    lines = [[(0, 0), (10, 0)], [(10.0004, 0), (20, 0)], [(20.9, 0), (30, 0)], [(10, 0), (10, 10)],
             [(0, 0), (0, -5)]]
    df = pd.DataFrame({"geom": [shapely.LineString(c) for c in lines], "mode": [0, 0, 0, 1, 0], "level": 0.0,
                       "layer": 0, "fid": range(5)})
    tab = LineTable.from_lines(df, ["a"])
    pinv, pcount, pxy, pairs = tab.places(1.0)
    ends = tab.xy[tab.end_rows()]
    # same place <=> same mode and within 1 mm (after rounding to the mm grid)
    for a in range(len(ends)):
        for b in range(len(ends)):
            same = (tab.mode[a % 5] == tab.mode[b % 5]) and np.all(np.round(ends[a] / NOISE_M) == np.round(ends[b] / NOISE_M))
            assert (pinv[a] == pinv[b]) == same
    d = np.hypot(*(pxy[:, None, :] - pxy[None, :, :]).T)
    want = {(a, b) for a in range(len(pxy)) for b in range(a + 1, len(pxy)) if d[a, b] <= 1.0}
    assert {tuple(sorted(p)) for p in pairs.tolist()} == want
    assert pcount.sum() == 10


def test_line_table_rows():
    df = pd.DataFrame({"geom": [shapely.LineString([(0, 0), (1, 0), (2, 0)]), shapely.LineString([(5, 5), (6, 6)])],
                       "mode": [0, 0], "level": 0.0, "layer": 0, "fid": [7, 8]})
    tab = LineTable.from_lines(df, ["roads"])
    assert tab.first.tolist() == [0, 3] and tab.last.tolist() == [2, 4]
    assert tab.seg.tolist() == [0, 1, 3]
    assert tab.node_row.tolist() == [True, False, True, True, True]
    assert tab.terminal_row(np.array([0, 1, 2, 3])).tolist() == [0, 3, 1, 3]
    assert tab.label.tolist() == ["roads", "roads"] and tab.fid.tolist() == [7, 8]

"""Overshoots and dead ends: trim line ends that run just past a junction; report what stays open.

* :func:`trim_overshoots` cuts a *free* line end (no other line end within
  the tolerance) back to the nearest node of its own line when that node is
  at most ``snap_m`` from the end along the line (``gap_joined``, "overshoot
  ... trimmed").  The trimmed length goes to ``trimmed_length_m``.
* :func:`report_dead_ends` reports, on the finished network, dead ends
  within ten times the tolerance of another line (``unjoined_gap``) and
  short dead-end stubs off a junction (``dangle``).
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import shapely
from pyproj import CRS

from .geodesy import geodesic_lengths
from .issues import IssueLog
from .model import Network
from .table import NOISE_M, LineTable

__all__ = ["trim_overshoots", "report_dead_ends", "UNJOINED_FACTOR"]

#: Dead ends closer than this many tolerances to another line are reported as ``unjoined_gap``.
UNJOINED_FACTOR = 10.0


def _outermost_interior_nodes(tab: LineTable) -> tuple[np.ndarray, np.ndarray]:
    """Per line, position of its first and last interior node (inf / -inf where it has none)."""
    line, pos = tab.line_node_positions()
    last_pos = (tab.last - tab.first).astype(float)
    interior = (pos > 0) & (pos < last_pos[line])
    li, pi = line[interior], pos[interior]
    starts = np.full(tab.nlines, np.inf)
    ends = np.full(tab.nlines, -np.inf)
    if len(li) == 0:
        return starts, ends
    # (line, pos) come sorted by line then position: first and last of each run
    head = np.ones(len(li), bool)
    head[1:] = li[1:] != li[:-1]
    tail = np.ones(len(li), bool)
    tail[:-1] = li[1:] != li[:-1]
    starts[li[head]] = pi[head]
    ends[li[tail]] = pi[tail]
    return starts, ends


def _distance_along(tab: LineTable) -> tuple[Callable[[np.ndarray, np.ndarray], np.ndarray], np.ndarray]:
    """Planar distance along each line: ``along(lines, pos)`` and the total length per line."""
    xy = tab.xy
    seglen = np.zeros(len(xy))
    same = tab.vline[1:] == tab.vline[:-1]
    d = np.hypot(*(xy[1:] - xy[:-1]).T)
    seglen[:-1] = np.where(same, d, 0.0)
    cum = np.cumsum(np.concatenate([[0.0], seglen[:-1]]))  # distance from row 0 to row r (global)

    def along(lines: np.ndarray, p: np.ndarray) -> np.ndarray:
        r = tab.first[lines] + np.floor(p).astype(np.int64)
        f = p - np.floor(p)
        r2 = np.minimum(r + 1, tab.last[lines])
        return cum[r] - cum[tab.first[lines]] + f * (cum[r2] - cum[r])

    return along, cum[tab.last] - cum[tab.first]


def _cut_stubs(tab: LineTable, which: str, posarr: np.ndarray, dist: np.ndarray, crs: CRS,
               issues: IssueLog, report: dict, delta: np.ndarray) -> None:
    """Cut the stubs beyond the trim positions at one end (``which``) of the lines; measure and report them."""
    xy = tab.xy
    ln = np.nonzero(~np.isnan(posarr))[0]
    if len(ln) == 0:
        return
    p = posarr[ln]
    fr, lr = tab.first[ln], tab.last[ln]
    k = np.floor(p).astype(np.int64)
    f = p - k
    r0 = fr + k
    r1 = np.minimum(r0 + 1, lr)
    node = xy[r0] + f[:, None] * (xy[r1] - xy[r0])
    # the stub: start .. node, or node .. end; rows strictly beyond the node are deleted
    if which == "start":
        lo, hi = fr, r0 + 1                       # rows [lo, hi) then the node
        cut_lo, cut_hi = fr, fr + np.ceil(p).astype(np.int64)
    else:
        lo, hi = r0 + 1, lr + 1                   # the node then rows [lo, hi)
        cut_lo, cut_hi = r0 + 1, lr + 1
    n = hi - lo
    owner = np.repeat(np.arange(len(ln)), n)
    rows = np.repeat(lo, n) + (np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n))
    pts = np.concatenate([xy[rows], node])
    own = np.concatenate([owner, np.arange(len(ln))])
    seq = np.concatenate([rows - np.repeat(lo, n), np.where(which == "start", n, -1)])
    order = np.lexsort((seq, own))
    report["trimmed_length_m"] += float(geodesic_lengths(pts[order], own[order], len(ln), crs).sum())
    np.add.at(delta, cut_lo, 1)
    np.add.at(delta, cut_hi, -1)
    tab.trimmed_nodes.append(node)
    for i in np.nonzero(dist[ln] >= NOISE_M)[0]:
        issues.add("gap_joined", node[i, 0], node[i, 1], f"overshoot of {dist[ln[i]]:.2f} m past a junction trimmed",
                   tab.label[ln[i]], tab.fid[ln[i]])


def trim_overshoots(tab: LineTable, snap_m: float, crs: CRS, issues: IssueLog, report: dict) -> None:
    """Cut back free line ends that run at most ``snap_m`` past a node of their own line.

    An end is free when no other line end lies within ``snap_m`` of it (else
    it is a junction, joined later).  Only the shorter half of a line can be
    trimmed.  Sets ``tab.trim_start``/``trim_end``, ``tab.deleted`` and
    ``tab.end_free``.
    """
    if snap_m <= 0:
        return
    starts, ends = _outermost_interior_nodes(tab)
    has = np.isfinite(starts)
    if not has.any():
        return
    nl = tab.nlines
    along, total = _distance_along(tab)
    pinv, pcount, _, pairs = tab.places(snap_m)
    crowded = pcount > 1
    crowded[pairs[:, 0]] = True
    crowded[pairs[:, 1]] = True
    free = ~crowded[pinv]
    ds = np.where(has, along(np.arange(nl), np.where(has, starts, 0.0)), np.inf)
    de = np.where(has, total - along(np.arange(nl), np.where(has, ends, 0.0)), np.inf)
    tab.trim_start = np.where((ds <= snap_m) & (ds > 0) & free[:nl] & (ds < total / 2), starts, np.nan)
    tab.trim_end = np.where((de <= snap_m) & (de > 0) & free[nl:] & (de < total / 2), ends, np.nan)
    delta = np.zeros(len(tab.xy) + 1, np.int64)
    _cut_stubs(tab, "start", tab.trim_start, ds, crs, issues, report, delta)
    _cut_stubs(tab, "end", tab.trim_end, de, crs, issues, report, delta)
    tab.deleted |= np.cumsum(delta)[:-1] > 0
    tab.end_free = np.concatenate([np.isnan(tab.trim_start), np.isnan(tab.trim_end)])


def _report_unjoined_gaps(net: Network, dead: np.ndarray, own_e: np.ndarray, other: np.ndarray, snap_m: float,
                          issues: IssueLog) -> None:
    """``unjoined_gap`` at each dead end within ``UNJOINED_FACTOR * snap_m`` of another line of its mode.

    A pair of dead ends facing each other is one gap, reported once.
    """
    far = UNJOINED_FACTOR * snap_m
    if far <= 0:
        return
    pts = shapely.points(net.node_x[dead], net.node_y[dead])
    tree = shapely.STRtree(net.edge_geometry)
    pi, ei = tree.query(pts, predicate="dwithin", distance=far)
    oe = own_e[pi]
    ok = ((ei != oe) & (net.edge_from[ei] != other[pi]) & (net.edge_to[ei] != other[pi])
          & (net.edge_mode[ei] == net.edge_mode[oe]) & (net.edge_mode[ei] != "transfer"))
    pi, ei = pi[ok], ei[ok]
    d = shapely.distance(pts[pi], net.edge_geometry[ei])
    order = np.lexsort((d, pi))
    pi, ei, d = pi[order], ei[order], d[order]
    first = np.ones(len(pi), bool)
    first[1:] = pi[1:] != pi[:-1]
    pi, ei, d = pi[first], ei[first], d[first]
    if len(pi) == 0:
        return
    q = shapely.get_coordinates(shapely.shortest_line(pts[pi], net.edge_geometry[ei])).reshape(-1, 2, 2)
    partner = np.full(len(pi), -1, np.int64)
    for end in (net.edge_from, net.edge_to):
        hit = np.hypot(q[:, 1, 0] - net.node_x[end[ei]], q[:, 1, 1] - net.node_y[end[ei]]) < NOISE_M
        partner = np.where(hit & (partner < 0), end[ei], partner)
    me = dead[pi]
    pos = {n: k for k, n in enumerate(me)}
    keep = np.ones(len(pi), bool)
    for k, (n, pt) in enumerate(zip(me, partner)):
        j = pos.get(pt)
        if j is not None and partner[j] == n and j < k:
            keep[k] = False
    mid = (q[:, 0] + q[:, 1]) / 2
    for k in np.nonzero(keep)[0]:
        e = own_e[pi[k]]
        issues.add("unjoined_gap", mid[k, 0], mid[k, 1],
                   f"gap of {d[k]:.2f} m left open (more than the {snap_m:g} m tolerance); "
                   "join it in the source if real", net.edge_src_layer[e], net.edge_src_fid[e])


def report_dead_ends(net: Network, snap_m: float, dangle_m: float, issues: IssueLog) -> None:
    """``unjoined_gap`` for dead ends near other lines; ``dangle`` for dead-end edges shorter than
    ``dangle_m`` hanging off a junction (a node of degree 3 or more)."""
    deg = net.degree
    dead = np.nonzero(deg == 1)[0]
    if len(dead) == 0:
        return
    # the one edge at each dead end, and the node at its other end
    own = np.full(net.n_nodes, -1, np.int64)
    own[net.edge_to] = np.arange(net.n_edges)
    own[net.edge_from] = np.arange(net.n_edges)
    own_e = own[dead]
    other = np.where(net.edge_from[own_e] == dead, net.edge_to[own_e], net.edge_from[own_e])
    _report_unjoined_gaps(net, dead, own_e, other, snap_m, issues)
    stub = (net.edge_mode[own_e] != "transfer") & (net.edge_length_m[own_e] < dangle_m) & (deg[other] >= 3)
    for n, e in zip(dead[stub], own_e[stub]):
        issues.add("dangle", net.node_x[n], net.node_y[n],
                   f"dead end of {net.edge_length_m[e]:.2f} m off a junction (shorter than {dangle_m:g} m): "
                   "an overshoot or a real stub?", net.edge_src_layer[e], net.edge_src_fid[e])

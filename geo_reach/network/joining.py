"""End joining and snapping: line ends within the tolerance meet.

1. *End to end.*  Line ends of one mode at one place (to 1 mm) already
   meet; places closer than ``snap_m`` (found with a k-d tree) are linked,
   and the links are clustered by single linkage (connected components,
   i.e. union-find over the links).  Every end of a cluster moves to its
   representative place: the place shared by most ends, ties to the first
   seen.  One ``gap_joined`` per cluster that moved by 1 mm or more, saying
   whether it closed a gap or pulled an overshoot back.
2. *Crossing artefacts.*  A joined end that ran past its junction also
   crossed a line there; those crossing vertices, within ``snap_m`` of the
   joined end, are dropped (on both lines).
3. *T-junctions.*  A dead end (an end not joined to another), and a
   cluster of joined ends taken as one, within ``snap_m`` of the interior
   of another line of its mode (one holding none of its ends) is moved onto
   the nearest point of that line (an existing vertex of the line within
   the tolerance is preferred); the point becomes a node of both.  So two
   lines meeting a millimetre past a through line join it too.  Candidate
   segments come from the grid hash
   (:func:`~geo_reach.network.gridhash.box_pairs`) over the ends' boxes
   grown by ``snap_m``; the exact test is the point-segment distance, and a
   distance equal to ``snap_m`` joins.
4. *More crossing artefacts.*  Two straight segments from one point meet
   only there, and a straight segment ending on another meets it only at
   that end.  So once the ends have moved, a crossing between the end
   segments of two lines joined at one junction (two lines leaving it at a
   sharp angle, their ends swapped over, cross just beyond it), or between
   an end segment and the segment it was snapped onto, is gone: those
   crossing vertices are dropped too, however far from the end they were.
5. The moved ends are written into the table, and the length they add (a
   gap closed) or remove (an overshoot pulled back) is measured on the
   ellipsoid over each end's terminal segment (``joined_gap_length_m``).

References
----------
.. [1] Tarjan, R. E. (1975). Efficiency of a good but not linear set union
   algorithm. Journal of the ACM 22(2), 215-225 (union-find; the clusters are
   the connected components of the links).
.. [2] Bentley, J. L. (1975). Multidimensional binary search trees used for
   associative searching. Communications of the ACM 18(9), 509-517 (k-d tree).
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pandas as pd
from pyproj import CRS

from .geodesy import geodesic_lengths
from .gridhash import box_pairs
from .issues import IssueLog
from .table import NOISE_M, LineTable, metres, union_find_labels

__all__ = ["join_ends"]


def _report_cluster(tab: LineTable, exy: np.ndarray, e0: int, place_xy: np.ndarray, span: float, nends: int,
                    issues: IssueLog) -> None:
    """One ``gap_joined`` for a cluster whose farthest end ``e0`` moved ``span`` metres to ``place_xy``."""
    nl = tab.nlines
    l0 = e0 % nl
    # pulled back along its own line: the junction lies on the end's last segment
    adj = tab.xy[tab.first[l0] + 1] if e0 < nl else tab.xy[tab.last[l0] - 1]
    end = exy[e0]
    d = adj - end
    t = float(np.clip(np.dot(place_xy - end, d) / max(np.dot(d, d), 1e-18), 0, 1))
    back = t > 0 and np.hypot(*(end + t * d - place_xy)) < NOISE_M
    what = (f"overshoot of {metres(span)} past a junction of {nends} line ends pulled back" if back else
            f"gap of {metres(span)} between {nends} line ends joined")
    issues.add("gap_joined", place_xy[0], place_xy[1], what, tab.label[l0], tab.fid[l0])


def _cluster_ends(tab: LineTable, snap_m: float, idx: np.ndarray, exy: np.ndarray, end_target: np.ndarray,
                  issues: IssueLog) -> tuple[np.ndarray, np.ndarray]:
    """Step 1: join the active ends ``idx`` to each other.

    Sets ``end_target`` of the ends ``idx``; never joins the two ends of one
    line to each other alone (a closed line is not a junction).

    Returns
    -------
    joined : ndarray of bool, shape (2 * nlines,)
        Ends that meet another end.
    cluster : ndarray of int64, shape (2 * nlines,)
        Cluster of each joined end (its representative place); -1 elsewhere.
    """
    nl = tab.nlines
    eline = tab.end_lines()
    emode = tab.mode[eline]
    joined = np.zeros(2 * nl, bool)
    pinv_all, pcount, pxy, pairs = tab.places(snap_m)
    pinv = pinv_all[idx]
    npl = len(pcount)
    pfirst = np.full(npl, 2 * nl, np.int64)
    np.minimum.at(pfirst, pinv_all, np.arange(2 * nl))
    pmode, pline = emode[pfirst], eline[pfirst]
    i, j = (pairs[:, 0], pairs[:, 1]) if len(pairs) else (np.zeros(0, np.int64), np.zeros(0, np.int64))
    ok = (pmode[i] == pmode[j]) & ~((pcount[i] == 1) & (pcount[j] == 1) & (pline[i] == pline[j]))
    plab = union_find_labels(npl, i[ok], j[ok])
    # representative place of each cluster: the most shared, ties -> first seen
    order = np.lexsort((pfirst, -pcount, plab))
    first_of = np.ones(npl, bool)
    first_of[1:] = plab[order][1:] != plab[order][:-1]
    rep = np.empty(plab.max() + 1, np.int64)
    rep[plab[order][first_of]] = order[first_of]
    target_place = rep[plab]                       # place -> representative place
    csize = np.bincount(plab)
    multi = (csize[plab[pinv]] > 1) | (pcount[pinv] > 1)
    joined[idx[multi]] = True
    cluster = np.full(2 * nl, -1, np.int64)
    cluster[idx[multi]] = target_place[pinv[multi]]
    end_target[idx] = pxy[target_place[pinv]]
    moved_place = np.nonzero(target_place != np.arange(npl))[0]
    if len(moved_place):
        moves_p = np.hypot(*(pxy[moved_place] - pxy[target_place[moved_place]]).T)
        span = np.zeros(npl)
        np.maximum.at(span, target_place[moved_place], moves_p)
        worst = np.full(npl, -1, np.int64)
        o = np.argsort(-moves_p, kind="stable")
        worst[target_place[moved_place][o][::-1]] = moved_place[o][::-1]
        nends = np.bincount(plab, weights=pcount)
        for rp in np.nonzero(span >= NOISE_M)[0]:
            _report_cluster(tab, exy, int(pfirst[worst[rp]]), pxy[rp], float(span[rp]), int(nends[plab[rp]]),
                            issues)
    return joined, cluster


def _drop_crossings_near_joined_ends(tab: LineTable, ends: np.ndarray, exy: np.ndarray, snap_m: float) -> None:
    """Step 2: drop crossing vertices within ``snap_m`` of a joined end of their own line, on both lines.

    ``ends`` are the joined ends and ``exy`` the ends' coordinates before
    they move.  Every crossing vertex at such a place (to 1 mm) is dropped,
    on whichever line it lies.
    """
    k = tab.n_crossing_events
    if k == 0 or len(ends) == 0:
        return
    line, _, ex, ey = tab.new.head(k)
    m = pd.DataFrame({"line": line, "ev": np.arange(k)}).merge(
        pd.DataFrame({"line": tab.end_lines()[ends], "end": ends}), on="line")
    if len(m) == 0:
        return
    evi, eni = m["ev"].to_numpy(), m["end"].to_numpy()
    near = np.hypot(ex[evi] - exy[eni, 0], ey[evi] - exy[eni, 1]) <= snap_m
    if not near.any():
        return
    key = np.column_stack([np.round(ex / NOISE_M), np.round(ey / NOISE_M)]).astype(np.int64)
    _, kid = np.unique(key, axis=0, return_inverse=True)
    kid = kid.ravel()
    tab.drop_crossings(np.isin(kid, np.unique(kid[evi[near]])))


def _drop_join_crossings(tab: LineTable, cluster: np.ndarray, snapped: list[tuple[np.ndarray, int]]) -> None:
    """Step 4: drop crossings between end segments joined at one place, or an end segment and its target.

    ``cluster`` is the cluster of each joined end (-1 elsewhere) and
    ``snapped`` lists (ends, first row of the target segment) for each
    anchor moved onto a line.
    """
    k = tab.n_crossing_events
    if k == 0:
        return
    own, other = tab.cross_row, tab.cross_partner_row
    nrows = len(tab.xy)
    nl = tab.nlines
    # cluster of the start and finish end whose terminal segment starts at each row (-1: none)
    by_row = np.full((2, nrows), -1, np.int64)
    jn = np.nonzero(cluster >= 0)[0]
    by_row[(jn >= nl).astype(int), tab.terminal_row(jn)] = cluster[jn]
    drop = np.zeros(k, bool)
    ok = other >= 0
    for a in range(2):
        for b in range(2):
            ca, cb = by_row[a, own], by_row[b, np.maximum(other, 0)]
            drop |= ok & (ca >= 0) & (ca == cb)
    if snapped:
        ends = np.concatenate([e for e, _ in snapped])
        target = np.concatenate([np.full(len(e), r, np.int64) for e, r in snapped])
        keys = np.unique(np.concatenate([tab.terminal_row(ends) * nrows + target,
                                         target * nrows + tab.terminal_row(ends)]))
        drop |= ok & np.isin(own * nrows + other, keys)
    if drop.any():
        tab.drop_crossings(drop)


def _nearest_on_segments(tab: LineTable, snap_m: float, pts: np.ndarray, pmode: np.ndarray,
                         pline_ok: Callable[[np.ndarray, np.ndarray], np.ndarray]) -> tuple[np.ndarray, ...]:
    """For each point, the nearest live segment of its mode within ``snap_m`` (distance <= ``snap_m``).

    ``pline_ok(pi, lines)`` says which (point, segment line) candidates are
    allowed.  Returns, for the points that have one: the point index, the
    segment index (into ``tab.seg``), the parameter along the segment, the
    nearest point and whether an end vertex of the segment (0 or 1) lies
    within ``snap_m`` of the point and is preferred (-1: none).
    """
    seg = tab.seg
    sl = tab.vline[seg]
    pbox = np.column_stack([pts - snap_m, pts + snap_m])
    a_, b_ = tab.xy[seg], tab.xy[seg + 1]
    pi, si = box_pairs(pbox, np.column_stack([np.minimum(a_, b_), np.maximum(a_, b_)]))
    ok = (pmode[pi] == tab.mode[sl[si]]) & pline_ok(pi, sl[si]) & ~tab.deleted[seg[si]] & ~tab.deleted[seg[si] + 1]
    pi, si = pi[ok], si[ok]
    ex, ey = pts[pi, 0], pts[pi, 1]
    ax, ay = tab.xy[seg[si], 0], tab.xy[seg[si], 1]
    bx, by = tab.xy[seg[si] + 1, 0], tab.xy[seg[si] + 1, 1]
    dx, dy = bx - ax, by - ay
    L2 = np.maximum(dx * dx + dy * dy, 1e-18)
    tt = np.clip(((ex - ax) * dx + (ey - ay) * dy) / L2, 0, 1)
    qx, qy = ax + tt * dx, ay + tt * dy
    dist = np.hypot(ex - qx, ey - qy)
    within = dist <= snap_m
    pi, si, ex, ey, ax, ay, bx, by, tt, qx, qy, dist = (
        v[within] for v in (pi, si, ex, ey, ax, ay, bx, by, tt, qx, qy, dist))
    # prefer an existing vertex of the target within the tolerance of the end
    da, db = np.hypot(ex - ax, ey - ay), np.hypot(ex - bx, ey - by)
    use_a = (da <= snap_m) & (da <= db)
    use_b = (db <= snap_m) & ~use_a
    vertex = np.where(use_a, 0, np.where(use_b, 1, -1))
    order = np.lexsort((dist, pi))
    first = np.ones(len(order), bool)
    first[1:] = pi[order][1:] != pi[order][:-1]
    k = order[first]
    return pi[k], si[k], tt[k], np.column_stack([qx[k], qy[k]]), vertex[k]


def _anchors(tab: LineTable, dead: np.ndarray, joined: np.ndarray, cluster: np.ndarray,
             end_target: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """What may snap onto a line interior: each dead end alone, then each cluster of joined ends as one.

    Returns the anchors' points (their ends' targets), the ends of each
    anchor (``ends[start[a]:start[a + 1]]``), and the sorted keys
    ``anchor * nlines + line`` of the lines each anchor holds an end of.
    """
    nl = tab.nlines
    anchor = np.full(2 * nl, -1, np.int64)
    anchor[dead] = np.arange(len(dead))
    jn = np.nonzero(joined)[0]
    _, cid = np.unique(cluster[jn], return_inverse=True)
    anchor[jn] = len(dead) + cid.ravel()
    n = len(dead) + (int(cid.max()) + 1 if len(jn) else 0)
    ends = np.nonzero(anchor >= 0)[0]
    ends = ends[np.argsort(anchor[ends], kind="stable")]
    start = np.concatenate([[0], np.cumsum(np.bincount(anchor[ends], minlength=n))])
    members = np.unique(anchor[ends] * nl + tab.end_lines()[ends])
    return end_target[ends[start[:-1]]].copy(), ends, start, members


def _snap_onto_lines(tab: LineTable, snap_m: float, dead: np.ndarray, joined: np.ndarray, cluster: np.ndarray,
                     end_target: np.ndarray, issues: IssueLog) -> list[tuple[np.ndarray, int]]:
    """Step 3: move each dead end, and each cluster of joined ends, onto the nearest point of another line.

    The line must be of the same mode, hold none of the anchor's ends and
    pass within ``snap_m`` (inclusive) of the anchor's point.  A cluster
    whose point lies just past a through line (each of its lines crossing
    that line just short of its end) is joined to it this way.  Returns
    (ends, first row of the target segment) for each anchor moved.
    """
    nl = tab.nlines
    pts, ends, start, members = _anchors(tab, dead, joined, cluster, end_target)
    if len(pts) == 0:
        return []
    eline = tab.end_lines()
    amode = tab.mode[eline[ends[start[:-1]]]]

    def other_line(p: np.ndarray, lines: np.ndarray) -> np.ndarray:
        key = p * nl + lines
        at = np.minimum(np.searchsorted(members, key), len(members) - 1)
        return members[at] != key

    pi, si, tt, q, vertex = _nearest_on_segments(tab, snap_m, pts, amode, other_line)
    seg = tab.seg
    snapped = []
    for k in range(len(pi)):
        p, s = pi[k], si[k]
        ln = tab.vline[seg[s]]
        if vertex[k] >= 0:
            row = seg[s] + vertex[k]
            tab.node_row[row] = True
            target = tab.xy[row]
        else:
            target = q[k]
            tab.new.add([ln], [seg[s] - tab.first[ln] + tt[k]], [q[k, 0]], [q[k, 1]])
        mine = ends[start[p]:start[p + 1]]
        end_target[mine] = target
        snapped.append((mine, int(seg[s])))
        move = float(np.hypot(*(pts[p] - target)))
        if move >= NOISE_M:
            e = int(mine[0])
            what = "line end" if len(mine) == 1 else f"junction of {len(mine)} line ends"
            issues.add("gap_joined", target[0], target[1],
                       f"{what} {metres(move)} from another line joined onto it (T-junction)",
                       tab.label[eline[e]], tab.fid[eline[e]])
    return snapped


def _apply_end_moves(tab: LineTable, exy: np.ndarray, end_target: np.ndarray, crs: CRS,
                     report: dict) -> None:
    """Step 4: move the ends, and add the signed geodesic length change to ``joined_gap_length_m``.

    """
    nl = tab.nlines
    moved = np.nonzero(np.any(end_target != exy, axis=1))[0]
    if len(moved) == 0:
        return
    eline = tab.end_lines()
    adj = np.where(moved < nl, tab.first[eline[moved]] + 1, tab.last[eline[moved]] - 1)
    two = np.repeat(np.arange(len(moved)), 2)
    old = geodesic_lengths(np.stack([exy[moved], tab.xy[adj]], axis=1).reshape(-1, 2), two, len(moved), crs)
    new = geodesic_lengths(np.stack([end_target[moved], tab.xy[adj]], axis=1).reshape(-1, 2), two, len(moved), crs)
    report["joined_gap_length_m"] += float((new - old).sum())
    tab.xy[tab.end_rows()[moved]] = end_target[moved]


def join_ends(tab: LineTable, snap_m: float, crs: CRS, issues: IssueLog, report: dict) -> None:
    """Join line ends to each other, then dead ends onto nearby line interiors (see the module docstring).

    Parameters
    ----------
    tab : LineTable
        Ends still free (``tab.end_free``) take part; the table's ends are moved in place.
    snap_m : float
        The tolerance (m); zero joins nothing.
    crs : pyproj.CRS
        The working CRS (for measuring).
    issues, report
        Where joins are recorded.
    """
    exy = tab.xy[tab.end_rows()].copy()
    end_target = exy.copy()
    active = tab.end_free
    idx = np.nonzero(active)[0]
    joined = np.zeros(2 * tab.nlines, bool)
    cluster = np.full(2 * tab.nlines, -1, np.int64)
    if len(idx) and snap_m > 0:
        joined, cluster = _cluster_ends(tab, snap_m, idx, exy, end_target, issues)
    _drop_crossings_near_joined_ends(tab, np.nonzero(joined)[0], exy, snap_m)
    dead = np.nonzero(active & ~joined)[0]
    snapped = []
    if (len(dead) or joined.any()) and snap_m > 0:
        snapped = _snap_onto_lines(tab, snap_m, dead, joined, cluster, end_target, issues)
    _drop_join_crossings(tab, cluster, snapped)
    _apply_end_moves(tab, exy, end_target, crs, report)

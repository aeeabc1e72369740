"""Noding: every place two segments touch or cross becomes a node on both lines.

Candidate segment pairs come from a numpy grid hash over the segment boxes
(:func:`~geo_reach.network.gridhash.box_pairs`); each candidate is then
tested exactly with the parametric segment-segment intersection formula
(O'Rourke 1998): for segments ``p + t r`` and ``q + u s``,

    t = ((q - p) x s) / (r x s),   u = ((q - p) x r) / (r x s),

where ``x`` is the 2-D cross product; they meet where both ``t`` and ``u``
lie in [0, 1] (widened by 1 mm of each segment's length for numeric noise).
Parallel segments that lie on one line and overlap are noded at each end
of the overlap.  The meeting point is an existing vertex where one is
within 1 mm, otherwise a new vertex on that line.

Level rule: lines at different levels meet only where one of them has a
line end at the meeting point (a bridge ends where its approach road
begins); an interior crossing between them is kept unjoined and reported
(``crossing_kept``).  Lines of different modes never meet here.

References
----------
.. [1] O'Rourke, J. (1998). Computational Geometry in C, 2nd ed., section 7.7
   (segment-segment intersection by parametric cross products).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .gridhash import box_pairs
from .issues import IssueLog
from .table import NOISE_M, LineTable

__all__ = ["NodeEvents", "segment_events", "node_crossings", "report_crossings"]


@dataclass
class NodeEvents:
    """Where segments meet.

    Attributes
    ----------
    seg, t, x, y : ndarray
        One row per (segment, meeting point): index into the segment
        arrays, parameter along the segment (0 or 1 at its vertices), and
        the point.
    new : ndarray of bool
        True where the point is a new vertex (inside the segment), false
        where it is one of the segment's vertices.
    partner : ndarray of int64
        The other segment of a crossing; -1 for the nodes of collinear overlaps.
    kept_x, kept_y, kept_a, kept_b : ndarray
        Interior crossings of lines at different levels, left unjoined: the
        point and the two segments.
    """

    seg: np.ndarray
    t: np.ndarray
    x: np.ndarray
    y: np.ndarray
    new: np.ndarray
    partner: np.ndarray
    kept_x: np.ndarray
    kept_y: np.ndarray
    kept_a: np.ndarray
    kept_b: np.ndarray


def _cat(parts: list, dtype: type = float) -> np.ndarray:
    return np.concatenate(parts) if parts else np.zeros(0, dtype)


def _candidate_pairs(x0: np.ndarray, y0: np.ndarray, x1: np.ndarray, y1: np.ndarray, seg_line: np.ndarray,
                     group: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Segment pairs whose boxes overlap, same mode, not two neighbours of one line."""
    boxes = np.column_stack([np.minimum(x0, x1), np.minimum(y0, y1), np.maximum(x0, x1), np.maximum(y0, y1)])
    a, b = box_pairs(boxes)
    # neighbours along the same line share their vertex by construction
    same_line = seg_line[a] == seg_line[b]
    m = (group[a] == group[b]) & ~(same_line & (b == a + 1))
    return a[m], b[m]


def _crossing_events(a: np.ndarray, b: np.ndarray, t: np.ndarray, u: np.ndarray, eta: np.ndarray, etb: np.ndarray,
                     parallel: np.ndarray, seg: tuple, level: np.ndarray, line_start: np.ndarray,
                     line_end: np.ndarray, out: tuple, kept: tuple) -> None:
    """Events of the non-parallel pairs that touch or cross (appended to ``out`` and ``kept``)."""
    x0, y0, x1, y1 = seg
    q = ~parallel & (t >= -eta) & (t <= 1 + eta) & (u >= -etb) & (u <= 1 + etb)
    ia, ib, tq, uq = a[q], b[q], np.clip(t[q], 0, 1), np.clip(u[q], 0, 1)
    ta0, ta1 = tq <= eta[q], tq >= 1 - eta[q]
    ub0, ub1 = uq <= etb[q], uq >= 1 - etb[q]
    # The meeting point: an existing vertex where there is one, else the computed point.
    X = x0[ia] + tq * (x1[ia] - x0[ia])
    Y = y0[ia] + tq * (y1[ia] - y0[ia])
    X = np.where(ub0, x0[ib], np.where(ub1, x1[ib], X))
    Y = np.where(ub0, y0[ib], np.where(ub1, y1[ib], Y))
    X = np.where(ta0, x0[ia], np.where(ta1, x1[ia], X))
    Y = np.where(ta0, y0[ia], np.where(ta1, y1[ia], Y))
    interior_a = ~(ta0 | ta1)
    interior_b = ~(ub0 | ub1)
    # Level rule: different levels meet only where one of them has a line end there.
    at_end_a = (ta0 & line_start[ia]) | (ta1 & line_end[ia])
    at_end_b = (ub0 & line_start[ib]) | (ub1 & line_end[ib])
    diff_level = level[ia] != level[ib]
    join = ~diff_level | at_end_a | at_end_b
    k = diff_level & ~join & interior_a & interior_b
    kept[0].append(X[k]); kept[1].append(Y[k]); kept[2].append(ia[k]); kept[3].append(ib[k])
    for s, other, tt, e0, e1, inter in ((ia, ib, tq, ta0, ta1, interior_a), (ib, ia, uq, ub0, ub1, interior_b)):
        out[0].append(s[join]); out[2].append(X[join]); out[3].append(Y[join])
        out[1].append(np.where(e0, 0.0, np.where(e1, 1.0, tt))[join])
        out[4].append(inter[join]); out[5].append(other[join])


def _overlap_events(ca: np.ndarray, cb: np.ndarray, seg: tuple, level: np.ndarray, out: tuple) -> None:
    """Events of collinear pairs that overlap or touch end to end.

    Each end of one segment lying inside the other is a new vertex on the
    other; each end lying within the other's extent (inside it or at one of
    its ends) is a node on its own segment.  An end beyond the other
    segment is nothing (two collinear lines meeting end to end are not
    split at their far vertices).
    """
    x0, y0, x1, y1 = seg
    same_lvl = level[ca] == level[cb]
    ca, cb = ca[same_lvl], cb[same_lvl]
    for s_on, s_pt in ((ca, cb), (cb, ca)):
        ox, oy = x0[s_on], y0[s_on]
        dx, dy = x1[s_on] - ox, y1[s_on] - oy
        L2 = dx * dx + dy * dy
        et = NOISE_M / np.maximum(np.sqrt(L2), NOISE_M)
        for t_end, ex, ey in ((0.0, x0[s_pt], y0[s_pt]), (1.0, x1[s_pt], y1[s_pt])):
            tt = ((ex - ox) * dx + (ey - oy) * dy) / np.maximum(L2, 1e-18)
            inside = (tt > et) & (tt < 1 - et)
            out[0].append(s_on[inside]); out[1].append(tt[inside])
            out[2].append(ex[inside]); out[3].append(ey[inside]); out[4].append(np.ones(inside.sum(), bool))
            out[5].append(np.full(inside.sum(), -1, np.int64))
            within = (tt >= -et) & (tt <= 1 + et)
            out[0].append(s_pt[within]); out[1].append(np.full(within.sum(), t_end)); out[2].append(ex[within])
            out[3].append(ey[within]); out[4].append(np.zeros(within.sum(), bool))
            out[5].append(np.full(within.sum(), -1, np.int64))


def segment_events(x0: np.ndarray, y0: np.ndarray, x1: np.ndarray, y1: np.ndarray, seg_line: np.ndarray,
                   group: np.ndarray, level: np.ndarray, line_start: np.ndarray,
                   line_end: np.ndarray) -> NodeEvents:
    """All pairs of segments that touch or cross, as the nodes they make.

    Parameters
    ----------
    x0, y0, x1, y1 : ndarray of float64, shape (nseg,)
        Segment end points (metres).
    seg_line, group, level : ndarray, shape (nseg,)
        Line, mode and level of each segment.
    line_start, line_end : ndarray of bool, shape (nseg,)
        The segment's first (last) vertex is its line's start (end).

    Returns
    -------
    NodeEvents
    """
    a, b = _candidate_pairs(x0, y0, x1, y1, seg_line, group)
    px, py = x0[a], y0[a]
    rx, ry = x1[a] - px, y1[a] - py
    sx, sy = x1[b] - x0[b], y1[b] - y0[b]
    la, lb = np.hypot(rx, ry), np.hypot(sx, sy)
    den = rx * sy - ry * sx
    wx, wy = x0[b] - px, y0[b] - py
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (wx * sy - wy * sx) / den
        u = (wx * ry - wy * rx) / den
    # Tolerances as parameters: NOISE_M along each segment.
    eta = NOISE_M / np.maximum(la, NOISE_M)
    etb = NOISE_M / np.maximum(lb, NOISE_M)
    parallel = np.abs(den) <= 1e-12 * la * lb
    out = ([], [], [], [], [], [])     # seg, t, x, y, new, partner
    kept = ([], [], [], [])        # x, y, seg a, seg b
    seg = (x0, y0, x1, y1)
    _crossing_events(a, b, t, u, eta, etb, parallel, seg, level, line_start, line_end, out, kept)
    c = parallel & (np.abs(wx * ry - wy * rx) <= NOISE_M * np.maximum(la, NOISE_M))
    if c.any():
        _overlap_events(a[c], b[c], seg, level, out)
    return NodeEvents(_cat(out[0], np.int64), _cat(out[1]), _cat(out[2]), _cat(out[3]), _cat(out[4], bool),
                      _cat(out[5], np.int64),
                      _cat(kept[0]), _cat(kept[1]), _cat(kept[2], np.int64), _cat(kept[3], np.int64))


def node_crossings(tab: LineTable, issues: IssueLog) -> None:
    """Find every meeting of segments and record it in ``tab`` as nodes on both lines.

    Vertex meetings set ``tab.node_row``; meetings inside a segment become
    new vertices (``tab.new``, counted in ``tab.n_crossing_events``), and
    the two segments of each are kept (``tab.cross_row``,
    ``tab.cross_partner_row``) so that crossings made only by misplaced line
    ends can be dropped once the ends are joined
    (:mod:`~geo_reach.network.joining`).
    Crossings kept unjoined between levels are reported once per place
    (to 1 cm) as ``crossing_kept``.
    """
    xy, seg = tab.xy, tab.seg
    sl = tab.vline[seg]
    x0, y0, x1, y1 = xy[seg, 0], xy[seg, 1], xy[seg + 1, 0], xy[seg + 1, 1]
    line_start = seg == tab.first[sl]
    line_end = seg + 1 == tab.last[sl]
    ev = segment_events(x0, y0, x1, y1, sl, tab.mode[sl], tab.level[sl], line_start, line_end)
    vert = ~ev.new
    tab.node_row[seg[ev.seg[vert]] + (ev.t[vert] >= 0.5)] = True
    nw = ev.new
    tab.new.add(sl[ev.seg[nw]], (seg[ev.seg[nw]] - tab.first[sl[ev.seg[nw]]]) + ev.t[nw], ev.x[nw], ev.y[nw])
    tab.cross_row = seg[ev.seg[nw]]
    tab.cross_partner_row = np.where(ev.partner[nw] >= 0, seg[np.maximum(ev.partner[nw], 0)], -1)
    seen = set()
    for x, y, a, b in zip(ev.kept_x, ev.kept_y, ev.kept_a, ev.kept_b):
        key = (round(x / 0.01), round(y / 0.01))
        if key in seen:
            continue
        seen.add(key)
        la, lb = sl[a], sl[b]
        issues.add("crossing_kept", x, y,
                   f"crossing kept unjoined: level {tab.level[la]:g} over/under level {tab.level[lb]:g} "
                   f"(feature {tab.fid[lb]} of {tab.label[lb]})", tab.label[la], tab.fid[la])
    tab.n_crossing_events = len(tab.new)


def report_crossings(tab: LineTable, issues: IssueLog) -> None:
    """One ``crossing_split`` spot per place (to 1 mm) where a crossing still needs a new vertex.

    A place where an overshoot was trimmed is reported as that, not also as a crossing.
    """
    k = tab.n_crossing_events
    if k == 0:
        return
    line, _, x, y = tab.new.head(k)
    key = np.column_stack([np.round(x / NOISE_M), np.round(y / NOISE_M)]).astype(np.int64)
    if tab.trimmed_nodes:
        t = np.concatenate(tab.trimmed_nodes)
        tk = {(int(a), int(b)) for a, b in np.round(t / NOISE_M).astype(np.int64)}
        keep = np.array([(int(a), int(b)) not in tk for a, b in key], dtype=bool)
        line, x, y, key = line[keep], x[keep], y[keep], key[keep]
        if len(key) == 0:
            return
    _, first, inv, _ = np.unique(key, axis=0, return_index=True, return_inverse=True, return_counts=True)
    nlines = np.zeros(len(first), np.int64)
    pairs = np.unique(np.column_stack([inv.ravel(), line]), axis=0)
    np.add.at(nlines, pairs[:, 0], 1)
    for f, n in zip(first, nlines):
        issues.add("crossing_split", x[f], y[f], f"lines crossing with no shared vertex were split ({n} line(s) cut)",
                   tab.label[line[f]], tab.fid[line[f]])

"""Candidate pairs of boxes from a uniform grid hash (numpy only, no geometry objects).

The builder asks two questions of this kind: which segments may touch or
cross (boxes of segments against each other) and which segments lie near a
line end (boxes of ends grown by the tolerance against boxes of segments).
Both are answered here by listing every box in each cell of a uniform grid
it touches, pairing the boxes that share a cell, and keeping a pair only in
the one cell that holds the lower-left corner of the two boxes' overlap.
The exact geometric tests are the callers'.

References
----------
.. [1] Samet, H. (2006). Foundations of Multidimensional and Metric Data
   Structures. Morgan Kaufmann, section 1.1 (the uniform grid / fixed-grid
   method of bucketing points and rectangles).
"""

from __future__ import annotations

import numpy as np

__all__ = ["box_pairs"]


def _grid_cells(box: np.ndarray, cell: float, origin: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(box index, cell column, cell row) for every grid cell each box touches."""
    c0 = np.floor((box[:, :2] - origin) / cell).astype(np.int64)
    c1 = np.floor((box[:, 2:] - origin) / cell).astype(np.int64)
    nx = c1[:, 0] - c0[:, 0] + 1
    ny = c1[:, 1] - c0[:, 1] + 1
    cnt = nx * ny
    idx = np.repeat(np.arange(len(box), dtype=np.int64), cnt)
    k = np.arange(int(cnt.sum()), dtype=np.int64) - np.repeat(np.cumsum(cnt) - cnt, cnt)
    cx = c0[idx, 0] + k % nx[idx]
    cy = c0[idx, 1] + k // nx[idx]
    return idx, cx, cy


#: A box spanning more grid cells than about this is paired in a coarser grid of its own, so one
#: long segment among short ones cannot fill memory with the cells it covers.
MAX_CELLS_PER_BOX = 64

_EMPTY = (np.zeros(0, np.int64), np.zeros(0, np.int64))


def _too_big(box: np.ndarray, cell: float) -> np.ndarray:
    """Boxes that may touch more than :data:`MAX_CELLS_PER_BOX` cells of side ``cell``."""
    return ((box[:, 2] - box[:, 0]) / cell + 2) * ((box[:, 3] - box[:, 1]) / cell + 2) > MAX_CELLS_PER_BOX


def box_pairs(abox: np.ndarray, bbox: np.ndarray | None = None,
              cell: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Pairs of boxes that overlap (touching counts), found with a uniform grid hash.

    Parameters
    ----------
    abox, bbox : ndarray of float64, shape (n, 4)
        Boxes as xmin, ymin, xmax, ymax.  Without ``bbox`` the pairs are
        within ``abox``, each once with i < j.
    cell : float, optional
        Grid cell side.  Default: the median box extent within one set;
        twice the larger of the two sets' median extents across two sets
        (at least 1 mm).

    Returns
    -------
    i, j : ndarray of int64
        Indices into ``abox`` and ``bbox`` (or ``abox``).

    Notes
    -----
    Each box is listed in every cell it touches; a pair is reported only in
    the cell holding the lower-left corner of the two boxes' overlap, so it
    comes out exactly once.  Boxes that would touch more than
    :data:`MAX_CELLS_PER_BOX` cells are paired separately in a grid sized
    on them (recursively; at least half of a set is small at its own
    median size, so the recursion ends), which keeps the memory at
    O(n + pairs) even for a few very long segments among many short ones.
    """
    same = bbox is None
    bbox = abox if same else bbox
    if len(abox) == 0 or len(bbox) == 0:
        return _EMPTY
    if same:
        return _self_box_pairs(abox, cell)
    if cell is None:   # sized on the larger boxes, so neither side spreads over many cells
        ext_a = np.maximum(abox[:, 2] - abox[:, 0], abox[:, 3] - abox[:, 1])
        ext_b = np.maximum(bbox[:, 2] - bbox[:, 0], bbox[:, 3] - bbox[:, 1])
        cell = max(2.0 * float(np.median(ext_a)), 2.0 * float(np.median(ext_b)), 1e-3)
    big_a, big_b = _too_big(abox, cell), _too_big(bbox, cell)
    if not (big_a.any() or big_b.any()):
        return _grid_cross(abox, bbox, cell)
    sa, ba = np.nonzero(~big_a)[0], np.nonzero(big_a)[0]
    sb, bb = np.nonzero(~big_b)[0], np.nonzero(big_b)[0]
    i1, j1 = _grid_cross(abox[sa], bbox[sb], cell) if len(sa) and len(sb) else _EMPTY
    i2, j2 = box_pairs(abox[ba], bbox) if len(ba) else _EMPTY
    i3, j3 = box_pairs(abox[sa], bbox[bb]) if len(sa) and len(bb) else _EMPTY
    return np.concatenate([sa[i1], ba[i2], sa[i3]]), np.concatenate([sb[j1], j2, bb[j3]])


def _grid_cross(abox: np.ndarray, bbox: np.ndarray, cell: float) -> tuple[np.ndarray, np.ndarray]:
    """:func:`box_pairs` across two sets in one grid of side ``cell``."""
    origin = np.minimum(abox[:, :2].min(axis=0), bbox[:, :2].min(axis=0))
    ai, ax_, ay_ = _grid_cells(abox, cell, origin)
    bi, bx_, by_ = _grid_cells(bbox, cell, origin)
    ny = int(max(ay_.max(), by_.max())) + 1
    akey = ax_ * ny + ay_
    bkey = bx_ * ny + by_
    order = np.argsort(bkey, kind="stable")
    bkey_s, bi_s = bkey[order], bi[order]
    lo = np.searchsorted(bkey_s, akey, side="left")
    hi = np.searchsorted(bkey_s, akey, side="right")
    n = hi - lo
    rep = np.repeat(np.arange(len(akey), dtype=np.int64), n)
    pos = np.repeat(lo, n) + (np.arange(int(n.sum()), dtype=np.int64) - np.repeat(np.cumsum(n) - n, n))
    i = ai[rep]
    j = bi_s[pos]
    keep = (abox[i, 0] <= bbox[j, 2]) & (bbox[j, 0] <= abox[i, 2]) & (abox[i, 1] <= bbox[j, 3]) & \
        (bbox[j, 1] <= abox[i, 3])
    i, j, rep = i[keep], j[keep], rep[keep]
    # report each pair once: in the cell of the overlap's lower-left corner
    rx = np.maximum(abox[i, 0], bbox[j, 0])
    ry = np.maximum(abox[i, 1], bbox[j, 1])
    own = (np.floor((rx - origin[0]) / cell).astype(np.int64) == ax_[rep]) & \
        (np.floor((ry - origin[1]) / cell).astype(np.int64) == ay_[rep])
    return i[own], j[own]


def _self_box_pairs(box: np.ndarray, cell: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """:func:`box_pairs` within one set (pairs as (smaller, larger) index)."""
    if cell is None:
        ext = np.maximum(box[:, 2] - box[:, 0], box[:, 3] - box[:, 1])
        cell = max(float(np.median(ext)), 1e-3)
    big = _too_big(box, cell)
    if not big.any():
        return _grid_self(box, cell)
    s, b = np.nonzero(~big)[0], np.nonzero(big)[0]
    i1, j1 = _grid_self(box[s], cell) if len(s) else _EMPTY
    i2, j2 = box_pairs(box[b], box[s]) if len(s) else _EMPTY
    i3, j3 = _self_box_pairs(box[b])
    i = np.concatenate([s[i1], b[i2], b[i3]])
    j = np.concatenate([s[j1], s[j2], b[j3]])
    return np.minimum(i, j), np.maximum(i, j)


def _grid_self(box: np.ndarray, cell: float) -> tuple[np.ndarray, np.ndarray]:
    """Pairs within one set in one grid: each cell's entries are paired only with those after them."""
    origin = box[:, :2].min(axis=0)
    bi, cx, cy = _grid_cells(box, cell, origin)
    key = cx * (int(cy.max()) + 1) + cy
    order = np.argsort(key, kind="stable")
    key, bi, cx, cy = key[order], bi[order], cx[order], cy[order]
    end = np.searchsorted(key, key, side="right")
    n = end - np.arange(len(key)) - 1
    rep = np.repeat(np.arange(len(key), dtype=np.int64), n)
    pos = rep + 1 + (np.arange(int(n.sum()), dtype=np.int64) - np.repeat(np.cumsum(n) - n, n))
    i, j = bi[rep], bi[pos]
    keep = (box[i, 0] <= box[j, 2]) & (box[j, 0] <= box[i, 2]) & (box[i, 1] <= box[j, 3]) & \
        (box[j, 1] <= box[i, 3])
    i, j, rep = i[keep], j[keep], rep[keep]
    rx = np.maximum(box[i, 0], box[j, 0])
    ry = np.maximum(box[i, 1], box[j, 1])
    own = (np.floor((rx - origin[0]) / cell).astype(np.int64) == cx[rep]) & \
        (np.floor((ry - origin[1]) / cell).astype(np.int64) == cy[rep])
    i, j = i[own], j[own]
    return np.minimum(i, j), np.maximum(i, j)

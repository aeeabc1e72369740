"""Slow, obvious references for walks on a friction grid, written apart from the library's kernel.

* :func:`grid_lengths`: the shortest walk between cell centres on the grid graph
  (scipy.sparse.csgraph.dijkstra; Virtanen et al. 2020, "SciPy 1.0: fundamental algorithms
  for scientific computing in Python", Nature Methods 17), every passable cell joined to its
  neighbours by arcs as long as the straight line between the centres.
* :func:`walk_length`: the documented walk from a point at a cell centre to any target:
  across the grid to a centre in the target's block of nine cells, then straight to the
  target, a straight piece never crossing a barrier polygon unless it ends inside it;
  or straight to a target in the point's own block of nine.
* :func:`tobler_kmh`: Tobler's hiking function written out (Tobler 1993, "Three presentations
  on geographical analysis and modeling", NCGIA Technical Report 93-1):
  W = 6 exp(-3.5 |S + 0.05|) km/h, S the slope (rise over run).

The move set (8 or 16 neighbours) is the one thing taken from the library: :func:`kernel_moves`
reads it off the kernel's cost to a knight's-move cell on a uniform 3 x 3 grid
(1 + sqrt 2 cells with 8 neighbours, sqrt 5 with 16).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp
import shapely
from scipy.sparse.csgraph import dijkstra

__all__ = ["kernel_moves", "grid_lengths", "walk_length", "tobler_kmh", "barrier_cells"]


def kernel_moves() -> int:
    """8 or 16: the move set the library's grid kernel uses now."""
    from geo_reach.analysis.accumulate import accumulate

    seeds = np.full((3, 3), np.inf)
    seeds[0, 0] = 0.0
    r = accumulate(np.full((3, 3), 6.0), seeds, 100.0)   # 6 km/h: 1 minute per 100 m
    knight = float(r.minutes[2, 1])
    if math.isclose(knight, math.sqrt(5.0), rel_tol=1e-9):
        return 16
    assert math.isclose(knight, 1.0 + math.sqrt(2.0), rel_tol=1e-9), knight
    return 8


def tobler_kmh(slope):
    """Tobler (1993): walking speed in km/h on a slope (rise over run, uphill positive)."""
    return 6.0 * np.exp(-3.5 * np.abs(np.asarray(slope, float) + 0.05))


def barrier_cells(shape, x0, y1, cell_m, polygon) -> np.ndarray:
    """Cells whose square shares area with ``polygon`` (rows from the top edge ``y1``, columns from ``x0``)."""
    rows, cols = shape
    out = np.zeros(shape, bool)
    for r in range(rows):
        for c in range(cols):
            box = shapely.box(x0 + c * cell_m, y1 - (r + 1) * cell_m, x0 + (c + 1) * cell_m, y1 - r * cell_m)
            out[r, c] = box.intersection(polygon).area > 0
    return out


def grid_lengths(passable: np.ndarray, cell_m: float, source: tuple, moves: int) -> np.ndarray:
    """Shortest walk length (m) from the centre of cell ``source`` to every cell centre; inf where none."""
    rows, cols = passable.shape
    offs = [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1) if (dr, dc) != (0, 0)]
    if moves == 16:
        offs += [(a * 1, b * 2) for a in (-1, 1) for b in (-1, 1)] + [(a * 2, b * 1) for a in (-1, 1) for b in (-1, 1)]
    tail, head, w = [], [], []
    for r in range(rows):
        for c in range(cols):
            if not passable[r, c]:
                continue
            for dr, dc in offs:
                rr, cc = r + dr, c + dc
                if abs(dr) + abs(dc) == 3:   # a knight move also needs the two cells it passes through
                    ar, ac = r + (dr // 2 if abs(dr) == 2 else 0), c + (dc // 2 if abs(dc) == 2 else 0)
                    br, bc = r + (dr // 2 if abs(dr) == 2 else dr), c + (dc // 2 if abs(dc) == 2 else dc)
                    if not (0 <= ar < rows and 0 <= ac < cols and 0 <= br < rows and 0 <= bc < cols
                            and passable[ar, ac] and passable[br, bc]):
                        continue
                if 0 <= rr < rows and 0 <= cc < cols and passable[rr, cc]:
                    tail.append(r * cols + c)
                    head.append(rr * cols + cc)
                    w.append(cell_m * math.hypot(dr, dc))
    g = sp.csr_array((w, (tail, head)), shape=(rows * cols, rows * cols))
    d = dijkstra(g, directed=True, indices=source[0] * cols + source[1])
    return d.reshape(rows, cols)


def walk_length(p, t, lengths, x0, y1, cell_m, barrier=None) -> float:
    """The documented walk from ``p`` (at a cell centre; ``lengths`` from :func:`grid_lengths` there) to ``t``."""
    rows, cols = lengths.shape

    def cell(q):
        return int(math.floor((y1 - q[1]) / cell_m)), int(math.floor((q[0] - x0) / cell_m))

    def centre(r, c):
        return x0 + (c + 0.5) * cell_m, y1 - (r + 0.5) * cell_m

    def blocked(a, b):
        if barrier is None or (a[0] == b[0] and a[1] == b[1]):
            return False
        seg = shapely.LineString([a, b])
        meets = seg.intersects(barrier) and not seg.touches(barrier)
        inside = barrier.contains(shapely.Point(a)) or barrier.contains(shapely.Point(b))
        return meets and not inside

    rt, ct = cell(t)
    best = math.inf
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            r, c = rt + dr, ct + dc
            if 0 <= r < rows and 0 <= c < cols and np.isfinite(lengths[r, c]):
                q = centre(r, c)
                if not blocked(q, t):
                    best = min(best, lengths[r, c] + math.hypot(q[0] - t[0], q[1] - t[1]))
    rp, cp = cell(p)
    if abs(rt - rp) <= 1 and abs(ct - cp) <= 1 and not blocked(p, t):
        best = min(best, math.hypot(t[0] - p[0], t[1] - p[1]))
    return best

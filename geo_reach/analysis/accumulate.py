"""Least-cost accumulation over a grid from seeded cells (a cost-distance surface).

One engine, :func:`accumulate`, runs Dijkstra's algorithm on the grid's
neighbour graph without building it: the neighbours of a cell are found by
index arithmetic inside a numba kernel with an indexed binary heap
(decrease-key), so the result is the exact shortest-path cost of the
discretised problem.  :func:`accumulate_reference` is the slow, obvious
version (``heapq`` over a dict, move geometry worked out from scratch) the
tests hold the kernel to.

Move set.  ``neighbours=16`` (the default) moves to the 8 cells around a cell
and to the 8 cells a knight's move away (two cells along one axis, one along
the other); ``neighbours=8`` to the 8 cells around only.  Straight walking is
overstated by at most ``1 / cos(g / 2)`` where ``g`` is the widest angle
between two neighbouring moves (the path to a cell combines the two moves
whose directions bracket it): 45 degrees for 8 neighbours (bound 1.0824),
atan(1/2) = 26.57 degrees for 16 (bound 1.0275).  The tests derive both from
the move geometry.

Move cost (minutes).  A move is the straight segment between two cell
centres, ``d`` metres long (``cell_m`` times 1, sqrt 2 or sqrt 5); each piece
of it is charged at the flat-ground pace of the cell it lies in, and the
whole move is divided by Tobler's slope factor::

    minutes = sum(piece_m * pace_cell) / slope_factor(slope)

where ``pace = 60 / (1000 * flat_kmh)`` minutes per metre.  An axis or
diagonal move lies half in each end cell (a diagonal crosses the two other
cells only at their shared corner), so it costs ``d (pace_a + pace_b) / 2``
(the convention of scikit-image's ``MCP_Geometric`` too); a knight move lies
a quarter in each of four cells: its two end cells and the two cells it
passes through (for a move of +1 row, +2 columns from ``(r, c)``: ``(r, c+1)``
and ``(r+1, c+1)``), so it costs ``d (pace_a + pace_1 + pace_2 + pace_b) / 4``.
``slope_factor`` is Tobler's speed ratio ``T(s)/T(0)`` (see :mod:`.friction`)
for the slope ``s = (z_to - z_from) / d`` in the direction of travel, taken
over the move's own length (so a knight move's rise is spread over
``sqrt 5`` cells), clipped to ``+-slope_limit``.  A move with a missing
elevation at either end is costed as flat.

Barriers.  Cells with speed 0 or NaN are impassable: nothing enters them, and
no move passes through one along any length (a knight move whose two
pass-through cells include an impassable one is not made).  A diagonal move
touches its two side cells only at a corner, so it may pass between two
impassable cells that meet at a corner (as in ``MCP_Geometric``); barriers
are rasterised with every touched cell marked
(:func:`~geo_reach.analysis.friction.rasterise_barriers`), which closes such
gaps for drawn barrier lines.  A seeded impassable cell keeps its seed cost
but spreads nowhere.

Direction.  Seeds are where the network is entered.  ``direction="to-hub"``
costs the trip from each cell *to* the network (the accumulation spreads
outward from the seeds, so a relaxation from a settled cell ``u`` to its
neighbour ``v`` is a move travelled from ``v`` to ``u``); ``"from-hub"``
costs the trip from the network out to each cell (travelled ``u`` to ``v``).
Without elevation both are the same.

Exact points (:mod:`.pointwalk`).  :func:`~.pointwalk.seed_points` puts cost at exact positions (road
samples, hubs) instead of cell centres: each point seeds the centres of its
own cell and of the eight cells around it with its cost plus the straight
walk to each, costed as a move is (pieces at their cells' paces, Tobler on
the rise from the point's elevation, bilinear between the four centres
around it, to the centre's).  :func:`~.pointwalk.minutes_at_points` reads a surface at
exact positions with the same walks, a little farther: the cheapest of the
centres of the 25 cells up to two rows and columns away plus the walk to it,
or, given the seed points, a straight walk to one of those lying in the same
25 cells.  A point inside an impassable cell joins that cell alone, at no
walking cost (a road on a bridge seeds the bridge cell with the road's cost).

Contract for callers (walk legs off the network).  ``accumulate`` takes
rasters in row-major (north-up) order and a cell size; it never reads a
CRS.  Its minutes are least costs over the move graph above: with uniform
friction and no terrain they lie between the straight-line walking time and
that time times the move set's bound (1.0275 for 16 neighbours), and equal
it exactly along the move directions.  Positions passed to
:func:`seed_points` and :func:`minutes_at_points` are in *cell units*:
``col = (x - x_left) / cell_m``, ``row = (y_top - y) / cell_m`` (cell
``(r, c)`` covers ``[c, c + 1) x [r, r + 1)``, centre ``(c + 0.5, r + 0.5)``).

References
----------
.. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
.. [2] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling. NCGIA Technical Report 93-1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np

from ..errors import OptionError
from .friction import SLOPE_LIMIT, TOBLER_BEST_SLOPE, TOBLER_DECAY

__all__ = ["Accumulated", "accumulate", "moves", "DIRECTIONS", "NEIGHBOURS", "MOVES_8", "KNIGHT_MOVES",
           "READ_REACH"]

#: Trip directions a surface can be costed for.
DIRECTIONS = ("to-hub", "from-hub")
#: Move sets a surface can use: 8 (axes and diagonals) or 16 (plus the knight moves).
NEIGHBOURS = (8, 16)
#: The 8-neighbour moves as (row, column) offsets: the axes, then the diagonals.
MOVES_8 = ((-1, 0), (1, 0), (0, -1), (0, 1), (-1, -1), (-1, 1), (1, -1), (1, 1))
#: The eight knight moves the 16-neighbour set adds.
KNIGHT_MOVES = ((-2, -1), (-2, 1), (-1, -2), (-1, 2), (1, -2), (1, 2), (2, -1), (2, 1))
#: Pieces of a walk shorter than this (cell sides) are ignored: a segment through a cell corner
#: touches the cells meeting there, it does not cross them.
_TOUCH = 1e-9
#: Cells (rows and columns away) a point being read joins: its own and those up to 2 away (25 cells).
#: Seeds join only their own and the 8 around (millions of them); a read point (thousands) walks
#: straight a little farther, which cuts the detour through a cell centre.
READ_REACH = 2


def moves(neighbours: int = 16) -> tuple:
    """The (row, column) offsets of a move set.

    >>> len(moves(8)), len(moves(16))
    (8, 16)
    """
    _check_neighbours(neighbours)
    return MOVES_8 if neighbours == 8 else MOVES_8 + KNIGHT_MOVES


def _check_neighbours(neighbours):
    if isinstance(neighbours, bool) or neighbours not in NEIGHBOURS:
        raise OptionError(f"neighbours {neighbours!r}: choose 8 (axes and diagonals) or 16 (also knight moves)",
                          key="neighbours")


@dataclass(frozen=True)
class Accumulated:
    """Result of :func:`accumulate`.

    Attributes
    ----------
    minutes : ndarray of float64, shape (rows, cols)
        Least cost from (``to-hub``: to) the seeds, minutes; NaN = unreachable.
    label : ndarray of int64, shape (rows, cols)
        The ``seed_label`` of the seed whose cost reached the cell; 0 = none.
        Where two seeds tie exactly, either may be given.
    """

    minutes: np.ndarray
    label: np.ndarray


# --------------------------------------------------------------------- kernel
@numba.njit(cache=True, nogil=True)
def _sift_up(hk, hi, pos, i):
    k = hk[i]
    it = hi[i]
    while i > 0:
        p = (i - 1) >> 1
        if hk[p] <= k:
            break
        hk[i] = hk[p]
        hi[i] = hi[p]
        pos[hi[i]] = i
        i = p
    hk[i] = k
    hi[i] = it
    pos[it] = i


@numba.njit(cache=True, nogil=True)
def _sift_down(hk, hi, pos, i, size):
    k = hk[i]
    it = hi[i]
    while True:
        c = 2 * i + 1
        if c >= size:
            break
        if c + 1 < size and hk[c + 1] < hk[c]:
            c += 1
        if hk[c] >= k:
            break
        hk[i] = hk[c]
        hi[i] = hi[c]
        pos[hi[i]] = i
        i = c
    hk[i] = k
    hi[i] = it
    pos[it] = i


def _move_table(neighbours: int, ncols: int):
    """Per move: row and column offsets, linear offset, length in cells, and the linear offsets of the
    two cells a knight move passes through (0 for the others), and a knight flag."""
    mv = moves(neighbours)
    dr = np.array([m[0] for m in mv], dtype=np.int64)
    dc = np.array([m[1] for m in mv], dtype=np.int64)
    knight = (np.abs(dr) + np.abs(dc)) == 3
    # pass-through cells of a knight move: one step along the long axis, then also the short one
    ar = np.where(np.abs(dr) == 2, dr // 2, 0)
    ac = np.where(np.abs(dc) == 2, dc // 2, 0)
    br = np.where(np.abs(dr) == 2, dr // 2, dr)
    bc = np.where(np.abs(dc) == 2, dc // 2, dc)
    ncols = np.int64(ncols)
    return (dr, dc, dr * ncols + dc, np.sqrt((dr * dr + dc * dc).astype(np.float64)),
            np.where(knight, ar * ncols + ac, 0), np.where(knight, br * ncols + bc, 0), knight)


@numba.njit(cache=True, nogil=True)
def _kernel(pace, elev, use_elev, dist, lab, nrows, ncols, cell_m, travel_sign, slope_limit,
            best_slope, decay, seed_order, hk, hi, pos, mdr, mdc, moff, mlen, ma, mb, mknight):
    """Dijkstra over the implicit move graph (8 or 16 neighbours, from the move table).

    ``dist`` holds the seed minutes on entry (inf = no seed) and the result on
    exit; ``lab`` the seed labels likewise.  The seeds are not put in the
    heap: ``seed_order`` lists them by increasing seed minutes and is merged
    with the heap, which so only ever holds the frontier of cells reached by
    a move.  ``pos`` is -1 (not in the heap), >= 0 (heap slot) or -2
    (settled).  ``travel_sign`` is +1 when the move u -> v is travelled
    u -> v (from-hub), -1 when travelled v -> u (to-hub).
    """
    n = nrows * ncols
    for i in range(n):
        pos[i] = -1
    size = 0
    ns = seed_order.shape[0]
    si = 0
    nm = mdr.shape[0]
    off_best = abs(best_slope)
    while size > 0 or si < ns:
        # the next cell to settle: the heap top or the next seed, whichever is cheaper
        if si < ns and (size == 0 or dist[seed_order[si]] <= hk[0]):
            u = seed_order[si]
            si += 1
            if pos[u] != -1:
                continue  # settled already, or reached by a move for less than its seed (it is in the heap)
            du = dist[u]
            pos[u] = -2
        else:
            u = hi[0]
            du = hk[0]
            pos[u] = -2
            size -= 1
            if size > 0:
                hk[0] = hk[size]
                hi[0] = hi[size]
                pos[hi[0]] = 0
                _sift_down(hk, hi, pos, 0, size)
        pu = pace[u]
        if not (pu < np.inf):
            continue  # seeded but impassable: keeps its cost, spreads nowhere
        ru = u // ncols
        cu = u - ru * ncols
        zu = elev[u] if use_elev else 0.0
        lu = lab[u]
        for k in range(nm):
            rv = ru + mdr[k]
            cv = cu + mdc[k]
            if rv < 0 or rv >= nrows or cv < 0 or cv >= ncols:
                continue
            v = u + moff[k]
            if pos[v] == -2:
                continue
            pv = pace[v]
            if not (pv < np.inf):
                continue
            step = cell_m * mlen[k]
            if mknight[k]:
                # a knight move lies a quarter in each of its end cells and the two cells it passes through
                pa = pace[u + ma[k]]
                pb = pace[u + mb[k]]
                if not (pa < np.inf and pb < np.inf):
                    continue
                cost = step * 0.25 * ((pu + pa) + (pb + pv))
            else:
                cost = step * 0.5 * (pu + pv)
            if use_elev:
                zv = elev[v]
                if zu == zu and zv == zv:  # both known (NaN != NaN)
                    s = travel_sign * (zv - zu) / step
                    if s > slope_limit:
                        s = slope_limit
                    elif s < -slope_limit:
                        s = -slope_limit
                    cost *= math.exp(decay * (abs(s - best_slope) - off_best))
            nd = du + cost
            if nd < dist[v]:
                dist[v] = nd
                lab[v] = lu
                p = pos[v]
                if p == -1:
                    hk[size] = nd
                    hi[size] = v
                    pos[v] = size
                    size += 1
                    _sift_up(hk, hi, pos, size - 1)
                else:
                    hk[p] = nd
                    _sift_up(hk, hi, pos, p)


# ------------------------------------------------------------------ validation
def _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation, direction, slope_limit, neighbours=16):
    flat = np.asarray(flat_kmh, dtype=np.float64)
    if flat.ndim != 2:
        raise OptionError(f"speed raster must be 2-D, got shape {flat.shape}")
    seeds = np.asarray(seed_minutes, dtype=np.float64)
    if seeds.shape != flat.shape:
        raise OptionError(f"seed raster has shape {seeds.shape}, speed raster {flat.shape}; they must match")
    if np.any(seeds < 0):
        raise OptionError("seed minutes must be zero or more (NaN or inf = not a seed)")
    if seed_label is None:
        labels = np.where(np.isfinite(seeds), 1, 0).astype(np.int64)
    else:
        labels = np.asarray(seed_label)
        if labels.shape != flat.shape:
            raise OptionError(f"seed label raster has shape {labels.shape}, speed raster {flat.shape}")
        labels = labels.astype(np.int64, copy=False)
    _check_common(cell_m, direction, slope_limit, neighbours)
    elevation = _check_elevation(elevation, flat.shape)
    return flat, seeds, labels, elevation


def _check_common(cell_m, direction, slope_limit, neighbours=16):
    if not (np.isfinite(cell_m) and cell_m > 0):
        raise OptionError(f"cell size {cell_m!r} m must be a positive number")
    if direction not in DIRECTIONS:
        raise OptionError(f"unknown direction '{direction}'; choose one of {', '.join(DIRECTIONS)}")
    if not (np.isfinite(slope_limit) and slope_limit > 0):
        raise OptionError(f"slope limit {slope_limit!r} must be a positive number (rise over run)")
    _check_neighbours(neighbours)


def _check_elevation(elevation, shape):
    if elevation is None:
        return None
    elevation = np.asarray(elevation, dtype=np.float64)
    if elevation.shape != shape:
        raise OptionError(f"elevation raster has shape {elevation.shape}, speed raster {shape}")
    return elevation


def _pace(flat: np.ndarray) -> np.ndarray:
    """Minutes per metre per cell (inf = impassable), flattened."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where((flat > 0) & np.isfinite(flat), 0.06 / flat, np.inf).ravel()


def accumulate(flat_kmh, seed_minutes, cell_m: float, seed_label=None, elevation=None,
               direction: str = "to-hub", slope_limit: float = SLOPE_LIMIT, neighbours: int = 16) -> Accumulated:
    """Least-cost minutes from every cell to the nearest seed (or back).

    Parameters
    ----------
    flat_kmh : ndarray of float, shape (rows, cols)
        Flat-ground speed per cell, km/h; 0 or NaN = impassable.
    seed_minutes : ndarray of float, shape (rows, cols)
        Cost already spent at each seed cell, minutes (e.g. the network trip
        from the entry point to the nearest hub); NaN or inf = not a seed.
        A seed's own cost is kept unless a move reaches the cell for less.
    cell_m : float
        Cell side, metres (square cells, projected CRS).
    seed_label : ndarray of int, shape (rows, cols), optional
        A label per seed (e.g. 1-based hub number), carried to every cell the
        seed reaches.  Default: 1 at every seed.
    elevation : ndarray of float, shape (rows, cols), optional
        Metres; NaN = unknown (moves touching it are costed as flat).
    direction : {"to-hub", "from-hub"}
        Which way the trip is travelled (see module notes).
    slope_limit : float, default :data:`~.friction.SLOPE_LIMIT`
        Slopes steeper than this (rise/run) are clipped to it.
    neighbours : {16, 8}
        Move set: 16 (axes, diagonals and knight moves; straight walking
        overstated by at most 2.75 %) or 8 (axes and diagonals; at most
        8.24 %).

    Returns
    -------
    Accumulated
        ``minutes`` (float64, NaN = unreachable) and ``label`` (int64, 0 = none).

    Raises
    ------
    OptionError
        Shapes differ, negative seeds, bad ``cell_m``/``direction``/``slope_limit``/``neighbours``.

    Notes
    -----
    Time O(N log N) for N cells; memory about 40 bytes per cell besides the
    inputs (result, labels, heap keys and items, heap positions).  The first
    call compiles the kernel (a few seconds) and caches it on disk.  The
    move rules (pieces, barriers, slope per move) are in the module notes.

    Examples
    --------
    >>> import numpy as np
    >>> seeds = np.full((1, 3), np.inf); seeds[0, 0] = 0.0
    >>> r = accumulate(np.full((1, 3), 6.0), seeds, cell_m=100.0)
    >>> r.minutes.round(6).tolist()   # 6 km/h = 1 min per 100 m
    [[0.0, 1.0, 2.0]]
    """
    flat, seeds, labels, elevation = _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation,
                                            direction, slope_limit, neighbours)
    nrows, ncols = flat.shape
    n = nrows * ncols
    pace = _pace(flat)
    dist = np.where(np.isfinite(seeds), seeds, np.inf).ravel()
    lab = np.where(np.isfinite(seeds), labels, 0).ravel().astype(np.int64, copy=False)
    idx = np.int32 if n < 2**31 - 1 else np.int64
    hk = np.empty(n, dtype=np.float64)
    hi = np.empty(n, dtype=idx)
    pos = np.empty(n, dtype=idx)
    use_elev = elevation is not None
    elev = elevation.ravel() if use_elev else np.zeros(1)
    sign = -1.0 if direction == "to-hub" else 1.0
    seeded = np.flatnonzero(np.isfinite(dist)).astype(idx)
    seed_order = seeded[np.argsort(dist[seeded], kind="stable")]
    _kernel(pace, elev, use_elev, dist, lab, nrows, ncols, float(cell_m), sign, float(slope_limit),
            TOBLER_BEST_SLOPE, TOBLER_DECAY, seed_order, hk, hi, pos, *_move_table(neighbours, ncols))
    del hk, hi, pos
    dist = dist.reshape(nrows, ncols)
    dist[np.isinf(dist)] = np.nan
    return Accumulated(dist, lab.reshape(nrows, ncols))

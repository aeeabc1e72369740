"""Least-cost accumulation over a grid from seeded cells (a cost-distance surface).

One engine, :func:`accumulate`, runs Dijkstra's algorithm on the grid's
8-neighbour graph without building it: the neighbours of a cell are found by
index arithmetic inside a numba kernel with an indexed binary heap
(decrease-key), so the result is the exact shortest-path cost of the
discretised problem.  :func:`accumulate_reference` is the slow, obvious
version (``heapq`` over a dict) the tests hold the kernel to.

Move cost (minutes) between neighbouring cells ``a`` and ``b`` whose centres
are ``d`` metres apart (``cell_m`` or ``cell_m * sqrt 2``)::

    d * (pace_a + pace_b) / 2 / slope_factor(slope)

where ``pace = 60 / (1000 * flat_kmh)`` minutes per metre is the cell's
flat-ground pace, the average of the two cells' paces charges each half of
the move at the pace of the cell it lies in (common practice; the same
convention as scikit-image's ``MCP_Geometric``), and ``slope_factor`` is
Tobler's speed ratio ``T(s)/T(0)`` (see :mod:`.friction`) for the slope
``s = (z_to - z_from) / d`` in the direction of travel, clipped to
``+-slope_limit``.  A move with a missing elevation at either end is costed
as flat.  Cells with speed 0 or NaN are impassable: nothing enters them; a
seeded impassable cell keeps its seed cost but spreads nowhere.

Direction.  Seeds are where the network is entered.  ``direction="to-hub"``
costs the trip from each cell *to* the network (the accumulation spreads
outward from the seeds, so a relaxation from a settled cell ``u`` to its
neighbour ``v`` is a move travelled from ``v`` to ``u``); ``"from-hub"``
costs the trip from the network out to each cell (travelled ``u`` to ``v``).
Without elevation both are the same.

References
----------
.. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
.. [2] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling. NCGIA Technical Report 93-1.
"""

from __future__ import annotations

import heapq
import math
from dataclasses import dataclass

import numba
import numpy as np

from ..errors import OptionError
from .friction import SLOPE_LIMIT, TOBLER_BEST_SLOPE, TOBLER_DECAY

__all__ = ["Accumulated", "accumulate", "accumulate_reference", "DIRECTIONS"]

#: Trip directions a surface can be costed for.
DIRECTIONS = ("to-hub", "from-hub")



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


@numba.njit(cache=True, nogil=True)
def _kernel(pace, elev, use_elev, dist, lab, nrows, ncols, cell_m, travel_sign, slope_limit,
            best_slope, decay, seed_order, hk, hi, pos):
    """Dijkstra over the implicit 8-neighbour grid.

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
    diag = cell_m * math.sqrt(2.0)
    dr = (-1, -1, -1, 0, 0, 1, 1, 1)
    dc = (-1, 0, 1, -1, 1, -1, 0, 1)
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
        for k in range(8):
            rv = ru + dr[k]
            cv = cu + dc[k]
            if rv < 0 or rv >= nrows or cv < 0 or cv >= ncols:
                continue
            v = rv * ncols + cv
            if pos[v] == -2:
                continue
            pv = pace[v]
            if not (pv < np.inf):
                continue
            step = cell_m if (dr[k] == 0 or dc[k] == 0) else diag
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
def _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation, direction, slope_limit):
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
        labels = labels.astype(np.int64)
    if not (np.isfinite(cell_m) and cell_m > 0):
        raise OptionError(f"cell size {cell_m!r} m must be a positive number")
    if direction not in DIRECTIONS:
        raise OptionError(f"unknown direction '{direction}'; choose one of {', '.join(DIRECTIONS)}")
    if not (np.isfinite(slope_limit) and slope_limit > 0):
        raise OptionError(f"slope limit {slope_limit!r} must be a positive number (rise over run)")
    if elevation is not None:
        elevation = np.asarray(elevation, dtype=np.float64)
        if elevation.shape != flat.shape:
            raise OptionError(f"elevation raster has shape {elevation.shape}, speed raster {flat.shape}")
    return flat, seeds, labels, elevation


def accumulate(flat_kmh, seed_minutes, cell_m: float, seed_label=None, elevation=None,
               direction: str = "to-hub", slope_limit: float = SLOPE_LIMIT) -> Accumulated:
    """Least-cost minutes from every cell to the nearest seed (or back).

    Parameters
    ----------
    flat_kmh : ndarray of float, shape (rows, cols)
        Flat-ground speed per cell, km/h; 0 or NaN = impassable.
    seed_minutes : ndarray of float, shape (rows, cols)
        Cost already spent at each seed cell, minutes (e.g. the network trip
        from the entry point to the nearest hub); NaN or inf = not a seed.
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

    Returns
    -------
    Accumulated
        ``minutes`` (float64, NaN = unreachable) and ``label`` (int64, 0 = none).

    Raises
    ------
    OptionError
        Shapes differ, negative seeds, bad ``cell_m``/``direction``/``slope_limit``.

    Notes
    -----
    Time O(N log N) for N cells; memory about 40 bytes per cell besides the
    inputs (result, labels, heap keys and items, heap positions).  The first
    call compiles the kernel (a few seconds) and caches it on disk.

    Examples
    --------
    >>> import numpy as np
    >>> seeds = np.full((1, 3), np.inf); seeds[0, 0] = 0.0
    >>> r = accumulate(np.full((1, 3), 6.0), seeds, cell_m=100.0)
    >>> r.minutes.round(6).tolist()   # 6 km/h = 1 min per 100 m
    [[0.0, 1.0, 2.0]]
    """
    flat, seeds, labels, elevation = _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation,
                                            direction, slope_limit)
    nrows, ncols = flat.shape
    n = nrows * ncols
    with np.errstate(divide="ignore", invalid="ignore"):
        pace = np.where((flat > 0) & np.isfinite(flat), 0.06 / flat, np.inf).ravel()
    dist = np.where(np.isfinite(seeds), seeds, np.inf).ravel()
    lab = np.where(np.isfinite(seeds), labels, 0).ravel().astype(np.int64)
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
            TOBLER_BEST_SLOPE, TOBLER_DECAY, seed_order, hk, hi, pos)
    del hk, hi, pos
    dist = dist.reshape(nrows, ncols)
    dist[np.isinf(dist)] = np.nan
    return Accumulated(dist, lab.reshape(nrows, ncols))


def accumulate_reference(flat_kmh, seed_minutes, cell_m: float, seed_label=None, elevation=None,
                         direction: str = "to-hub", slope_limit: float = SLOPE_LIMIT) -> Accumulated:
    """The slow, obvious version of :func:`accumulate` (same parameters and result).

    Plain Python: a dict of settled costs and :mod:`heapq` with lazy
    deletion.  For tests on small grids only.
    """
    flat, seeds, labels, elevation = _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation,
                                            direction, slope_limit)
    rows, cols = flat.shape

    def passable(r, c):
        s = flat[r, c]
        return math.isfinite(s) and s > 0

    def move_minutes(a, b):
        """Minutes to travel between neighbours a and b, in the trip's direction."""
        (ra, ca), (rb, cb) = a, b
        d = cell_m * math.hypot(ra - rb, ca - cb)
        pace_a = 60.0 / (1000.0 * flat[ra, ca])  # minutes per metre
        pace_b = 60.0 / (1000.0 * flat[rb, cb])
        minutes = d * (pace_a + pace_b) / 2.0
        if elevation is not None:
            za, zb = elevation[ra, ca], elevation[rb, cb]
            if math.isfinite(za) and math.isfinite(zb):
                # The search goes a -> b; the traveller goes b -> a on the trip to the hub.
                rise = (zb - za) if direction == "from-hub" else (za - zb)
                slope = max(-slope_limit, min(slope_limit, rise / d))
                tobler = 6.0 * math.exp(-3.5 * abs(slope + 0.05))
                tobler_flat = 6.0 * math.exp(-3.5 * 0.05)
                minutes = minutes * tobler_flat / tobler
        return minutes

    best = {}
    label = {}
    heap = []
    counter = 0
    for r in range(rows):
        for c in range(cols):
            if math.isfinite(seeds[r, c]):
                heapq.heappush(heap, (float(seeds[r, c]), counter, (r, c), int(labels[r, c])))
                counter += 1
    while heap:
        cost, _, cell, lab = heapq.heappop(heap)
        if cell in best:
            continue
        best[cell] = cost
        label[cell] = lab
        r, c = cell
        if not passable(r, c):
            continue
        for dr in (-1, 0, 1):
            for dc in (-1, 0, 1):
                nb = (r + dr, c + dc)
                if (dr, dc) == (0, 0) or not (0 <= nb[0] < rows and 0 <= nb[1] < cols):
                    continue
                if nb in best or not passable(*nb):
                    continue
                heapq.heappush(heap, (cost + move_minutes(cell, nb), counter, nb, lab))
                counter += 1
    minutes = np.full((rows, cols), np.nan)
    out_label = np.zeros((rows, cols), dtype=np.int64)
    for (r, c), v in best.items():
        minutes[r, c] = v
        out_label[r, c] = label[(r, c)]
    return Accumulated(minutes, out_label)

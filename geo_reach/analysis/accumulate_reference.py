"""The slow, obvious version of the grid kernel (:func:`geo_reach.analysis.accumulate.accumulate`), for tests.

Plain Python: a dict of settled costs and :mod:`heapq` with lazy deletion;
the moves and the cells each crosses are worked out from their geometry
rather than tabulated.
"""

from __future__ import annotations

import heapq
import math

import numpy as np

from .accumulate import Accumulated, _check
from .friction import SLOPE_LIMIT

__all__ = ["accumulate_reference"]


def _reference_moves(neighbours: int):
    """Moves written from their definition: every primitive lattice step (coprime offsets) of
    Chebyshev length 1 (8 neighbours) or up to 2 (16: adds the knight moves)."""
    reach = 1 if neighbours == 8 else 2
    return [(dr, dc) for dr in range(-reach, reach + 1) for dc in range(-reach, reach + 1)
            if (dr, dc) != (0, 0) and math.gcd(abs(dr), abs(dc)) == 1]


def _reference_pieces(dr: int, dc: int):
    """Cells the straight move from the centre of (0, 0) to the centre of (dr, dc) crosses, as
    (row offset, column offset, share of the move's length), from the crossings of cell edges."""
    from fractions import Fraction

    ts = {Fraction(0), Fraction(1)}
    for d in (dr, dc):
        if d:
            for k in range(-3, 3):      # cell edges lie half-way between centres
                t = Fraction(2 * k + 1, 2 * d)
                if 0 < t < 1:
                    ts.add(t)
    ts = sorted(ts)
    out = []
    for t0, t1 in zip(ts[:-1], ts[1:]):
        tm = (t0 + t1) / 2
        out.append((round(dr * tm), round(dc * tm), float(t1 - t0)))
    return out


def accumulate_reference(flat_kmh, seed_minutes, cell_m: float, seed_label=None, elevation=None,
                         direction: str = "to-hub", slope_limit: float = SLOPE_LIMIT,
                         neighbours: int = 16) -> Accumulated:
    """The slow, obvious version of :func:`accumulate` (same parameters and result).

    Plain Python: a dict of settled costs and :mod:`heapq` with lazy
    deletion; the moves and the cells each crosses are worked out from their
    geometry rather than tabulated.  For tests on small grids only.
    """
    flat, seeds, labels, elevation = _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation,
                                            direction, slope_limit, neighbours)
    rows, cols = flat.shape
    move_list = [(dr, dc, _reference_pieces(dr, dc)) for dr, dc in _reference_moves(neighbours)]

    def passable(r, c):
        s = flat[r, c]
        return math.isfinite(s) and s > 0

    def move_minutes(a, b, pieces):
        """Minutes to travel between a and b, in the trip's direction; None if a piece is impassable."""
        (ra, ca), (rb, cb) = a, b
        d = cell_m * math.hypot(ra - rb, ca - cb)
        minutes = 0.0
        for pr, pc, share in pieces:
            r, c = ra + pr, ca + pc
            if not passable(r, c):
                return None
            minutes += share * d * 60.0 / (1000.0 * flat[r, c])  # minutes per metre times metres
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
        for dr, dc, pieces in move_list:
            nb = (r + dr, c + dc)
            if not (0 <= nb[0] < rows and 0 <= nb[1] < cols) or nb in best:
                continue
            m = move_minutes(cell, nb, pieces)
            if m is None:
                continue
            heapq.heappush(heap, (cost + m, counter, nb, lab))
            counter += 1
    minutes = np.full((rows, cols), np.nan)
    out_label = np.zeros((rows, cols), dtype=np.int64)
    for (r, c), v in best.items():
        minutes[r, c] = v
        out_label[r, c] = label[(r, c)]
    return Accumulated(minutes, out_label)

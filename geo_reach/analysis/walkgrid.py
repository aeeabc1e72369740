"""Walking between an exact position and the places around it, across a friction grid.

The walk model of :class:`~geo_reach.analysis.travel.TravelModel` when
friction inputs (terrain, land cover, barriers) are given.  A walk from a
point ``p`` to a target ``t`` (an entry on the network, or another point):

1. *start*: from ``p``'s exact position straight to the centres of its own
   cell and the eight around it;
2. *across*: from those centres over the grid, by the kernel the
   travel-time surface uses (:func:`~geo_reach.analysis.accumulate.accumulate`),
   in a window of ``max_access_m`` around ``p``;
3. *end*: from the centre of ``t``'s cell or one of the eight around it
   straight to ``t``'s exact position.

A target in the same block of nine cells as ``p`` may also be walked to
straight.  A straight piece (start, end or direct) of ``d`` metres from
``a`` to ``b`` costs, in minutes::

    d * (pace_a + pace_b) / 2 / slope_factor((z_b - z_a) / d)

the kernel's own move rule (each half at the pace of the cell it lies in,
Tobler's slope factor in the direction of travel, slopes clipped to
``slope_limit``), where a position's pace is its cell's
(``0.06 / flat_kmh`` minutes per metre) - or the walking speed's when its
cell is impassable (a village by a river whose cell the river touches still
walks out of it) - and its elevation is its cell's.  A straight piece that
crosses a barrier polygon is not walked unless one of its ends lies inside the
polygon (a hub on a bridge still reaches the bridge), so a river is never
walked across even inside one cell.  On the grid, impassable cells (barriers
touch them, or land cover with speed 0) are never entered.

For the ``length_m`` weight the walk is the shortest passable walk (the
same search with every passable cell at one pace, no slope): its cost is its
length.  For free weights (``hops``, ``latency_ms``) the walk costs nothing
but must still be passable; its length chooses the nearest entries.

The walked length of a minutes walk is measured along the search's tree
(each cell's predecessor: the neighbour of the eight from which the move rule
gives the least cost, back to a start cell).

The walk stays on the grid and within the window: a point outside the grid
cannot walk, and a detour reaching farther than ``max_access_m`` (plus two
cells) from the point is not found.

References
----------
.. [1] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling. NCGIA Technical Report 93-1.
.. [2] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import OptionError
from ..network.weights import Weight, as_weight
from .accumulate import accumulate, moves
from .attach import ROLES, Priced
from .friction import SLOPE_LIMIT, flat_speed_kmh, rasterise_barriers, slope_factor

__all__ = ["WalkGrid", "GridWalk"]

#: The start and end neighbourhood: a cell and the eight around it.
_BLOCK = tuple((dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1))
_EIGHT = tuple(o for o in _BLOCK if o != (0, 0))


@dataclass(frozen=True, eq=False)
class WalkGrid:
    """The friction grid a walk crosses.

    Attributes
    ----------
    grid : Grid
    kmh : ndarray of float64, shape ``grid.shape``
        Flat-ground walking speed per cell, km/h; 0 = impassable.
    walk_kmh : float
        Walking speed on flat open ground, km/h (the pace of a position whose
        own cell is impassable).
    elevation : ndarray of float64 or None
        Metres, NaN = unknown.
    barriers : shapely geometry or None
        The barrier polygons (one geometry, prepared) in the grid's CRS.
    near_barrier : ndarray of bool or None
        Cells a barrier touches, and the eight around each.
    slope_limit : float
        Slopes steeper than this (rise/run) are clipped.
    neighbours : int or None
        The kernel's move set, passed to :func:`accumulate` when given
        (``None``: the kernel's default, as the surface uses).
    """

    grid: object
    kmh: np.ndarray
    walk_kmh: float
    elevation: np.ndarray | None = None
    barriers: object = None
    near_barrier: np.ndarray | None = None
    slope_limit: float = SLOPE_LIMIT
    neighbours: int | None = None

    @classmethod
    def build(cls, grid, walk_kmh: float = 5.0, *, terrain=None, landcover=None, landcover_speeds=None,
              barriers=None, barrier_classes=(), slope_limit: float = SLOPE_LIMIT,
              landcover_source: str = "land cover", neighbours: int | None = None) -> "WalkGrid":
        """The friction grid from the same inputs as the travel-time surface.

        Parameters
        ----------
        grid : Grid
        walk_kmh : float
            Walking speed on flat open ground, km/h.
        terrain : ndarray, optional
            Elevation on ``grid``, metres (NaN = unknown).
        landcover : ndarray of int, optional
            Class per cell on ``grid`` (-1 = no data, walked at ``walk_kmh``).
        landcover_speeds : mapping of int to float, optional
            Flat-ground speed per class, km/h (0 = impassable).
        barriers : GeoDataFrame or iterable of geometries, optional
            Impassable polygons (or lines).
        barrier_classes : iterable of int
            Land-cover classes that are impassable.

        Raises
        ------
        OptionError, InputError
            As :func:`~geo_reach.analysis.friction.flat_speed_kmh`.
        """
        import shapely

        for name, arr in (("terrain", terrain), ("landcover", landcover)):
            if arr is not None and np.shape(arr) != grid.shape:
                raise OptionError(f"{name} raster has shape {np.shape(arr)}, grid is {grid.shape}; "
                                  "resample it onto the grid first")
        fr = flat_speed_kmh(grid, walk_kmh, landcover=landcover, landcover_speeds=landcover_speeds,
                            barriers=barriers, barrier_classes=barrier_classes, landcover_source=landcover_source)
        geom = near = None
        if barriers is not None:
            geoms = _geometries(barriers, grid.crs)
            if geoms:
                geom = shapely.union_all(geoms)
                shapely.prepare(geom)
                touched = rasterise_barriers(grid, geoms)
                near = _dilate(touched)
        elev = None if terrain is None else np.asarray(terrain, np.float64)
        return cls(grid, fr.kmh, float(walk_kmh), elev, geom, near, float(slope_limit), neighbours)

    def describe(self) -> str:
        """One line for notes: what the walk crosses."""
        parts = [f"a {self.grid.cell_m:g} m friction grid"]
        if self.elevation is not None:
            parts.append("terrain (Tobler)")
        if self.barriers is not None:
            parts.append("barriers")
        if np.any((self.kmh != self.walk_kmh) & (self.kmh > 0)):
            parts.append("land cover")
        return ", ".join(parts)


def _geometries(obj, crs) -> list:
    if hasattr(obj, "to_crs"):
        if getattr(obj, "crs", None) is not None and crs is not None and not obj.crs.equals(crs):
            obj = obj.to_crs(crs)
        obj = obj.geometry.values if hasattr(obj, "geometry") else obj.values
    return [g for g in obj if g is not None and not g.is_empty]


def _dilate(mask: np.ndarray) -> np.ndarray:
    """``mask`` grown by one cell in the eight directions."""
    out = mask.copy()
    h, w = mask.shape
    pad = np.pad(mask, 1)
    for dr, dc in _EIGHT:
        out |= pad[1 + dr:1 + dr + h, 1 + dc:1 + dc + w]
    return out


@dataclass
class _Field:
    """One search from a point: costs and walked lengths over its window."""

    r0: int
    c0: int
    dist: np.ndarray     # cost to each window cell's centre (inf = not reached)
    length: np.ndarray   # walked length to it, metres
    row: int
    col: int
    pace: float          # the point's own pace
    z: float             # the point's elevation (NaN = unknown)


class GridWalk:
    """A walk pricer on a :class:`WalkGrid` (see the module notes); used by attach and direct walks.

    Parameters
    ----------
    walk_grid : WalkGrid
    weight : Weight
        ``minutes`` prices time; ``length_m`` the shortest passable walk's
        length; free weights 0 where the walk is passable.
    walk_kmh : float
        Walking speed on flat open ground, km/h.
    max_access_m : float
        The window's half side, metres.
    """

    on_grid = True

    def __init__(self, walk_grid: WalkGrid, weight: Weight, walk_kmh: float, max_access_m: float):
        self.wg = walk_grid
        self.weight = as_weight(weight)
        self.walk_kmh = float(walk_kmh)
        self.max_access_m = float(max_access_m)
        g = walk_grid.grid
        self.cell = float(g.cell_m)
        self.sample_spacing_m = self.cell / 2.0
        self.time = self.weight.walk == "time"
        passable = (walk_grid.kmh > 0) & np.isfinite(walk_grid.kmh)
        if not math.isclose(self.walk_kmh, walk_grid.walk_kmh, rel_tol=1e-12):
            raise OptionError(f"the friction grid was made for walking at {walk_grid.walk_kmh:g} km/h, not "
                              f"{self.walk_kmh:g}; make it again for this speed", key="walk_kmh")
        if self.time:
            kmh = walk_grid.kmh
            with np.errstate(divide="ignore", invalid="ignore"):
                self.pace = np.where(passable, 0.06 / kmh, np.inf)
            self.speed = np.where(passable, kmh, 0.0)
            self.open_pace = 0.06 / self.walk_kmh
            self.elev = walk_grid.elevation
        else:   # one metre costs one "minute": the search's minutes are metres
            self.pace = np.where(passable, 1.0, np.inf)
            self.speed = np.where(passable, 0.06, 0.0)
            self.open_pace = 1.0
            self.elev = None
        self.k = int(math.ceil(self.max_access_m / self.cell)) + 2

    # ------------------------------------------------------------------ pricing
    def price(self, xy, leg_point, target_xy, roles=ROLES, reach=None) -> Priced:
        """Cost and walked length of walking between ``xy[leg_point]`` and ``target_xy`` (row by row).

        See :meth:`~geo_reach.analysis.attach.StraightWalk.price`; ``inf``
        where the walk cannot be made (a barrier, off the grid, beyond the
        window).  ``reach`` (per point, metres) widens a point's window beyond
        ``max_access_m``.
        """
        xy = np.asarray(xy, np.float64).reshape(-1, 2)
        leg_point = np.asarray(leg_point, np.int64)
        t = np.asarray(target_xy, np.float64).reshape(-1, 2)
        roles = tuple(roles)
        n = len(leg_point)
        out = {r: np.full(n, np.nan) for r in ROLES}
        for r in roles:
            out[r][:] = np.inf
        walk_m = np.full(n, np.inf)
        symmetric = self.elev is None
        order = np.argsort(leg_point, kind="stable")
        bounds = np.flatnonzero(np.r_[True, leg_point[order][1:] != leg_point[order][:-1], True]) if n else []
        for a, b in zip(bounds[:-1], bounds[1:]):
            idx = order[a:b]
            i = int(leg_point[idx[0]])
            todo = roles[:1] if symmetric else roles
            k = self.k if reach is None else max(self.k, int(math.ceil(float(reach[i]) / self.cell)) + 2)
            for r in todo:
                f = self._search(xy[i], r, k)
                if f is None:
                    continue
                c, w = self._reach(f, xy[i], t[idx], r)
                if symmetric:
                    for rr in roles:
                        out[rr][idx] = c
                else:
                    out[r][idx] = c
                if r == todo[0]:
                    walk_m[idx] = w
        if self.weight.walk == "free":
            for r in roles:
                out[r] = np.where(np.isfinite(out[r]), 0.0, np.inf)
        return Priced(out["leave"], out["arrive"], walk_m)

    # ------------------------------------------------------------------ pieces
    def _local(self, rows, cols):
        """Pace and elevation of positions in cells ``rows, cols`` (open pace where the cell is impassable)."""
        pace = self.pace[rows, cols]
        pace = np.where(np.isfinite(pace), pace, self.open_pace)
        z = self.elev[rows, cols] if self.elev is not None else np.full(np.shape(rows), np.nan)
        return pace, z

    def _piece(self, ax, ay, az, apace, bx, by, bz, bpace):
        """Cost of the straight piece a -> b (see the module notes)."""
        d = np.hypot(np.asarray(bx) - ax, np.asarray(by) - ay)
        if not self.time:
            return d
        c = d * 0.5 * (apace + bpace)
        if self.elev is not None:
            with np.errstate(divide="ignore", invalid="ignore"):
                s = (np.asarray(bz) - az) / d
            s = np.clip(s, -self.wg.slope_limit, self.wg.slope_limit)
            c = np.where(np.isfinite(s), c / slope_factor(np.nan_to_num(s)), c)
        return c

    def _blocked(self, ax, ay, bx, by, check) -> np.ndarray:
        """Pieces a -> b crossing a barrier polygon with neither end inside it."""
        import shapely

        ax, ay, bx, by = (np.broadcast_to(np.asarray(v, np.float64), np.shape(check)) for v in (ax, ay, bx, by))
        out = np.zeros(np.shape(check), bool)
        geom = self.wg.barriers
        if geom is None:
            return out
        sel = np.asarray(check, bool) & ((ax != bx) | (ay != by))
        if not sel.any():
            return out
        lines = shapely.linestrings(np.stack([np.column_stack([ax[sel], ay[sel]]),
                                              np.column_stack([bx[sel], by[sel]])], axis=1))
        cross = shapely.intersects(lines, geom) & ~shapely.touches(lines, geom)   # the interiors meet
        inside = shapely.contains_xy(geom, ax[sel], ay[sel]) | shapely.contains_xy(geom, bx[sel], by[sel])
        out[sel] = cross & ~inside
        return out

    def _near_barrier(self, rows, cols) -> np.ndarray:
        nb = self.wg.near_barrier
        if nb is None:
            return np.zeros(np.shape(rows), bool)
        ok = rows >= 0
        out = np.zeros(np.shape(rows), bool)
        out[ok] = nb[rows[ok], cols[ok]]
        return out

    # ------------------------------------------------------------------ search
    def _search(self, p, role: str, k: int) -> _Field | None:
        """The grid search from ``p``'s exact position (``leave``: outward; ``arrive``: towards ``p``) in a
        window of ``k`` cells each way."""
        g = self.wg.grid
        r, c = (int(v[0]) for v in g.index(np.array([p[0]]), np.array([p[1]])))
        if r < 0:
            return None
        r0, r1 = max(0, r - k), min(g.height, r + k + 1)
        c0, c1 = max(0, c - k), min(g.width, c + k + 1)
        speed = self.speed[r0:r1, c0:c1]
        pace_p, z_p = self._local(np.array([r]), np.array([c]))
        pace_p, z_p = float(pace_p[0]), float(z_p[0])
        seeds = np.full(speed.shape, np.inf)
        rr = np.array([r + dr for dr, _ in _BLOCK])
        cc = np.array([c + dc for _, dc in _BLOCK])
        ok = (rr >= r0) & (rr < r1) & (cc >= c0) & (cc < c1)
        rr, cc = rr[ok], cc[ok]
        cx, cy = g.cell_centres(rows=rr, cols=cc)
        pace_c = self.pace[rr, cc]
        z_c = self.elev[rr, cc] if self.elev is not None else np.full(len(rr), np.nan)
        if role == "leave":
            cost = self._piece(p[0], p[1], z_p, pace_p, cx, cy, z_c, pace_c)
        else:
            cost = self._piece(cx, cy, z_c, pace_c, p[0], p[1], z_p, pace_p)
        near = np.full(len(rr), bool(self.wg.near_barrier[r, c]) if self.wg.near_barrier is not None else False)
        good = np.isfinite(pace_c) & ~self._blocked(p[0], p[1], cx, cy, near)
        seeds[rr[good] - r0, cc[good] - c0] = cost[good]
        kw = {} if self.wg.neighbours is None else {"neighbours": self.wg.neighbours}
        elev = self.elev[r0:r1, c0:c1] if self.elev is not None else None
        acc = accumulate(speed, seeds, self.cell, elevation=elev,
                         direction="from-hub" if role == "leave" else "to-hub",
                         slope_limit=self.wg.slope_limit, **kw)
        dist = np.where(np.isnan(acc.minutes), np.inf, acc.minutes)
        length = self._tree_lengths(dist, seeds, r0, c0, p, role) if self.time else dist
        return _Field(r0, c0, dist, length, r, c, pace_p, z_p)

    def _tree_lengths(self, dist, seeds, r0, c0, p, role) -> np.ndarray:
        """Walked length to every reached cell along the search's tree (metres).

        Each cell's predecessor is the neighbour (of the kernel's move set)
        from which the kernel's move rule gives the least cost; a start cell that kept its
        start cost is reached straight from ``p``.  Lengths are summed by
        pointer jumping.
        """
        h, w = dist.shape
        r1, c1 = r0 + h, c0 + w
        mv = moves(self.wg.neighbours or 16)
        pace = np.pad(self.pace[r0:r1, c0:c1], 2, constant_values=np.inf)
        elev = None if self.elev is None else np.pad(self.elev[r0:r1, c0:c1], 2, constant_values=np.nan)
        pad = np.pad(dist, 2, constant_values=np.inf)
        here = (slice(2, 2 + h), slice(2, 2 + w))
        here_p = pace[here]

        def at(dr, dc):
            return (slice(2 + dr, 2 + dr + h), slice(2 + dc, 2 + dc + w))

        best = np.full(dist.shape, np.inf)
        arg = np.full(dist.shape, -1, np.int64)
        for k, (dr, dc) in enumerate(mv):   # the predecessor u = v + (dr, dc); the kernel's move u -> v
            d = self.cell * math.hypot(dr, dc)
            if abs(dr) + abs(dc) == 3:
                # a knight move lies a quarter in each end cell and in the two cells it passes through
                # (one step along the long axis from u, then also the short one), as the kernel costs it
                mr, mc = -dr, -dc   # the move from u to v
                ar, ac = (mr // 2 if abs(mr) == 2 else 0), (mc // 2 if abs(mc) == 2 else 0)
                br, bc = (mr // 2 if abs(mr) == 2 else mr), (mc // 2 if abs(mc) == 2 else mc)
                pa, pb = pace[at(dr + ar, dc + ac)], pace[at(dr + br, dc + bc)]
                move = d * 0.25 * (pace[at(dr, dc)] + pa + pb + here_p)
                move = np.where(np.isfinite(pa) & np.isfinite(pb), move, np.inf)
            else:
                move = d * 0.5 * (pace[at(dr, dc)] + here_p)
            if elev is not None:   # the move u -> v is travelled u -> v outward, v -> u towards the point
                rise = elev[here] - elev[at(dr, dc)]
                s = np.clip((rise if role == "leave" else -rise) / d, -self.wg.slope_limit, self.wg.slope_limit)
                move = np.where(np.isfinite(s), move / slope_factor(np.nan_to_num(s)), move)
            cand = pad[at(dr, dc)] + move
            better = cand < best
            best = np.where(better, cand, best)
            arg[better] = k
        drs = np.array([o[0] for o in mv] + [0])
        dcs = np.array([o[1] for o in mv] + [0])
        steps = self.cell * np.hypot(drs, dcs)
        reached = np.isfinite(dist)
        arg[(np.isfinite(seeds) & (dist >= seeds)) | ~reached] = -1   # start cells reached straight from p
        idx = np.arange(h * w).reshape(h, w)
        up = np.where(arg >= 0, idx + drs[arg] * w + dcs[arg], -1).ravel()
        rows, cols = np.divmod(np.arange(h * w), w)
        cx, cy = self.wg.grid.cell_centres(rows=rows + r0, cols=cols + c0)
        val = np.where(arg.ravel() >= 0, steps[arg.ravel()], np.hypot(cx - p[0], cy - p[1]))
        val = np.where(reached.ravel(), val, np.inf)
        while True:
            live = up >= 0
            if not live.any():
                break
            safe = np.where(live, up, 0)
            val = np.where(live, val + val[safe], val)
            up = np.where(live, up[safe], -1)
        return val.reshape(h, w)

    def _reach(self, f: _Field, p, t, role: str):
        """Cost and walked length from the search ``f`` to each target position ``t`` (shape (k, 2))."""
        g = self.wg.grid
        h, w = f.dist.shape
        rt, ct = g.index(t[:, 0], t[:, 1])
        inside = rt >= 0
        pace_t, z_t = self._local(np.where(inside, rt, 0), np.where(inside, ct, 0))
        near_t = self._near_barrier(rt, ct)
        best = np.full(len(t), np.inf)
        best_w = np.full(len(t), np.inf)
        for dr, dc in _BLOCK:
            rj, cj = rt + dr, ct + dc
            win = inside & (rj >= f.r0) & (rj < f.r0 + h) & (cj >= f.c0) & (cj < f.c0 + w)
            if not win.any():
                continue
            wr, wc = np.where(win, rj - f.r0, 0), np.where(win, cj - f.c0, 0)
            d = np.where(win, f.dist[wr, wc], np.inf)
            live = np.isfinite(d)
            if not live.any():
                continue
            gr, gc = np.where(live, rj, 0), np.where(live, cj, 0)
            cx, cy = g.cell_centres(rows=gr, cols=gc)
            pace_j = np.where(live, self.pace[gr, gc], 1.0)
            z_j = self.elev[gr, gc] if self.elev is not None else np.full(len(t), np.nan)
            if role == "leave":
                piece = self._piece(cx, cy, z_j, pace_j, t[:, 0], t[:, 1], z_t, pace_t)
            else:
                piece = self._piece(t[:, 0], t[:, 1], z_t, pace_t, cx, cy, z_j, pace_j)
            blocked = self._blocked(cx, cy, t[:, 0], t[:, 1], live & near_t)
            tot = np.where(live & ~blocked, d + piece, np.inf)
            better = tot < best
            best = np.where(better, tot, best)
            walked = f.length[wr, wc] + np.hypot(cx - t[:, 0], cy - t[:, 1])
            best_w = np.where(better, walked, best_w)
        # straight to a target within the point's own block of nine cells
        same = inside & (np.abs(rt - f.row) <= 1) & (np.abs(ct - f.col) <= 1)
        if same.any():
            if role == "leave":
                piece = self._piece(p[0], p[1], f.z, f.pace, t[:, 0], t[:, 1], z_t, pace_t)
            else:
                piece = self._piece(t[:, 0], t[:, 1], z_t, pace_t, p[0], p[1], f.z, f.pace)
            near_p = np.full(len(t), bool(self.wg.near_barrier[f.row, f.col])
                             if self.wg.near_barrier is not None else False)
            blocked = self._blocked(p[0], p[1], t[:, 0], t[:, 1], same & near_p)
            tot = np.where(same & ~blocked, piece, np.inf)
            better = tot < best
            best = np.where(better, tot, best)
            best_w = np.where(better, np.hypot(t[:, 0] - p[0], t[:, 1] - p[1]), best_w)
        return best, np.where(np.isfinite(best), best_w, np.inf)

"""The segment table the topology steps share: every input line as rows of vertices.

All lines of all layers sit in one coordinate array, line after line, so
each topology step is a handful of numpy operations over the whole table
rather than a Python loop per feature.  A *segment* is a pair of
consecutive rows of one line; a *line end* is the first or last row of a
line (ends are numbered ``0 .. nlines-1`` for starts, then
``nlines .. 2*nlines-1`` for finishes).  The steps record what they decide
in the table (rows that are nodes, new vertices, deleted rows, moved ends),
and :mod:`~geo_reach.network.assembly` cuts the lines into edges from it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike
import shapely
from scipy.sparse import coo_array
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

__all__ = ["NOISE_M", "LineTable", "NewVertices", "union_find_labels", "metres"]

#: Offsets below this many metres are numeric noise (reprojection) and are joined silently.
NOISE_M = 1e-3


def metres(d: float) -> str:
    """A distance for a message: centimetres shown from 1 cm up, millimetres below.

    >>> metres(0.6), metres(0.0015)
    ('0.60 m', '1.5 mm')
    """
    return f"{d:.2f} m" if d >= 0.005 else f"{d * 1000:.1f} mm"


def union_find_labels(n: int, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    """Cluster label of each of ``n`` items linked by the pairs ``(i[k], j[k])`` (single linkage).

    Parameters
    ----------
    n : int
        Number of items.
    i, j : ndarray of int
        Linked pairs.

    Returns
    -------
    ndarray of int, shape (n,)
        Equal labels for items joined by a chain of pairs.

    Notes
    -----
    The connected components of the undirected graph of the pairs, which is
    what a union-find (disjoint-set) pass over the pairs computes; scipy's
    ``connected_components`` does it in compiled code.

    References
    ----------
    .. [1] Tarjan, R. E. (1975). Efficiency of a good but not linear set
       union algorithm. Journal of the ACM 22(2), 215-225.

    Examples
    --------
    >>> union_find_labels(5, np.array([0, 3]), np.array([1, 4])).tolist()
    [0, 0, 1, 2, 2]
    """
    if len(i) == 0:
        return np.arange(n)
    g = coo_array((np.ones(len(i), dtype=np.int8), (i, j)), shape=(n, n)).tocsr()
    _, lab = connected_components(g, directed=False)
    return lab


@dataclass
class NewVertices:
    """Vertices to insert into lines: line, position (vertex index as a float), x, y.

    A position ``p`` lies on the segment from row ``first[line] + floor(p)``
    to the next row, at fraction ``p - floor(p)`` along it.
    """

    line: list[np.ndarray] = field(default_factory=list)
    pos: list[np.ndarray] = field(default_factory=list)
    x: list[np.ndarray] = field(default_factory=list)
    y: list[np.ndarray] = field(default_factory=list)

    def add(self, line: ArrayLike, pos: ArrayLike, x: ArrayLike, y: ArrayLike) -> None:
        """Append vertices (array-likes of equal length)."""
        self.line.append(np.asarray(line, np.int64))
        self.pos.append(np.asarray(pos, float))
        self.x.append(np.asarray(x, float))
        self.y.append(np.asarray(y, float))

    def __len__(self) -> int:
        return int(sum(len(a) for a in self.line))

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """All vertices so far as four flat arrays, in the order they were added."""
        if not self.line:
            z = np.zeros(0)
            return np.zeros(0, np.int64), z, z.copy(), z.copy()
        return (np.concatenate(self.line), np.concatenate(self.pos), np.concatenate(self.x),
                np.concatenate(self.y))

    def head(self, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """The first ``k`` vertices added (line, pos, x, y)."""
        line, pos, x, y = self.arrays()
        return line[:k], pos[:k], x[:k], y[:k]

    def keep(self, keep: np.ndarray) -> None:
        """Keep only the vertices where ``keep`` holds (a mask over all vertices added so far)."""
        line, pos, x, y = self.arrays()
        self.line, self.pos, self.x, self.y = [line[keep]], [pos[keep]], [x[keep]], [y[keep]]


@dataclass
class LineTable:
    """Exploded, cleaned lines of every layer as one table of vertex rows, and what the steps decide.

    Attributes
    ----------
    xy : ndarray of float64, shape (nv, 2)
        Vertex coordinates in the working CRS (metres); rows of one line are
        consecutive.  Line ends are moved in place when they are joined.
    vline : ndarray of int64, shape (nv,)
        The line of each row.
    first, last : ndarray of int64, shape (nlines,)
        First and last row of each line.
    mode, level : ndarray, shape (nlines,)
        Per line: index into :data:`~geo_reach.network.costs.MODES` (lines of
        different modes never meet) and vertical level.
    label, fid : ndarray, shape (nlines,)
        Source layer label and feature id of each line (for issue points).
    seg : ndarray of int64, shape (nseg,)
        Segment ``k`` runs from row ``seg[k]`` to row ``seg[k] + 1``.
    node_row : ndarray of bool, shape (nv,)
        Rows that are nodes (line ends from the start).
    deleted : ndarray of bool, shape (nv,)
        Rows cut away with a trimmed overshoot.
    trim_start, trim_end : ndarray of float64, shape (nlines,)
        Position (vertex index as a float) a line was trimmed back to at
        its start or end; NaN where it was not.
    end_free : ndarray of bool, shape (2 * nlines,)
        Ends still free to be joined (not trimmed).
    new : NewVertices
        Vertices to insert (crossings, T-junctions, stations).
    n_crossing_events : int
        How many of ``new`` come from crossings (they were added first).
    cross_row, cross_partner_row : ndarray of int64, shape (n_crossing_events,)
        For each crossing vertex: the first row of its segment and of the
        segment it crosses (-1 for the ends of collinear overlaps).
    trimmed_nodes : list of ndarray
        Where overshoots were cut back (already reported there).
    """

    xy: np.ndarray
    vline: np.ndarray
    first: np.ndarray
    last: np.ndarray
    mode: np.ndarray
    level: np.ndarray
    label: np.ndarray
    fid: np.ndarray
    seg: np.ndarray
    node_row: np.ndarray
    deleted: np.ndarray
    trim_start: np.ndarray
    trim_end: np.ndarray
    end_free: np.ndarray
    new: NewVertices = field(default_factory=NewVertices)
    n_crossing_events: int = 0
    cross_row: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    cross_partner_row: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    trimmed_nodes: list = field(default_factory=list)
    _places: tuple | None = field(default=None, repr=False)

    @classmethod
    def from_lines(cls, lines: pd.DataFrame, labels: list[str]) -> "LineTable":
        """The table of the lines in ``lines`` (columns ``geom``, ``mode``, ``level``, ``layer``, ``fid``).

        ``labels`` are the layer labels ``lines['layer']`` indexes into.
        """
        geoms = lines["geom"].to_numpy()
        xy, vline = shapely.get_coordinates(geoms, return_index=True)
        ncoord = shapely.get_num_coordinates(geoms)
        first = np.concatenate([[0], np.cumsum(ncoord)[:-1]]).astype(np.int64)
        last = first + ncoord - 1
        nlines = len(geoms)
        node_row = np.zeros(len(xy), bool)
        node_row[first] = True
        node_row[last] = True
        return cls(
            xy=xy, vline=vline, first=first, last=last, mode=lines["mode"].to_numpy(),
            level=lines["level"].to_numpy(), label=np.array(labels, dtype=object)[lines["layer"].to_numpy()],
            fid=lines["fid"].to_numpy(), seg=np.nonzero(vline[1:] == vline[:-1])[0],
            node_row=node_row, deleted=np.zeros(len(xy), bool), trim_start=np.full(nlines, np.nan),
            trim_end=np.full(nlines, np.nan), end_free=np.ones(2 * nlines, bool))

    @property
    def nlines(self) -> int:
        """Number of lines."""
        return len(self.first)

    def end_rows(self) -> np.ndarray:
        """Row of every line end: starts, then finishes."""
        return np.concatenate([self.first, self.last])

    def drop_crossings(self, drop: np.ndarray) -> None:
        """Drop the crossing vertices where ``drop`` (shape (n_crossing_events,)) holds."""
        keep = np.ones(len(self.new), bool)
        keep[: self.n_crossing_events] = ~drop
        self.new.keep(keep)
        self.cross_row, self.cross_partner_row = self.cross_row[~drop], self.cross_partner_row[~drop]
        self.n_crossing_events = int((~drop).sum())

    def terminal_row(self, ends: np.ndarray) -> np.ndarray:
        """First row of the segment at each line end (ends numbered as :meth:`end_rows`)."""
        nl = self.nlines
        line = ends % nl
        return np.where(ends < nl, self.first[line], self.last[line] - 1)

    def end_lines(self) -> np.ndarray:
        """Line of every line end (ordered as :meth:`end_rows`)."""
        n = self.nlines
        return np.concatenate([np.arange(n), np.arange(n)])

    def live_segments(self) -> np.ndarray:
        """Indices into ``seg`` of segments not cut away by a trim."""
        return np.nonzero(~self.deleted[self.seg] & ~self.deleted[self.seg + 1])[0]

    def line_node_positions(self) -> tuple[np.ndarray, np.ndarray]:
        """Every node found so far as (line, position), sorted by line then position."""
        node_rows = np.nonzero(self.node_row)[0]
        nl, npos, _, _ = self.new.arrays()
        line = np.concatenate([self.vline[node_rows], nl])
        pos = np.concatenate([node_rows - self.first[self.vline[node_rows]], npos]).astype(float)
        order = np.lexsort((pos, line))
        return line[order], pos[order]

    def places(self, snap_m: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Line ends grouped by place (to 1 mm, per mode), and pairs of places within ``snap_m``.

        Computed once, before any end moves, and cached.

        Returns
        -------
        pinv : ndarray of int64, shape (2 * nlines,)
            Place of each end (ends ordered as :meth:`end_rows`).
        pcount : ndarray of int64
            Ends per place.
        pxy : ndarray of float64, shape (nplaces, 2)
            Place coordinates (those of its first end).
        pairs : ndarray of int64, shape (npairs, 2)
            Place index pairs at most ``max(snap_m, NOISE_M)`` apart (any mode), from a
            k-d tree (scipy ``cKDTree.query_pairs``).
        """
        if self._places is None:
            exy = self.xy[self.end_rows()]
            emode = self.mode[self.end_lines()]
            kx = np.round(exy[:, 0] / NOISE_M).astype(np.int64)
            ky = np.round(exy[:, 1] / NOISE_M).astype(np.int64)
            pinv = pd.DataFrame({"m": emode, "x": kx, "y": ky}).groupby(["m", "x", "y"], sort=False).ngroup().to_numpy()
            npl = int(pinv.max()) + 1 if len(pinv) else 0
            pcount = np.bincount(pinv, minlength=npl)
            pfirst = np.full(npl, len(pinv), np.int64)
            np.minimum.at(pfirst, pinv, np.arange(len(pinv)))
            pxy = exy[pfirst]
            r = max(snap_m, NOISE_M)
            pairs = cKDTree(pxy).query_pairs(r, output_type="ndarray") if npl else np.zeros((0, 2), np.int64)
            self._places = (pinv, pcount, pxy, pairs)
        return self._places

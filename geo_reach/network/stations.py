"""Modes meet only at stations: access points, entries and transfer links.

Road, rail and cable lines never join each other in the topology steps.
A rail layer's stations and a cable layer's access nodes are snapped onto
their own lines (the nearest point within ``access_snap_m``, found with
shapely's STR-tree ``query_nearest``) and become nodes there.  Those nodes
are the mode's *entries* (where a trip from off the network may get on).
Each rail station is also linked to the nearest point of a road line within
``transfer_max_m`` by a pair of ``transfer`` edges: road -> rail costs the
walk plus the boarding penalty, rail -> road only the walk.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import shapely
from numpy.typing import ArrayLike
from pyproj import CRS
from scipy.spatial import cKDTree

from ..errors import OptionError
from ..ingest.layers import LayerRef, check_coordinates, parse_layer_ref, read_layer
from .costs import MODES, minutes_from_length
from .geodesy import geodesic_lengths
from .issues import IssueLog
from .table import NOISE_M, LineTable

__all__ = ["AccessPlan", "attach_access", "mark_entries", "transfer_links", "node_on_segment"]

#: A station's node is looked for among this many nearest nodes, within ten times the noise distance.
_NEAR_NODES = 8


@dataclass
class AccessPlan:
    """Where stations and access nodes were attached, and the transfer links to build.

    Attributes
    ----------
    access : list of (x, y, layer index)
        Attached stations and access nodes (node positions on their lines).
    transfers : list of (Q, R, boarding minutes, layer index)
        Rail station node ``Q`` to road node ``R``.
    """

    access: list = field(default_factory=list)
    transfers: list = field(default_factory=list)


def node_on_segment(tab: LineTable, r: int, ln: int, P: np.ndarray) -> np.ndarray:
    """Make a node of line ``ln`` at the point of its segment starting at row ``r`` nearest ``P``.

    The segment's own vertex is used when the point is within 1 mm of it;
    returns the node's xy.
    """
    a, b = tab.xy[r], tab.xy[r + 1]
    d = b - a
    tt = float(np.clip(np.dot(P - a, d) / max(np.dot(d, d), 1e-18), 0, 1))
    Q = a + tt * d
    if np.hypot(*(Q - a)) < NOISE_M:
        tab.node_row[r] = True
        return a.copy()
    if np.hypot(*(Q - b)) < NOISE_M:
        tab.node_row[r + 1] = True
        return b.copy()
    tab.new.add([ln], [r - tab.first[ln] + tt], [Q[0]], [Q[1]])
    return Q


def _read_points(spec: Any, label: str, crs: CRS) -> tuple[Any, str]:
    """The access points of ``spec`` in the working CRS (exploded, empty ones left out), and their label."""
    src = spec.access_points
    if isinstance(src, (str, LayerRef)) or hasattr(src, "__fspath__"):
        ref = parse_layer_ref(src)
        pts = read_layer(ref, "points", assume_crs=spec.assume_crs)
        plabel = ref.label
        check_coordinates(pts, ref.path, ref.layer)
    else:
        pts = src
        plabel = f"{label}_access"
        check_coordinates(pts, plabel)
    pts = pts[~(pts.geometry.isna() | pts.geometry.is_empty)].to_crs(crs)
    return pts.explode(index_parts=False), plabel


def _segments_tree(tab: LineTable, mask: np.ndarray) -> tuple[np.ndarray, Any]:
    """Indices into ``tab.seg`` of the live segments where ``mask`` (per segment) holds, and their STR-tree."""
    seg = tab.seg
    sidx = np.nonzero(mask & ~tab.deleted[seg] & ~tab.deleted[seg + 1])[0]
    if len(sidx) == 0:
        return sidx, None
    return sidx, shapely.STRtree(shapely.linestrings(np.stack([tab.xy[seg[sidx]], tab.xy[seg[sidx] + 1]], axis=1)))


def _plan_transfers(tab: LineTable, stations: list, transfer_max_m: float, issues: IssueLog) -> list:
    """Road side of each rail station: a node at the nearest point of a road line within ``transfer_max_m``."""
    plan = []
    sl = tab.vline[tab.seg]
    sidx, tree = _segments_tree(tab, tab.mode[sl] == MODES.index("road"))
    for Q, li, plabel, fid, board in stations:
        if tree is None:
            issues.add("access_unmatched", Q[0], Q[1], "no road layer to connect the station to; "
                       "reachable only by rail", plabel, fid)
            continue
        hit = tree.query_nearest(shapely.points(Q), max_distance=transfer_max_m)
        if len(hit) == 0:
            issues.add("access_unmatched", Q[0], Q[1], f"station farther than {transfer_max_m:g} m from any road; "
                       "reachable only by rail", plabel, fid)
            continue
        s = sidx[hit[0]]
        plan.append((Q, node_on_segment(tab, tab.seg[s], sl[s], Q), board, li))
    return plan


def attach_access(tab: LineTable, lines_layer: np.ndarray, specs: list, labels: list[str], crs: CRS,
                  access_snap_m: float, transfer_max_m: float, issues: IssueLog) -> AccessPlan:
    """Snap stations (rail) and access nodes (cable) onto their own layer's lines; plan transfer links.

    Parameters
    ----------
    tab : LineTable
        Nodes are added to it where points attach.
    lines_layer : ndarray of int, shape (nlines,)
        The layer (index into ``specs``) of each line.
    specs : list of LayerSpec
    labels : list of str
        Layer labels, as ``specs``.
    crs : pyproj.CRS
        The working CRS.
    access_snap_m, transfer_max_m : float
        Largest distance from a point to its line, and from a rail station to a road (m).
    issues : IssueLog
        ``access_unmatched`` for each point too far from its line or from any road.

    Raises
    ------
    OptionError
        Access points given for a road layer.
    """
    plan = AccessPlan()
    stations = []  # (Q, layer index, point layer label, fid, boarding minutes)
    sl = tab.vline[tab.seg]
    for li, spec in enumerate(specs):
        if spec.access_points is None:
            continue
        if spec.mode == "road":
            raise OptionError(f"layer {labels[li]}: access points (stations) apply to rail or cable layers only")
        pts, plabel = _read_points(spec, labels[li], crs)
        sidx, tree = _segments_tree(tab, np.isin(sl, np.nonzero(lines_layer == li)[0]))
        if tree is None:
            continue
        geoms = pts.geometry.to_numpy()
        near = tree.query_nearest(geoms, max_distance=access_snap_m, return_distance=True, all_matches=False)[0]
        got = np.zeros(len(geoms), bool)
        got[near[0]] = True
        for p in np.nonzero(~got)[0]:
            c = shapely.get_coordinates(geoms[p])[0]
            issues.add("access_unmatched", c[0], c[1],
                       f"{'station' if spec.mode == 'rail' else 'access node'} farther than {access_snap_m:g} m "
                       f"from layer {labels[li]}; not attached", plabel, pts.index[p])
        for p, k in zip(*near):
            s = sidx[k]
            Q = node_on_segment(tab, tab.seg[s], sl[s], shapely.get_coordinates(geoms[p])[0])
            plan.access.append((Q[0], Q[1], li))
            if spec.mode == "rail":
                stations.append((Q, li, plabel, pts.index[p], spec.boarding_minutes))
    if stations:
        plan.transfers = _plan_transfers(tab, stations, transfer_max_m, issues)
    return plan


def _node_near(tree: cKDTree, node_mode: np.ndarray, P: ArrayLike, mode: int) -> int | None:
    """The node of ``mode`` at ``P`` (within 1 cm), or None."""
    n = tree.n
    d, k = tree.query(P, k=min(_NEAR_NODES, n))
    return next((int(kk) for dd, kk in zip(np.atleast_1d(d), np.atleast_1d(k))
                 if dd < NOISE_M * 10 and node_mode[kk] == mode), None)


def mark_entries(plan: AccessPlan, specs: list, node_x: np.ndarray, node_y: np.ndarray,
                 node_mode: np.ndarray) -> tuple[np.ndarray, cKDTree]:
    """Entry flag per node: every road node, and the nodes of attached stations and access nodes.

    Returns the flags and a k-d tree of the nodes (reused for transfers).
    """
    entry = node_mode == MODES.index("road")
    tree = cKDTree(np.column_stack([node_x, node_y]))
    for x, y, li in plan.access:
        k = _node_near(tree, node_mode, [x, y], MODES.index(specs[li].mode))
        if k is not None:
            entry[k] = True
    return entry, tree


def transfer_links(plan: AccessPlan, tree: cKDTree, node_x: np.ndarray, node_y: np.ndarray,
                   node_mode: np.ndarray, crs: CRS, walk_kmh: float) -> dict[str, list]:
    """The ``transfer`` edges: for each planned link, road -> rail (walk + boarding) and rail -> road (walk).

    Returns lists ``from``, ``to``, ``geom``, ``length_m``, ``minutes`` (empty when there are none).
    """
    out = {"from": [], "to": [], "geom": [], "length_m": [], "minutes": []}
    for Q, R, board, _li in plan.transfers:
        rail = _node_near(tree, node_mode, Q, MODES.index("rail"))
        road = _node_near(tree, node_mode, R, MODES.index("road"))
        if rail is None or road is None:
            continue
        g = shapely.linestrings([[node_x[road], node_y[road]], [node_x[rail], node_y[rail]]])
        c = shapely.get_coordinates(g)
        ln = geodesic_lengths(c, np.zeros(len(c), np.int64), 1, crs)[0]
        walk = minutes_from_length(ln, walk_kmh)
        out["from"] += [road, rail]
        out["to"] += [rail, road]
        out["geom"] += [g, shapely.reverse(g)]
        out["length_m"] += [ln, ln]
        out["minutes"] += [float(board) + float(walk), float(walk)]
    return out

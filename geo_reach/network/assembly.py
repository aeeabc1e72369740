"""Edge assembly: cut every line at its nodes into edges, merge nodes, remove duplicate edges, cost them.

1. Each line's rows (its kept vertices and the new vertices the topology
   steps inserted) are sorted along the line; rows in a trimmed stretch are
   dropped, and consecutive rows of one line closer than 1 mm collapse.
2. Node rows are clustered within 1 mm per mode (a k-d tree's pairs,
   clustered by single linkage); each cluster is one node, at its first
   member's position.
3. Each stretch between consecutive node rows of a line is an edge, keeping
   every vertex; its length is geodesic (WGS84).
4. Zero-length edges between one node are dropped; closed loops are kept
   and reported (``self_loop``).  Edges joining the same two nodes in the
   same mode and direction whose courses lie within the tolerance of each
   other (Hausdorff distance) are duplicates: the first is kept, the others
   removed (``duplicate_removed``).
5. Edges are costed (minutes from speed, latency for cable), stations and
   access nodes become entries, transfer links are added, and dead ends are
   reported.

References
----------
.. [1] Huttenlocher, D. P., Klanderman, G. A. and Rucklidge, W. J. (1993).
   Comparing images using the Hausdorff distance. IEEE Transactions on
   Pattern Analysis and Machine Intelligence 15(9), 850-863 (the Hausdorff
   distance; GEOS computes a discrete approximation over the vertices).
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np
import pandas as pd
import shapely
from pyproj import CRS
from scipy.spatial import cKDTree

from .costs import MODES, latency_from_length, minutes_from_length
from .geodesy import geodesic_lengths
from .issues import IssueLog
from .model import Network
from .overshoots import report_dead_ends
from .stations import AccessPlan, mark_entries, transfer_links
from .table import NOISE_M, LineTable, union_find_labels

__all__ = ["assemble", "line_rows", "cluster_nodes", "duplicate_edges", "edge_costs"]


def _run_bounds(line: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Flags of the first and last row of each run of equal ``line`` values."""
    start = np.ones(len(line), bool)
    start[1:] = line[1:] != line[:-1]
    end = np.ones(len(line), bool)
    end[:-1] = line[1:] != line[:-1]
    return start, end


def line_rows(tab: LineTable) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Every line's rows in order along it: (line, x, y, is-node), trimmed stretches and 1 mm repeats removed.

    Line ends are always nodes; a line left with a single row vanishes.
    """
    rows = np.nonzero(~tab.deleted)[0]
    nl_, np_, nx_, ny_ = tab.new.arrays()
    line = np.concatenate([tab.vline[rows], nl_])
    pos = np.concatenate([(rows - tab.first[tab.vline[rows]]).astype(float), np_])
    X = np.concatenate([tab.xy[rows, 0], nx_])
    Y = np.concatenate([tab.xy[rows, 1], ny_])
    isnode = np.concatenate([tab.node_row[rows], np.ones(len(nl_), bool)])
    order = np.lexsort((pos, line))
    line, pos, X, Y, isnode = line[order], pos[order], X[order], Y[order], isnode[order]
    # trimmed lines: drop new vertices lying in a deleted stretch
    ts, te = tab.trim_start[line], tab.trim_end[line]
    inside = ~((pos < ts - 1e-12) | (pos > te + 1e-12))
    line, X, Y, isnode = line[inside], X[inside], Y[inside], isnode[inside]
    start, end = _run_bounds(line)
    isnode |= start | end
    # collapse consecutive rows of one line at the same place (within 1 mm): row k+1 merges into row k
    close = (line[1:] == line[:-1]) & (np.hypot(X[1:] - X[:-1], Y[1:] - Y[:-1]) < NOISE_M)
    dup = np.zeros(len(line), bool)
    if close.any():
        k = np.nonzero(close)[0]
        isnode[k] |= isnode[k + 1]
        dup[k + 1] = True
    line, X, Y, isnode = line[~dup], X[~dup], Y[~dup], isnode[~dup]
    start, end = _run_bounds(line)
    isnode |= start | end
    single = start & end
    if single.any():   # a whole line inside a trimmed stretch
        line, X, Y, isnode = line[~single], X[~single], Y[~single], isnode[~single]
    return line, X, Y, isnode


def cluster_nodes(X: np.ndarray, Y: np.ndarray, nrow: np.ndarray,
                  nmode: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Node id of each node row: rows within 1 mm of each other (single linkage), per mode, are one node.

    The rows' coordinates are moved to their node's (its first member's).

    Returns
    -------
    lab : ndarray of int64
        Node id of each of ``nrow``.
    node_x, node_y, node_mode : ndarray
        Per node.
    """
    nxy = np.column_stack([X[nrow], Y[nrow]])
    lab = np.empty(len(nrow), np.int64)
    base = 0
    for m in np.unique(nmode):
        sel = np.nonzero(nmode == m)[0]
        pairs = cKDTree(nxy[sel]).query_pairs(NOISE_M, output_type="ndarray")
        cl = union_find_labels(len(sel), pairs[:, 0], pairs[:, 1]) if len(pairs) else np.arange(len(sel))
        _, cl = np.unique(cl, return_inverse=True)
        lab[sel] = cl + base
        base += cl.max() + 1
    first_member = np.full(base, -1)
    first_member[lab[::-1]] = np.arange(len(lab))[::-1]
    node_x, node_y = nxy[first_member, 0], nxy[first_member, 1]
    X[nrow] = node_x[lab]
    Y[nrow] = node_y[lab]
    return lab, node_x, node_y, nmode[first_member]


def _cut_edges(line: np.ndarray, X: np.ndarray, Y: np.ndarray, nrow: np.ndarray,
               row_node: np.ndarray) -> tuple[np.ndarray, ...]:
    """Edges between consecutive node rows of one line: (from, to, line, vertex xy, vertex owner)."""
    a, b = nrow[:-1], nrow[1:]
    ok = line[a] == line[b]
    a, b = a[ok], b[ok]
    L = b - a + 1
    eid = np.repeat(np.arange(len(a)), L)
    ridx = np.repeat(a, L) + (np.arange(L.sum()) - np.repeat(np.cumsum(L) - L, L))
    return row_node[a], row_node[b], line[a], np.column_stack([X[ridx], Y[ridx]]), eid


def duplicate_edges(efrom: np.ndarray, eto: np.ndarray, emode: np.ndarray, oneway: np.ndarray, geom: np.ndarray,
                    keep: np.ndarray, tol: float) -> list[tuple[int, int]]:
    """Pairs (kept edge, duplicate) among the edges where ``keep`` holds.

    Edges are compared with the first edge of their group (same node pair,
    mode and, for one-way edges, direction); a member whose Hausdorff
    distance to that first edge is at most ``tol`` is its duplicate.
    """
    lo, hi = np.minimum(efrom, eto), np.maximum(efrom, eto)
    direction = np.where(oneway, np.where(efrom <= eto, 1, 2), 0)
    df = pd.DataFrame({"lo": lo, "hi": hi, "m": emode, "d": direction, "k": np.arange(len(efrom))})[keep]
    sizes = df.groupby(["lo", "hi", "m", "d"], sort=False)["k"].transform("size").to_numpy()
    cand = df[sizes > 1]
    if len(cand) == 0:
        return []
    firsts = cand.groupby(["lo", "hi", "m", "d"], sort=False)["k"].transform("first").to_numpy()
    ks = cand["k"].to_numpy()
    others = ks != firsts
    ka, kb = firsts[others], ks[others]
    dupe = shapely.hausdorff_distance(geom[ka], geom[kb]) <= tol
    return list(zip(ka[dupe].tolist(), kb[dupe].tolist()))


def _edge_table(tab: LineTable, crs: CRS, step: Callable[[str], None]) -> dict[str, Any]:
    """Steps 1-3: nodes and raw edges."""
    line, X, Y, isnode = line_rows(tab)
    nrow = np.nonzero(isnode)[0]
    lab, node_x, node_y, node_mode = cluster_nodes(X, Y, nrow, tab.mode[line[nrow]])
    row_node = np.full(len(line), -1)
    row_node[nrow] = lab
    efrom, eto, eline, exy, eid = _cut_edges(line, X, Y, nrow, row_node)
    geom = shapely.linestrings(exy, indices=eid)
    step("measuring geodesic lengths")
    length = geodesic_lengths(exy, eid, len(efrom), crs)
    step("assembling edges")
    return {"node_x": node_x, "node_y": node_y, "node_mode": node_mode, "from": efrom, "to": eto,
            "line": eline, "geom": geom, "length": length}


def _clean_edges(tab: LineTable, lines: pd.DataFrame, e: dict, snap_m: float, issues: IssueLog,
                 report: dict) -> np.ndarray:
    """Step 4: which edges to keep (degenerate ones and duplicates out; loops reported)."""
    efrom, eto, geom, length, eline = e["from"], e["to"], e["geom"], e["length"], e["line"]
    planar = shapely.length(geom)
    zero = (efrom == eto) & (planar < NOISE_M)
    keep = ~zero
    for k in np.nonzero((efrom == eto) & ~zero)[0]:
        issues.add("self_loop", e["node_x"][efrom[k]], e["node_y"][efrom[k]],
                   f"closed loop of {length[k]:.1f} m returning to the same node",
                   tab.label[eline[k]], tab.fid[eline[k]])
    pairs = duplicate_edges(efrom, eto, tab.mode[eline], lines["oneway"].to_numpy()[eline], geom, keep,
                            max(snap_m, NOISE_M))
    for x, y2 in pairs:
        if not keep[y2]:
            continue
        keep[y2] = False
        c = shapely.get_coordinates(shapely.line_interpolate_point(geom[y2], 0.5, normalized=True))[0]
        issues.add("duplicate_removed", c[0], c[1],
                   f"edge duplicating feature {tab.fid[eline[x]]} of layer {tab.label[eline[x]]} removed",
                   tab.label[eline[y2]], tab.fid[eline[y2]])
        report["removed_duplicate_length_m"] += float(length[y2])
    return keep


def edge_costs(length: np.ndarray, speed: np.ndarray, cable: np.ndarray, closed: np.ndarray,
               all_season: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Minutes, latency and all-season flag of line edges: the one costing rule of the build.

    Minutes from ``length`` (m) at ``speed`` (km/h) for road and rail;
    latency for cable; a closed edge (a scenario's closure) has neither and
    counts as no all-season road.  Scenarios re-cost edges in place with it
    (:mod:`geo_reach.pipeline.changes`), so a changed network equals a rebuild.
    """
    minutes = np.where(np.isnan(speed), np.nan, minutes_from_length(length, speed))
    minutes = np.where(cable | closed, np.nan, minutes)
    latency = np.where(cable & ~closed, latency_from_length(length), np.nan)
    return minutes, latency, np.where(closed, np.nan, all_season)


def _costs(lines: pd.DataFrame, labels: list[str], eline: np.ndarray, length: np.ndarray) -> dict[str, Any]:
    """Per-edge costs and source fields from the edges' lines."""
    speed = lines["speed"].to_numpy()[eline]
    mode_names = np.array(MODES, dtype=object)[lines["mode"].to_numpy()[eline]]
    cable = mode_names == "cable"
    closed = (lines["closed"].to_numpy(bool)[eline] if "closed" in lines.columns
              else np.zeros(len(eline), bool))
    minutes, latency, all_season = edge_costs(length, speed, cable, closed,
                                              lines["all_season"].to_numpy()[eline].astype(float))
    return {
        "minutes": minutes,
        "latency": latency,
        "closed": closed,
        "oneway": lines["oneway"].to_numpy()[eline],
        "mode": mode_names,
        "src_layer": np.array(labels, dtype=object)[lines["layer"].to_numpy()[eline]],
        "src_fid": lines["fid"].to_numpy()[eline].astype(np.int64),
        "extra": {
            "level": lines["level"].to_numpy()[eline].astype(float),
            "all_season": all_season,
            "class": lines["klass"].to_numpy()[eline],
            "speed_kmh": speed,
        },
    }


def _append_transfers(c: dict, efrom: np.ndarray, eto: np.ndarray, geom: np.ndarray, length: np.ndarray,
                      tf: dict) -> tuple:
    """Add the transfer edges ``tf`` after the line edges."""
    k = len(tf["from"])
    if k == 0:
        return efrom, eto, geom, length
    c["minutes"] = np.concatenate([c["minutes"], tf["minutes"]])
    c["latency"] = np.concatenate([c["latency"], np.full(k, np.nan)])
    c["oneway"] = np.concatenate([c["oneway"], np.ones(k, bool)])
    c["mode"] = np.concatenate([c["mode"], np.full(k, "transfer", object)])
    c["src_layer"] = np.concatenate([c["src_layer"], np.full(k, "", object)])
    c["src_fid"] = np.concatenate([c["src_fid"], np.full(k, -1, np.int64)])
    c["closed"] = np.concatenate([c["closed"], np.zeros(k, bool)])
    c["extra"] = {kk: np.concatenate([v, np.full(k, np.nan if v.dtype.kind == "f" else None, dtype=v.dtype)])
                  for kk, v in c["extra"].items()}
    return (np.concatenate([efrom, tf["from"]]).astype(np.int64), np.concatenate([eto, tf["to"]]).astype(np.int64),
            np.concatenate([geom, np.array(tf["geom"], dtype=object)]), np.concatenate([length, tf["length_m"]]))


def assemble(tab: LineTable, lines: pd.DataFrame, labels: list[str], specs: list, plan: AccessPlan,
             options: Any, crs: CRS, issues: IssueLog, report: dict,
             step: Callable[[str], None] = lambda name: None) -> Network:
    """Cut the lines of ``tab`` into the network's edges (see the module docstring).

    Parameters
    ----------
    tab : LineTable
        After noding, joining and attaching stations.
    lines : DataFrame
        The line table :func:`~geo_reach.network.prepare.prepare_lines` made (attributes per line).
    labels : list of str
        Layer labels.
    specs : list of LayerSpec
    plan : AccessPlan
        Attached stations and planned transfers.
    options : BuildOptions
    crs : pyproj.CRS
    issues, report
        Where repairs are recorded.
    step : callable, optional
        Progress callback (step names).

    Returns
    -------
    Network
    """
    e = _edge_table(tab, crs, step)
    keep = _clean_edges(tab, lines, e, options.snap_m, issues, report)
    sel = np.nonzero(keep)[0]
    efrom, eto, geom, length, eline = e["from"][sel], e["to"][sel], e["geom"][sel], e["length"][sel], e["line"][sel]
    # drop nodes no edge uses (possible after dedupe) and renumber
    used = np.zeros(len(e["node_x"]), bool)
    used[efrom] = True
    used[eto] = True
    new_id = np.cumsum(used) - 1
    efrom, eto = new_id[efrom], new_id[eto]
    node_x, node_y, node_mode = e["node_x"][used], e["node_y"][used], e["node_mode"][used]
    c = _costs(lines, labels, eline, length)
    entry, tree = mark_entries(plan, specs, node_x, node_y, node_mode)
    tf = transfer_links(plan, tree, node_x, node_y, node_mode, crs, options.transfer_walk_kmh)
    for ln in tf["length_m"][::2]:
        report["transfer_length_m"] += 2 * ln
    efrom, eto, geom, length = _append_transfers(c, efrom, eto, geom, length, tf)
    net = Network(
        crs=crs, node_x=node_x, node_y=node_y, node_entry=entry,
        edge_from=efrom.astype(np.int64), edge_to=eto.astype(np.int64), edge_geometry=geom,
        edge_length_m=length, edge_minutes=c["minutes"], edge_latency_ms=c["latency"],
        edge_oneway=c["oneway"].astype(bool), edge_mode=c["mode"], edge_src_layer=c["src_layer"],
        edge_src_fid=c["src_fid"], extra=c["extra"], edge_closed=c["closed"] if c["closed"].any() else None,
    )
    report_dead_ends(net, options.snap_m, options.dangle_m, issues)
    return net

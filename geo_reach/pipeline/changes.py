"""A scenario's network and hubs as changes of the baseline's, ids kept (the incremental path).

A scenario that closes or upgrades features of the study's line layers, or
adds and removes hubs, changes no node and no edge of the baseline network:
the build of its edited layers gives the same nodes and edges in the same
order (a closed feature stays, with no cost; an upgraded one has a new
speed), and only some edges' costs differ.  :func:`changed_network` makes
that network from the baseline's by re-costing those edges in place with the
build's own rule (:func:`geo_reach.network.assembly.edge_costs`), so it
equals the rebuild array for array; :func:`hub_map` says where each baseline
hub went.  The access step then repairs the baseline's forests of cheapest
trips (:class:`geo_reach.analysis.access.Repair`) instead of searching again.

A scenario that adds line layers is rebuilt in full (new lines are noded
against the whole network).  ``run_study(..., incremental=False)`` rebuilds
and searches every scenario in full: the reference the incremental path is
tested against.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..analysis.attach import share_entry_places
from ..network.assembly import edge_costs
from ..network.costs import DEFAULT_SPEED_KMH, feature_speeds
from .inputs import Hubs

__all__ = ["can_change_in_place", "changed_network", "hub_map"]


def can_change_in_place(study, kinds: dict) -> bool:
    """Whether the scenario's network is the baseline's with some edges re-costed (no layer added,
    and the network is built from the study's layers, not read from a prebuilt file)."""
    return not study.prebuilt and not kinds.get("added_layers")


def changed_network(base, specs, kinds: dict):
    """The scenario's network from the baseline network ``base``, and the base edges whose costs changed.

    Parameters
    ----------
    base : Network
        The baseline network, built from the study's layers.
    specs : list of LayerSpec
        The scenario's line specs (from
        :func:`~geo_reach.pipeline.scenarios.scenario_inputs`): each changed
        layer is a GeoDataFrame with its speeds in ``speed_field`` and its
        closures in ``closed_field``.
    kinds : dict
        ``upgraded`` and ``closed``: feature ids per layer label.

    Returns
    -------
    (Network, ndarray of int64)
        Same nodes and edges as ``base``; the changed edges' ``minutes``,
        ``latency_ms``, ``speed_kmh``, ``all_season`` and ``closed`` as the
        build gives them.
    """
    touched = {}
    for key in ("upgraded", "closed"):
        for lab, fids in (kinds.get(key) or {}).items():
            touched.setdefault(lab, set()).update(int(f) for f in fids)
    if not touched:
        return base, np.zeros(0, np.int64)
    by_label = {s.name: s for s in specs if s.name is not None}
    minutes = base.edge_minutes.copy()
    latency = base.edge_latency_ms.copy()
    extra = {k: v.copy() for k, v in base.extra.items()}
    speed_col = extra.get("speed_kmh")
    season = extra.get("all_season")
    closed = base.edge_closed.copy() if base.edge_closed is not None else np.zeros(base.n_edges, bool)
    changed = []
    for lab, fids in touched.items():
        s = by_label[lab]
        frame = s.source
        frame = frame[frame.index.isin(list(fids))]      # a feature's speed depends on its own row only
        if s.mode in DEFAULT_SPEED_KMH:
            speed, _, _, _ = feature_speeds(frame, s.mode, s.speed_field, s.class_field, s.class_speeds, s.speed_kmh)
        else:
            speed = np.full(len(frame), np.nan)
        shut = (frame[s.closed_field].fillna(False).to_numpy(bool) if s.closed_field
                else np.zeros(len(frame), bool))
        row = {int(f): i for i, f in enumerate(frame.index)}
        e = np.nonzero((base.edge_src_layer == lab) & (base.edge_mode != "transfer")
                       & np.isin(base.edge_src_fid, list(fids)))[0]
        if not len(e):
            continue
        r = np.array([row[int(f)] for f in base.edge_src_fid[e]], np.int64)
        sp, sh = speed[r], shut[r]
        allseason = season[e] if season is not None else np.full(len(e), np.nan)
        m, lat, a = edge_costs(base.edge_length_m[e], sp, base.edge_mode[e] == "cable", sh, allseason)
        minutes[e], latency[e], closed[e] = m, lat, sh
        if season is not None:
            season[e] = a
        if speed_col is not None:
            speed_col[e] = sp
        changed.append(e)
    edges = np.unique(np.concatenate(changed)) if changed else np.zeros(0, np.int64)
    net = dataclasses.replace(base, edge_minutes=minutes, edge_latency_ms=latency, extra=extra,
                              edge_closed=closed if closed.any() else None)
    # Same nodes and edges: what depends on them alone is the baseline's (components ignore costs;
    # the spatial indexes of where points join are shared where the same edges stay routable).
    for name in ("component", "degree"):
        if name in base.__dict__:
            net.__dict__[name] = base.__dict__[name]
    share_entry_places(base, net)
    return net, edges.astype(np.int64)


def hub_map(base: Hubs, scen: Hubs, removed=()) -> np.ndarray | None:
    """Each baseline hub's index among the scenario's hubs (-1 = removed), or None when they do not line up.

    The scenario's hubs are the baseline's in order, less the removed ids,
    then the added ones (:func:`~geo_reach.pipeline.inputs.merge_hubs`).
    """
    if scen is base:
        return np.arange(len(base.ids), dtype=np.int64)
    gone = set(str(r) for r in removed)
    keep = np.array([str(h) not in gone for h in base.ids], bool)
    out = np.where(keep, np.cumsum(keep) - 1, -1).astype(np.int64)
    k = out[keep]
    if k.max(initial=-1) >= len(scen.ids) or not np.array_equal(scen.xy[k], base.xy[keep]) \
            or [str(v) for v in scen.ids[k]] != [str(v) for v in base.ids[keep]]:
        return None
    return out

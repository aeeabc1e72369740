"""What the map is given: one :class:`MapInput`, with today's layers and one :class:`ScenarioView` per scenario.

Every layer is a GeoDataFrame in any CRS (each must have one) or ``None``.
The fields each layer is read for are listed below; any other field is
ignored (raw fields such as ``src_fid`` or ``join_x`` stay in the
GeoPackage and never reach the page).  Every text taken from a layer, and
the title, scenario names and descriptions, travel to the page as JSON data
and are put on screen as text nodes: none is ever markup or template source.

Costs along the network come as one value per node plus a unit label, so
the map works for any routing weight (minutes, length, hops, latency): the
colour of a link is the cost at its cheaper end.  Reach rings, settlements,
districts and weak regions come from the travel-time surface and are always
in minutes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..._meta import CAUTION
from ...errors import LayerError, OptionError, where

__all__ = ["NetworkLayer", "ScenarioView", "MapInput", "FIELDS"]

#: Fields read from each layer: (required, optional).  Units in the names as everywhere in geo-reach.
FIELDS = {
    "network.edges": (("from_node", "to_node"), ("edge_id", "mode", "name", "length_m")),
    "hubs": ((), ("name", "kind", "hub_id")),
    "rings": (("from_minutes", "to_minutes"), ("population", "area_km2")),
    "settlements": (("minutes",), ("name", "population", "hub_name", "network_km", "cost")),
    "districts": (("share_beyond",), ("name", "population", "mean_minutes")),
    "water": ((), ("name", "kind")),
    "weak": (("rank", "reason"), ("population", "mean_hub_minutes", "area_km2", "edge_id")),
    "diameter": (("cost",), ("length_m", "minutes")),
    "issues": (("kind",), ("detail",)),
    "change": (("delta",), ("before", "after", "mode", "name", "length_m")),
    "proposed": ((), ("name",)),
    "criticality": (("people_cut_off",), ("edge_id", "rank", "person_minutes_added", "nodes_cut_off", "name")),
    "indices": (("index",), ("measure", "kind", "name", "hubs_within", "nearest_minutes")),
}


@dataclass(frozen=True)
class NetworkLayer:
    """A network's links and each node's cost to its nearest hub.

    Attributes
    ----------
    edges : GeoDataFrame of lines
        Fields: ``from_node``, ``to_node`` (row numbers into ``node_cost``);
        optional ``edge_id`` (for weak regions' key links), ``mode`` (road,
        rail, cable; ``transfer`` links are not drawn), ``name``,
        ``length_m`` (metres).
    node_cost : ndarray of float, shape (n_nodes,)
        Cost from each node to its nearest hub in :attr:`MapInput.cost_unit`;
        NaN or inf where no hub is reachable.
    edge_cost : ndarray of float, shape (n_edges,), optional
        The cost of crossing each link in the same unit; NaN where the link
        cannot be used with this cost (e.g. a cable when costs are minutes):
        such links are drawn thin and grey.
    """

    edges: object
    node_cost: object
    edge_cost: object = None

    def link_cost(self) -> np.ndarray:
        """Cost to the nearest hub at each link's cheaper end (NaN = none)."""
        c = np.asarray(self.node_cost, dtype=np.float64)
        c = np.where(np.isfinite(c), c, np.nan)
        f = self.edges["from_node"].to_numpy(np.int64)
        t = self.edges["to_node"].to_numpy(np.int64)
        with np.errstate(invalid="ignore"):
            return np.fmin(c[f], c[t])

    def check(self, name: str):
        _check_frame(f"{name}.edges", self.edges, FIELDS["network.edges"][0])
        c = np.asarray(self.node_cost)
        if c.ndim != 1:
            raise OptionError(f"{where(layer=name)}node_cost must hold one value per node")
        if len(self.edges):
            ids = self.edges[["from_node", "to_node"]].to_numpy()
            if ids.min() < 0 or ids.max() >= len(c):
                raise LayerError(f"{where(layer=name + '.edges', field='from_node')}node numbers run past the "
                                 f"{len(c)} values of node_cost; give one cost per node")
        if self.edge_cost is not None and len(np.asarray(self.edge_cost)) != len(self.edges):
            raise OptionError(f"{where(layer=name)}edge_cost must hold one value per link ({len(self.edges)})")


@dataclass(frozen=True)
class ScenarioView:
    """One scenario's own view: drawn only while the reader has chosen it.

    Attributes
    ----------
    name : str
        The scenario's name (shown as "With <name>").
    description : str
        One line shown under the view's name.
    network : NetworkLayer, optional
        The network after the change, with its node costs.
    change : GeoDataFrame of lines, optional
        Links whose cost changed: ``delta`` (after minus before, cost unit;
        NaN = no value before or after: new, closed or cut off), optional
        ``before``, ``after``, ``mode``, ``name``, ``length_m``.
    proposed : GeoDataFrame of lines, optional
        The new or changed lines themselves, highlighted; optional ``name``.
    rings : GeoDataFrame of polygons, optional
        Reach rings after the change (fields as :attr:`MapInput.rings`).
    settlements : GeoDataFrame of points, optional
        Settlements after the change (fields as :attr:`MapInput.settlements`,
        ``minutes`` holding the minutes after).
    """

    name: str
    description: str = ""
    network: NetworkLayer | None = None
    change: object = None
    proposed: object = None
    rings: object = None
    settlements: object = None


@dataclass(frozen=True)
class MapInput:
    """Everything the map draws.

    Attributes
    ----------
    title : str
        Shown at the top and as the page title.
    caution : str
        Shown along the bottom (never empty).
    cost_unit : str
        Unit of the network costs: ``"min"``, ``"km"``, ``"m"``, ``"links"`` (or ``"hops"``), ``"ms"``.
    cost_name : str
        What the network cost is, for labels ("minutes", "distance", "links", "latency").
    thresholds : tuple of float
        The study's band limits, minutes: the classes of rings and settlements.
    share_minutes : float, optional
        The minutes that districts' ``share_beyond`` counts beyond (default
        the largest threshold).
    weak_minutes : float, optional
        The threshold of ``beyond_threshold`` weak regions (default the largest threshold).
    network : NetworkLayer, optional
        Today's network.
    hubs : GeoDataFrame of points, optional
        ``name``, ``kind`` (shape), ``hub_id``.
    rings : GeoDataFrame of polygons, optional
        Disjoint reach rings: ``from_minutes``, ``to_minutes`` (NaN for the
        last, open ring), ``population``, ``area_km2``.
    settlements : GeoDataFrame of points, optional
        ``minutes`` (to the nearest hub; NaN = none reachable), ``name``,
        ``population`` (dot size), ``hub_name`` (of the nearest hub),
        ``network_km``, ``cost`` (to the nearest hub on the routing weight,
        in :attr:`cost_unit`; give it when the weight is not minutes).
    districts : GeoDataFrame of polygons, optional
        ``share_beyond`` (0..1 of the district's people beyond
        ``share_minutes``; NaN = nobody lives there), ``name``,
        ``population``, ``mean_minutes``.
    water : GeoDataFrame of polygons, optional
        Water and other barriers: ``name``, ``kind``.
    weak : GeoDataFrame of polygons, optional
        Weak regions: ``rank`` (1 = most people), ``reason``
        (``beyond_threshold``, ``single_link``, ``no_hub``), ``population``,
        ``mean_hub_minutes``, ``area_km2``, ``edge_id`` (the one link a
        ``single_link`` region depends on: an ``edge_id`` of ``network.edges``).
    diameter : GeoDataFrame of lines, optional
        The longest shortest trip: ``cost`` (cost unit), ``length_m``, ``minutes``.
    issues : GeoDataFrame of points or lines, optional
        Network issues found while building: ``kind``, ``detail``.
    criticality : GeoDataFrame of lines, optional
        Links by the people cut off when each closes (``link_criticality``):
        ``people_cut_off``, optional ``edge_id``, ``rank``,
        ``person_minutes_added``, ``nodes_cut_off``, ``name``.  Links that
        cut nobody off are not drawn.
    indices : GeoDataFrame of points, optional
        Settlements by their accessibility index (``access_index``):
        ``index``, optional ``measure`` and ``kind`` (one group per measure
        and kind; the first shown at first), ``name``, ``hubs_within``,
        ``nearest_minutes``.
    scenarios : tuple of ScenarioView
        One view each, after today's.
    top_weak : int
        Weak regions numbered and shown at first (the rest can be switched on).
    basemap : bool
        Offer an OpenStreetMap basemap (needs the internet; off by default).
    """

    title: str
    caution: str = CAUTION
    cost_unit: str = "min"
    cost_name: str = "minutes"
    thresholds: tuple = (30.0, 60.0, 120.0)
    share_minutes: float | None = None
    weak_minutes: float | None = None
    network: NetworkLayer | None = None
    hubs: object = None
    rings: object = None
    settlements: object = None
    districts: object = None
    water: object = None
    weak: object = None
    diameter: object = None
    issues: object = None
    criticality: object = None
    indices: object = None
    scenarios: tuple = field(default_factory=tuple)
    top_weak: int = 20
    basemap: bool = False

    def check(self):
        """Refuse what cannot be drawn, naming the layer and field (before any work)."""
        if not str(self.caution).strip():
            raise OptionError("the caution line must not be empty")
        if not str(self.cost_unit).strip():
            raise OptionError("give the unit of the network costs (cost_unit)")
        ts = [float(t) for t in self.thresholds]
        if not ts or not all(math.isfinite(t) and t > 0 for t in ts):
            raise OptionError("thresholds must be positive numbers of minutes")
        if self.top_weak < 0:
            raise OptionError("top_weak must be 0 or more")
        if self.network is not None:
            self.network.check("network")
        for name in ("hubs", "rings", "settlements", "districts", "water", "weak", "diameter", "issues",
                     "criticality", "indices"):
            frame = getattr(self, name)
            if frame is not None:
                _check_frame(name, frame, FIELDS[name][0])
        names = set()
        for i, s in enumerate(self.scenarios):
            if not isinstance(s, ScenarioView):
                raise OptionError(f"scenarios[{i}] must be a ScenarioView")
            if not str(s.name).strip():
                raise OptionError(f"scenarios[{i}] has an empty name")
            if s.name in names:
                raise OptionError(f"scenario name {s.name!r} is given twice")
            names.add(s.name)
            if s.network is not None:
                s.network.check(f"{s.name}.network")
            for key, fields in (("change", "change"), ("proposed", "proposed"), ("rings", "rings"),
                                ("settlements", "settlements")):
                frame = getattr(s, key)
                if frame is not None:
                    _check_frame(f"{s.name}.{key}", frame, FIELDS[fields][0])
        if not any(x is not None and len(x) for x in self.frames()):
            raise OptionError("nothing to draw: every layer given is empty or missing")

    def frames(self):
        """Every GeoDataFrame given (today's and the scenarios')."""
        out = [self.network.edges if self.network else None, self.hubs, self.rings, self.settlements,
               self.districts, self.water, self.weak, self.diameter, self.issues, self.criticality, self.indices]
        for s in self.scenarios:
            out += [s.network.edges if s.network else None, s.change, s.proposed, s.rings, s.settlements]
        return out


def _check_frame(name: str, frame, required):
    import geopandas as gpd

    if not isinstance(frame, gpd.GeoDataFrame):
        raise OptionError(f"{where(layer=name)}expected a GeoDataFrame, got {type(frame).__name__}")
    for f in required:
        if f not in frame.columns:
            raise LayerError(f"{where(layer=name, field=f)}is missing; the map reads it (see MapInput)")
    if frame.crs is None and len(frame):
        from ...errors import CRSError

        raise CRSError(f"{where(layer=name)}has no CRS; set it before drawing the map")

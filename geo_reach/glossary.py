"""The one vocabulary: every field, file and summary key geo-reach writes, with its meaning and unit.

This module is data.  It is rendered into the README's glossary section
(:func:`markdown`), written into every GeoPackage as column descriptions in
the standard ``gpkg_data_columns`` table (OGC 12-128, schema extension), and
a test checks that every field of every output layer and every key of
``summary.json`` is here.

Rules the names follow:

* Units in names: ``_m`` metres, ``_km2`` square kilometres, ``_minutes``,
  ``_ms``, ``_kmh``, ``_pct`` percent.  Lengths are always metres in layers
  (tables for people show km); areas are always km².
* ``hub_minutes`` is the time of the trip between a place and its nearest
  hub (the travel-time surface's unit, always minutes); ``hub_cost`` is the
  same on the network layers, in the routing weight's unit (the layer
  description names the weight).  ``minutes`` alone is an edge's own travel
  time.
* A hub kind is a suffix: ``hub_minutes_clinic``, ``nearest_hub_clinic``.
* Scenario layers add ``_before``, ``_after`` and ``_change`` (after minus
  before; negative = faster).
* "edge" is a piece of the network between two nodes (options that pick
  them say ``--links``); "join" is where a trip from off the network enters
  it; "access" is the off-network leg to that point.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["Term", "TERMS", "lookup", "describe", "markdown", "update_readme", "START", "END"]

#: Markers around the glossary section in README.md (the text between them is :func:`markdown`).
START = "<!-- glossary:start (generated from geo_reach/glossary.py; python -m geo_reach.glossary) -->"
END = "<!-- glossary:end -->"


@dataclass(frozen=True)
class Term:
    """One name in the vocabulary.

    Attributes
    ----------
    name : str
        The field, key or file name; ``<kind>``, ``<band>`` and ``<scenario>``
        stand for parts that vary (``hub_minutes_<kind>``).
    meaning : str
        One sentence, plain language.
    unit : str
        Unit, or ``""`` where there is none (ids, names, flags).
    where : str
        Where it appears (layers, files, summary sections).
    """

    name: str
    meaning: str
    unit: str
    where: str

    @property
    def pattern(self) -> re.Pattern:
        text = re.escape(self.name)
        for part in ("kind", "band", "scenario", "measure", "step"):
            text = text.replace(re.escape(f"<{part}>"), r"[A-Za-z0-9_\-.]+")
        return re.compile(f"^{text}$")


def _t(name, meaning, unit, where):
    return Term(name, meaning, unit, where)


_NET = "edges, nodes (network layers)"
TERMS: tuple[Term, ...] = (
    # ---------------------------------------------------------------- network layers
    _t("edge_id", "Id of an edge (a piece of the network between two nodes); the row number in layer edges.",
       "", "edges, change and criticality layers"),
    _t("from_node", "Node an edge starts at (its geometry runs from here).", "", "edges, diameter_path"),
    _t("to_node", "Node an edge ends at.", "", "edges, diameter_path"),
    _t("mode", "road, rail, cable, or transfer (a walking link between a station and the nearest road).", "",
       "edges"),
    _t("length_m", "Length along the ground (geodesic, on the WGS84 ellipsoid).", "m", "edges, trips, paths"),
    _t("minutes", "Time to travel the edge (or the path) at its speed; empty where the mode has none (cable).",
       "minutes", "edges, diameter_path"),
    _t("latency_ms", "Signal latency along the edge (cable); empty for other modes.", "ms", "edges"),
    _t("oneway", "1 where the edge may only be travelled from from_node to to_node.", "", "edges"),
    _t("src_layer", "The input layer the feature came from.", "", "edges, network_issues"),
    _t("src_fid", "The feature's id in its input layer (-1 for links the builder made).", "",
       "edges, network_issues"),
    _t("level", "Vertical level from the input (bridges, tunnels); crossings of different levels are not joined.",
       "", "edges"),
    _t("all_season", "1 where the input marks the road as usable in all seasons.", "", "edges"),
    _t("closed", "1 where a scenario closes the link: it stays on the map with its length but carries no trip "
       "(no minutes, latency or cost on any weight); only in a scenario's network.", "", "edges"),
    _t("class", "Road class as given in the input (looked up in the class-to-speed table).", "", "edges"),
    _t("speed_kmh", "Speed used for the edge.", "km/h", "edges"),
    _t("node_id", "Id of a node; the row number in layer nodes.", "", "nodes"),
    _t("degree", "Number of edge ends at the node.", "", "nodes"),
    _t("component", "Connected part of the network the node (or hub) is in: 0 = the largest.", "", "nodes, hubs"),
    _t("joinable", "1 where a trip from off the network may join it at this node.", "", "nodes"),
    _t("kind", "What an issue spot is (gap_joined, dangle ...), or what a hub is (clinic, market ...).", "",
       "network_issues, hubs"),
    _t("detail", "What was found or repaired, in words, with sizes.", "", "network_issues"),
    # ---------------------------------------------------------------- access
    _t("nearest_hub", "Id of the nearest hub (the cheapest trip).", "", "nodes, settlements"),
    _t("nearest_hub_<kind>", "Id of the nearest hub of that kind.", "", "nodes, settlements"),
    _t("nearest_hub_name", "Name of the nearest hub.", "", "settlements, tables"),
    _t("hub_cost", "Cost of the trip between this place and its nearest hub, in the routing weight's unit "
                   "(see the layer description); empty where no hub is reachable.", "weight unit",
       "nodes, edges (cheaper end)"),
    _t("hub_cost_<kind>", "hub_cost to the nearest hub of that kind.", "weight unit", "nodes"),
    _t("hub_minutes", "Minutes of the trip between this place and its nearest hub, walk to and from the network "
                      "included; empty where no hub is reachable.", "minutes", "settlements, rasters"),
    _t("hub_minutes_<kind>", "hub_minutes to the nearest hub of that kind.", "minutes", "settlements"),
    _t("network_length_m", "Length of the trip's part on the network (partial edges at both ends included).", "m",
       "settlements"),
    _t("eccentricity", "Cost of the longest of the cheapest trips from this node (weight unit).", "weight unit",
       "nodes"),
    _t("closeness", "Harmonic closeness: mean of 1/cost over the other nodes (per weight unit).",
       "1/weight unit", "nodes"),
    _t("hub_id", "Id of a hub (from the hubs layer's id field, else its row number from 1).", "",
       "hubs, reach_bands"),
    _t("name", "Name as given in the input.", "", "hubs, settlements, zones"),
    _t("joined", "1 where the hub (or place) joins the network within the largest access distance.", "", "hubs"),
    _t("access_m", "Distance walked off the network to where the trip joins it.", "m", "hubs, trips"),
    _t("served_nodes", "Nodes whose nearest hub this is.", "", "hubs"),
    _t("served_length_m", "Network length whose nearest hub this is (half of each edge to each end).", "m",
       "hubs"),
    _t("isolated", "1 where the hub sits in a part of the network with no other hub, cut off from the largest.",
       "", "hubs"),
    # ---------------------------------------------------------------- paths and trips
    _t("path_cost", "Cost of the path in the routing weight's unit.", "weight unit", "diameter_path"),
    _t("weight", "The routing weight: minutes, length_m, latency_ms or hops.", "", "paths, trips, summary"),
    _t("unit", "Unit of the costs beside it.", "", "summary, route"),
    _t("edge_count", "Number of edges on the path.", "", "diameter_path"),
    _t("origin_id", "Id of the trip's origin.", "", "od_pairs"),
    _t("destination_id", "Id of the trip's destination.", "", "od_pairs"),
    _t("trip_cost", "Cost of the cheapest trip in the weight's unit; empty where there is no path.", "weight unit",
       "od_pairs"),
    _t("reason", "Why a value is empty or a region is weak, in words.", "", "od_pairs, weak_regions, indices"),
    _t("rank", "Order, 1 = first (nearest, weakest, most critical).", "", "od_pairs, weak_regions, rankings"),
    # ---------------------------------------------------------------- surface, bands, regions
    _t("within_minutes", "Reach band: the area reached within this many minutes (nested: the 60-minute band "
                         "holds the 30-minute one).", "minutes", "reach_bands"),
    _t("from_minutes", "Reach ring: reached in more than this many minutes ...", "minutes", "reach_rings"),
    _t("to_minutes", "... and at most this many (empty for the ring beyond the last band).", "minutes",
       "reach_rings"),
    _t("area_km2", "Area.", "km²", "bands, rings, weak_regions"),
    _t("population", "People (from the population raster or the settlements' population field).", "people",
       "bands, rings, regions, settlements, zones"),
    _t("mean_hub_minutes", "Population-weighted mean of hub_minutes.", "minutes", "weak_regions, zones"),
    _t("join_x", "Easting of the point where the region's cheapest trip joins the network (working CRS).", "m",
       "weak_regions"),
    _t("join_y", "Northing of that point.", "m", "weak_regions"),
    _t("join_minutes", "hub_minutes at that point.", "minutes", "weak_regions"),
    _t("people_behind_edge", "People whose only way to a hub runs over the region's key edge.", "people",
       "weak_regions"),
    _t("settlement_id", "Id of a settlement (from its id field, else its row number from 1).", "",
       "settlements, access_index"),
    _t("zone_id", "Id of a district (from its id field, else its row number from 1).", "", "zones"),
    _t("population_within_<band>", "People within that many minutes of a hub.", "people", "zones, summary"),
    _t("share_within_<band>_pct", "Share of the people within that many minutes of a hub.", "%", "zones"),
    _t("population_beyond", "People beyond the largest band (or unreachable).", "people", "zones, summary"),
    _t("share_beyond_pct", "Share of the people beyond the weak-region threshold.", "%", "zones, map"),
    # ---------------------------------------------------------------- scenarios
    _t("<field>_before", "The field's value today (no change).", "as the field", "scenario layers"),
    _t("<field>_after", "The field's value with the scenario.", "as the field", "scenario layers"),
    _t("<field>_change", "After minus before (negative: faster or less).", "as the field", "scenario layers"),
    # ---------------------------------------------------------------- criticality
    _t("people_cut_off", "People who reach a hub of some kind today and none of that kind with the edge closed, "
                         "summed over kinds.", "people", "link_criticality, scenarios"),
    _t("people_cut_off_<kind>", "people_cut_off for one hub kind.", "people", "link_criticality"),
    _t("nodes_cut_off", "Nodes that lose every hub with the edge closed.", "", "link_criticality"),
    _t("person_minutes_added", "For those who still reach their kind of hub: people times the minutes added, "
                               "summed over kinds.", "person-minutes", "link_criticality"),
    _t("cut_edge", "1 where closing the edge splits the network into more parts.", "", "link_criticality"),
    # ---------------------------------------------------------------- indices and siting
    _t("measure", "The accessibility measure: cumulative, gravity, 2sfca, e2sfca or bfca.", "", "access_index"),
    _t("index", "The measure's value for the settlement (see the measure's definition).", "as the measure",
       "access_index"),
    _t("hubs_within", "Hubs within the catchment time.", "", "access_index"),
    _t("nearest_minutes", "Minutes to the nearest hub, walk legs included.", "minutes", "access_index"),
    _t("site_id", "Id of a chosen site (candidate id).", "", "chosen_sites"),
    _t("order", "Order in which the site was picked (1 = first).", "", "chosen_sites"),
    _t("people_newly_within", "People newly within the threshold thanks to the change.", "people",
       "chosen_sites, scenarios"),
    _t("person_minutes_saved", "Sum over people of the minutes saved.", "person-minutes", "chosen_sites, scenarios"),
    # ---------------------------------------------------------------- tables, rasters, report (planner-ready files)
    _t("network_length_km", "network_length_m in kilometres, rounded to 0.1 km (the tables for people).", "km",
       "settlements.csv, tables.xlsx"),
    _t("nearest_hub_name_<kind>", "Name of the nearest hub of that kind.", "", "settlements.csv, tables.xlsx"),
    _t("hub_kind", "The kind of hub a row's figures are for; 'any' = the nearest hub of whatever kind.", "",
       "<scenario>_settlements.csv, <scenario>_zones.csv"),
    _t("value", "Cell value of a category raster: the hub number 1..n (0 = no hub reachable).", "",
       "nearest_hub.tif raster attribute table, nearest_hub.sld"),
    _t("connection_m", "Straight-line distance from the cell centre to the nearest cable access node (a cable "
                       "carries no travellers, so its reach is this distance).", "m", "connection_m.tif"),
    _t("settlements.csv", "Per settlement: minutes and network km to the nearest hub (and per kind), hub ids and "
                          "names; rounded for reports; line 1 is the caution.", "", "results folder"),
    _t("zones.csv", "Per district: people, shares within each band, people beyond, mean minutes; rounded; "
                    "line 1 is the caution.", "", "results folder"),
    _t("<scenario>_settlements.csv", "Per settlement and hub kind: before, after and change with the scenario.",
       "", "results and comparison folders"),
    _t("<scenario>_zones.csv", "Per district and hub kind: before, after and change with the scenario.", "",
       "results and comparison folders"),
    _t("tables.xlsx", "The tables as a workbook: sheets about (caution, columns), settlements, zones and "
                      "<scenario>_settlements / <scenario>_zones per scenario.", "", "results and comparison folders"),
    _t("report.html", "The printable report: key figures, charts, district table, weak regions, scenario ranking "
                      "and an overview map; one offline file.", "", "results and comparison folders"),
    _t("nearest_hub.sld", "Style for nearest_hub.tif (and nearest_<kind>.sld for each kind's raster): one "
                          "labelled colour per hub.", "", "results folder"),
    _t("NETWORK.edges.parquet", "The edges layer as GeoParquet, one file per layer (build -o NETWORK.parquet "
                                "writes NETWORK.edges.parquet, NETWORK.nodes.parquet, NETWORK.network_issues.parquet).",
       "", "build, check"),
    _t("NETWORK.nodes.parquet", "The nodes layer as GeoParquet.", "", "build"),
    _t("NETWORK.network_issues.parquet", "The network_issues layer as GeoParquet.", "", "build, check"),
)


def lookup(name: str) -> Term | None:
    """The term for a field or key name (exact names first, then the patterns).

    >>> lookup("hub_minutes_clinic").name
    'hub_minutes_<kind>'
    >>> lookup("nearest_hub_name_clinic").name
    'nearest_hub_name_<kind>'
    >>> lookup("nonsense_field") is None
    True
    """
    for t in TERMS:
        if t.name == name:
            return t
    for suffix in ("_before", "_after", "_change"):
        if name.endswith(suffix) and lookup(name[: -len(suffix)]) is not None:
            return next(t for t in TERMS if t.name == f"<field>{suffix}")
    # patterns: the most specific first (the most literal text), so nearest_hub_name_clinic finds
    # nearest_hub_name_<kind>, not nearest_hub_<kind>
    hits = [t for t in TERMS if "<" in t.name and t.pattern.match(name)]
    if not hits:
        return None
    return max(hits, key=lambda t: len(re.sub(r"<[^>]+>", "", t.name)))


def describe(name: str) -> str | None:
    """``meaning (unit)`` for a field, for column descriptions; None when the name is not in the glossary."""
    t = lookup(name)
    if t is None:
        return None
    return f"{t.meaning} ({t.unit})" if t.unit else t.meaning


def markdown() -> str:
    """The glossary as a Markdown table (the README's glossary section is this text)."""
    rows = ["| name | meaning | unit | where |", "|---|---|---|---|"]
    for t in sorted(TERMS, key=lambda t: t.name.lstrip("<")):
        rows.append(f"| `{t.name}` | {t.meaning} | {t.unit} | {t.where} |")
    return "\n".join(rows) + "\n"


def update_readme(path) -> bool:
    """Rewrite the glossary section of the README at ``path``; True when it changed."""
    from pathlib import Path

    p = Path(path)
    text = p.read_text(encoding="utf-8")
    head, _, rest = text.partition(START)
    _, _, tail = rest.partition(END)
    new = f"{head}{START}\n{markdown()}{END}{tail}"
    if new != text:
        p.write_text(new, encoding="utf-8")
    return new != text


if __name__ == "__main__":   # python -m geo_reach.glossary: refresh README.md's glossary section
    import sys
    from pathlib import Path

    readme = Path(__file__).resolve().parents[1] / "README.md"
    print(f"{readme}: {'updated' if update_readme(readme) else 'already current'}", file=sys.stderr)

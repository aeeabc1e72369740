"""The glossary's data: every term geo-reach writes (see :mod:`geo_reach.glossary` for the rules and lookups).

Kept apart from the functions so each module stays short; this module is
data and imports nothing from geo-reach.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["Term", "TERMS", "PARTS", "RENAMED"]


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
    only : str
        ``""`` for what every full run (``geo-reach run`` / ``demo``) writes;
        else when it is written: by one command (``"indices"``), with one
        option (``"build -o NAME.parquet"``) or in one situation (``"a
        scenario that closes links"``).
    """

    name: str
    meaning: str
    unit: str
    where: str
    only: str = ""

    @property
    def pattern(self) -> re.Pattern:
        return self.pattern_for()

    def pattern_for(self, parts: dict | None = None) -> re.Pattern:
        """The name as a regular expression; ``parts`` (``{"kind": ["clinic", ...]}``) limits what a
        ``<part>`` may stand for (any name when a part is not given)."""
        text = re.escape(self.name)
        for part in PARTS:
            values = (parts or {}).get(part)
            alt = "|".join(re.escape(str(v)) for v in values) if values is not None else r"[A-Za-z0-9_\-.]+"
            text = text.replace(re.escape(f"<{part}>"), f"(?:{alt})")
        return re.compile(f"^{text}$")


#: The parts of a name that vary, as written in :attr:`Term.name` (``hub_minutes_<kind>``).
PARTS = ("kind", "band", "scenario", "measure", "step", "layer", "output", "weight")


def _t(name, meaning, unit, where, only=""):
    return Term(name, meaning, unit, where, only)


#: Names earlier versions wrote, and the name that replaced each (outputs never carry the old names;
#: a network file with the nodes' old ``entry`` flag is still read, and said so).
RENAMED = {
    "entry": "joinable",
    "entry_x": "join_x", "entry_y": "join_y", "entry_minutes": "join_minutes",
    "mean_minutes": "mean_hub_minutes",
    "population_weighted_minutes": "mean_hub_minutes",
    "attached": "joined", "ratio": "capacity_per_person",
    "sssp_runs": "searches", "ci95_low": "range_95_low", "ci95_high": "range_95_high",
    "largest_strong_component_nodes": "largest_two_way_component_nodes",
    "rss_power": "fit_error_polynomial", "rss_exponential": "fit_error_exponential",
    "index_to_hub_id": "hub_numbers", "seed_cells": "join_cells",
    "share": "share_pct", "proposal_notes": "notes",
}

_SUM = "summary.json"
_SCEN = "summary.json scenarios.<scenario>"
TERMS: tuple[Term, ...] = (
    # ---------------------------------------------------------------- files of a results folder
    _t("results.gpkg", "The run's layers (network, hubs, reach, weak regions, settlements, districts, scenario "
                       "layers); every field described in its gpkg_data_columns table.", "", "results folder"),
    _t("reach.gpkg", "The surface command's layers: reach_rings, reach_bands, weak_regions, settlements, zones.",
       "", "surface folder", "surface"),
    _t("comparison.gpkg", "The compare command's scenario layers (<scenario>_settlements ...).", "",
       "comparison folder", "compare"),
    _t("summary.json", "Every figure of the run in one file, under the names of this glossary; key 'caution' "
                       "first.", "", "results folder"),
    _t("map.html", "The interactive map: one offline file.", "", "results folder"),
    _t(".geo-reach-results.json", "Hidden list of every file geo-reach wrote in the folder (so that --overwrite "
                                  "replaces only its own results).", "", "results folder"),
    _t("reach_profile.png", "Chart of the reach profile: nodes and network length within each cost step.", "",
       "results folder"),
    _t("<output>.<layer>.sld", "Style for one layer of a GeoPackage (results.edges.sld styles layer edges of "
                               "results.gpkg), for desktop GIS.", "", "results folder"),
    _t("<output>.tif.aux.xml", "The category names of a nearest-hub raster (hub id and name per cell value), "
                               "read by desktop GIS beside the GeoTIFF.", "", "results folder"),
    _t("hub_minutes.tif", "Raster of hub_minutes: minutes from each cell to its nearest hub (walk included).",
       "minutes", "results folder"),
    _t("hub_minutes_<kind>.tif", "Raster of hub_minutes to the nearest hub of that kind.", "minutes",
       "results folder"),
    _t("nearest_hub.tif", "Raster of the nearest hub: cell value = hub number (see hub_numbers), 0 = none.", "",
       "results folder"),
    _t("nearest_hub_<kind>.tif", "Raster of the nearest hub of that kind (hub numbers as in nearest_hub.tif).",
       "", "results folder"),
    _t("hub_minutes_change_<scenario>.tif", "Raster of hub_minutes with the scenario minus today (negative: "
                                            "faster).", "minutes", "results and comparison folders"),
    _t("connection_m.tif", "Raster of connection_m (cable networks).", "m", "results folder",
       "a network with cable lines"),
    _t("connection_m", "Straight-line distance from the cell centre to the nearest cable access node (a cable "
                       "carries no travellers, so its reach is this distance).", "m", "connection_m.tif",
       "a network with cable lines"),
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
    _t("about", "First sheet of tables.xlsx: title, caution, rounding, and every column's unit and meaning.", "",
       "tables.xlsx"),
    _t("report.html", "The printable report: key figures, charts, district table, weak regions, scenario ranking "
                      "and an overview map; one offline file.", "", "results and comparison folders"),
    _t("nearest_hub.sld", "Style for nearest_hub.tif: one labelled colour per hub.", "", "results folder"),
    _t("nearest_hub_<kind>.sld", "Style for nearest_hub_<kind>.tif.", "", "results folder"),
    _t("NETWORK.edges.parquet", "The edges layer as GeoParquet, one file per layer (build -o NETWORK.parquet "
                                "writes NETWORK.edges.parquet, NETWORK.nodes.parquet, NETWORK.network_issues.parquet).",
       "", "build, check", "build -o NAME.parquet"),
    _t("NETWORK.nodes.parquet", "The nodes layer as GeoParquet.", "", "build", "build -o NAME.parquet"),
    _t("NETWORK.network_issues.parquet", "The network_issues layer as GeoParquet.", "", "build, check",
       "build -o NAME.parquet"),
    # ---------------------------------------------------------------- layers
    _t("edges", "Layer: the network's edges (pieces between two nodes), with their lengths, times and source; in "
                "summary.json, the number of edges.", "", "results.gpkg, build output, summary network/metrics"),
    _t("nodes", "Layer: the network's nodes, with their nearest hub and figures; in summary.json, the number of "
                "nodes (in a reach profile step: the mean number of nodes within the step's cost).", "",
       "results.gpkg, build, access and metrics outputs, summary"),
    _t("network_issues", "Layer: spots the builder repaired or found suspect (gaps joined, dangles ...), one "
                         "point each.", "", "results.gpkg, build and check outputs"),
    _t("hubs", "Layer: the hubs with how they join the network and what they serve; in summary.json, the hub "
               "counts (in a scenario's kinds: true where it changes the hubs).", "",
       "results.gpkg, access output, summary"),
    _t("diameter_path", "Layer: the longest of the cheapest trips between two nodes, as one line per edge.", "",
       "results.gpkg, metrics -o"),
    _t("reach_rings", "Layer: disjoint rings of reach (within 30, 30-60, 60-120 minutes, beyond), with people and "
                      "area.", "", "results.gpkg, reach.gpkg"),
    _t("reach_bands", "Layer: nested reach bands (the 60-minute band holds the 30-minute one), per hub and for "
                      "all hubs.", "", "results.gpkg, reach.gpkg"),
    _t("weak_regions", "Layer: places that are badly served (beyond the threshold, behind one link, or with no "
                       "hub), ranked by people; in summary.json the top five.", "", "results.gpkg, summary"),
    _t("settlements", "Layer and table: each settlement's minutes to its nearest hub (and per kind).", "",
       "results.gpkg, settlements.csv, tables.xlsx"),
    _t("zones", "Layer and table: each district's people within each band and beyond.", "",
       "results.gpkg, zones.csv, tables.xlsx"),
    _t("<scenario>_settlements", "Layer and sheet: the settlements before, after and change with the scenario.",
       "", "results.gpkg, comparison.gpkg, tables.xlsx"),
    _t("<scenario>_zones", "Layer and sheet: the districts before, after and change with the scenario.", "",
       "results.gpkg, comparison.gpkg, tables.xlsx"),
    _t("<scenario>_edge_change", "Layer: edges whose hub_cost the scenario changes, before, after and change.",
       "", "results.gpkg, comparison.gpkg"),
    _t("<scenario>_reach_rings", "Layer: the reach rings with the scenario.", "", "results.gpkg, comparison.gpkg"),
    _t("od_pairs", "Layer: origin-destination trips, one line per pair, with their cost.", "", "od -o", "od"),
    _t("link_criticality", "Layer: every link closed in turn, with the people it cuts off and the minutes it adds.",
       "", "criticality -o", "criticality"),
    _t("access_index", "Layer: each settlement's accessibility index per hub kind.", "", "indices -o", "indices"),
    _t("hub_catchments", "Layer: each hub's capacity and the settlements within its catchment.", "",
       "indices -o", "indices"),
    _t("chosen_sites", "Layer: the new hub sites picked, in order.", "", "sites -o", "sites"),
    # ---------------------------------------------------------------- network layers
    _t("edge_id", "Id of an edge (a piece of the network between two nodes); the row number in layer edges.",
       "", "edges, change and criticality layers, weak_regions"),
    _t("from_node", "Node an edge (or the diameter) starts at (its geometry runs from here).", "",
       "edges, diameter_path, summary metrics.diameter"),
    _t("to_node", "Node an edge (or the diameter) ends at.", "", "edges, diameter_path, summary metrics.diameter"),
    _t("mode", "road, rail, cable, or transfer (a walking link between a station and the nearest road).", "",
       "edges"),
    _t("length_m", "Length along the ground (geodesic, on the WGS84 ellipsoid).", "m",
       "edges, od_pairs, diameter_path, summary reach_profile.steps"),
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
    _t("closed", "1 where the link is closed: by a scenario (it stays on the map with its length but carries no "
                 "trip: no minutes, latency or cost on any weight) or by a hazard (in hazard_links; 0 there means "
                 "grade-separated and kept open).", "", "edges of a scenario network, hazard_links",
       "a scenario that closes links, or a hazard"),
    _t("class", "Road class as given in the input (looked up in the class-to-speed table).", "", "edges"),
    _t("speed_kmh", "Speed used for the edge.", "km/h", "edges"),
    _t("node_id", "Id of a node; the row number in layer nodes.", "", "nodes"),
    _t("degree", "Number of edge ends at the node.", "", "nodes"),
    _t("component", "Connected part of the network the node (or hub) is in: 0 = the largest.", "", "nodes, hubs"),
    _t("joinable", "1 where a trip from off the network may join it at this node (road nodes, rail stations, "
                   "cable access nodes).", "", "nodes"),
    _t("kind", "What an issue spot is (gap_joined, dangle ...), what a hub is (clinic, market ...), or which growth "
               "class a reach profile fits (linear, polynomial, exponential).", "",
       "network_issues, hubs, access_index, summary reach_profile.growth"),
    _t("detail", "What was found or repaired, in words, with sizes.", "", "network_issues"),
    # ---------------------------------------------------------------- access
    _t("nearest_hub", "Id of the nearest hub (the cheapest trip).", "", "nodes, settlements"),
    _t("nearest_hub_<kind>", "Id of the nearest hub of that kind.", "", "nodes, settlements"),
    _t("nearest_hub_name", "Name of the nearest hub.", "", "settlements, tables"),
    _t("hub_cost", "Cost of the trip between this place and its nearest hub, in the routing weight's unit "
                   "(see the layer description); empty where no hub is reachable.  On settlements (only when the "
                   "weight is not minutes) the trip is priced and its hub chosen on the weight, walk legs "
                   "included: that hub may differ from nearest_hub, the nearest by minutes.", "weight unit",
       "nodes, edges (cheaper end), settlements"),
    _t("hub_cost_<kind>", "hub_cost to the nearest hub of that kind.", "weight unit", "nodes"),
    _t("hub_minutes", "Minutes of the trip between this place and its nearest hub, walk to and from the network "
                      "included; empty where no hub is reachable.", "minutes", "settlements, rasters"),
    _t("hub_minutes_<kind>", "hub_minutes to the nearest hub of that kind.", "minutes", "settlements"),
    _t("nearest_minutes", "In access_index: hub_minutes to the nearest hub of the row's kind (not only those within "
                          "the catchment), walks included; the same number as the settlements layer's "
                          "hub_minutes_<kind>.", "minutes", "access_index", "indices"),
    _t("nearest_length_m", "nearest_minutes when the indices are computed on length: the shortest trip's length, "
                           "walks included.", "m", "access_index", "indices --weight length_m"),
    _t("network_length_m", "Length of the trip's part on the network (partial edges at both ends included); in "
                           "summary.json, the network's total length.", "m", "settlements, summary network"),
    _t("eccentricity", "Cost of the longest of the cheapest trips from this node (weight unit).", "weight unit",
       "nodes"),
    _t("closeness", "Harmonic closeness: mean of 1/cost over the other nodes (per weight unit).",
       "1/weight unit", "nodes"),
    _t("hub_id", "Id of a hub (from the hubs layer's id field, else its row number from 1).", "",
       "hubs, reach_bands, hub_catchments, chosen_sites"),
    _t("name", "Name as given in the input.", "", "hubs, settlements, zones, chosen_sites"),
    _t("joined", "1 where the hub (or place) joins the network within the largest access distance; in "
                 "summary.json, the number of hubs that do.", "", "hubs, hub_catchments, summary hubs"),
    _t("access_m", "Distance walked off the network to where the trip joins it.", "m", "hubs"),
    _t("served_nodes", "Nodes whose nearest hub this is.", "", "hubs"),
    _t("served_length_m", "Network length whose nearest hub this is (half of each edge to each end).", "m",
       "hubs"),
    _t("isolated", "hubs: 1 where the hub sits in a part of the network with no other hub, cut off from the largest; "
                   "hazard_places: 1 where the place lies outside the hazard and loses every hub of some kind.",
       "", "hubs, hazard_places"),
    # ---------------------------------------------------------------- paths and trips
    _t("path_cost", "Cost of the path in the routing weight's unit.", "weight unit", "diameter_path"),
    _t("weight", "The routing weight: minutes, length_m, latency_ms or hops.", "",
       "diameter_path, od_pairs, summary metrics"),
    _t("unit", "Unit of the costs beside it.", "", "summary metrics"),
    _t("edge_count", "Number of edges on the path.", "", "diameter_path"),
    _t("origin_id", "Id of the trip's origin.", "", "od_pairs", "od"),
    _t("destination_id", "Id of the trip's destination.", "", "od_pairs", "od"),
    _t("trip_cost", "Cost of the cheapest trip in the weight's unit; empty where there is no path.", "weight unit",
       "od_pairs", "od"),
    _t("reason", "Why a value is empty or a region is weak, in words.", "",
       "od_pairs, weak_regions, access_index, summary weak_regions"),
    _t("rank", "Order, 1 = first (nearest, weakest, most critical, best scenario).", "",
       "od_pairs, weak_regions, link_criticality, summary"),
    # ---------------------------------------------------------------- surface, bands, regions
    _t("within_minutes", "Reach band: the area reached within this many minutes (nested: the 60-minute band "
                         "holds the 30-minute one).", "minutes", "reach_bands"),
    _t("from_minutes", "Reach ring: reached in more than this many minutes ...", "minutes", "reach_rings"),
    _t("to_minutes", "... and at most this many (empty for the ring beyond the last band).", "minutes",
       "reach_rings"),
    _t("area_km2", "Area.", "km²", "reach_bands, reach_rings, weak_regions, summary weak_regions"),
    _t("population", "People (from the population raster or the settlements' population field); for a "
                     "single_link weak region, the people behind that one link.", "people",
       "bands, rings, weak_regions, settlements, zones, summary weak_regions"),
    _t("mean_hub_minutes", "Population-weighted mean of hub_minutes (over the people who reach a hub).",
       "minutes", "weak_regions, zones, summary"),
    _t("join_x", "Easting of the point where the region's cheapest trip joins the network (working CRS).", "m",
       "weak_regions"),
    _t("join_y", "Northing of that point.", "m", "weak_regions"),
    _t("join_minutes", "hub_minutes at that point; empty where no hub is reachable.", "minutes", "weak_regions"),
    _t("settlement_id", "Id of a settlement (from its id field, else its row number from 1).", "",
       "settlements, access_index"),
    _t("zone_id", "Id of a district (from its id field, else its row number from 1).", "", "zones"),
    _t("population_within_<band>", "People within that many minutes of a hub.", "people", "zones"),
    _t("share_within_<band>_pct", "Share of the people within that many minutes of a hub.", "%", "zones"),
    _t("population_beyond", "People beyond the largest band (or unreachable).", "people", "zones, summary"),
    _t("share_beyond_pct", "Share of the people beyond the weak-region threshold.", "%", "zones, map"),
    # ---------------------------------------------------------------- scenarios
    _t("<field>_before", "The field's value today (no change).", "as the field", "scenario layers"),
    _t("<field>_after", "The field's value with the scenario.", "as the field", "scenario layers"),
    _t("<field>_change", "After minus before (negative: faster or less).", "as the field", "scenario layers"),
    _t("hub_kind", "The kind of hub a row's figures are for; 'any' = the nearest hub of whatever kind.", "",
       "<scenario>_settlements.csv, <scenario>_zones.csv"),
    # ---------------------------------------------------------------- criticality
    _t("people_cut_off", "People who reach a hub of some kind today and none of that kind with the edge closed "
                         "(or with the scenario), summed over kinds.", "people",
       "link_criticality, summary scenarios and scenario_ranking"),
    _t("people_cut_off_<kind>", "people_cut_off for one hub kind.", "people", "link_criticality", "criticality"),
    _t("nodes_cut_off", "Nodes that lose every hub with the edge closed.", "", "link_criticality", "criticality"),
    _t("person_minutes_added", "For those who still reach their kind of hub: people times the minutes added, "
                               "summed over kinds.", "person-minutes", "link_criticality", "criticality"),
    _t("cut_edge", "1 where closing the edge splits the network into more parts.", "", "link_criticality",
       "criticality"),
    # ---------------------------------------------------------------- indices and siting
    _t("measure", "The accessibility measure: cumulative, gravity, 2sfca, e2sfca or bfca.", "", "access_index",
       "indices"),
    _t("index", "The measure's value for the settlement (see the measure's definition).", "as the measure",
       "access_index", "indices"),
    _t("hubs_within", "Hubs within the catchment time.", "", "access_index", "indices"),
    _t("capacity", "What a hub offers, from the hubs' capacity field (beds, staff ...; 1 per hub without one).",
       "as the input", "hub_catchments", "indices"),
    _t("settlements_within", "Settlements within the hub's catchment time.", "", "hub_catchments", "indices"),
    _t("capacity_per_person", "The hub's capacity divided by the people within its catchment (weighted by "
                              "distance for e2sfca); empty for measures without catchments.",
       "capacity per person", "hub_catchments", "indices"),
    _t("site_id", "Id of a chosen site (candidate id).", "", "chosen_sites", "sites"),
    _t("order", "Order in which the site was picked (1 = first).", "", "chosen_sites", "sites"),
    _t("people_newly_within", "People newly within the threshold thanks to the change (in summary.json: per "
                              "band, keyed by its minutes).", "people", "chosen_sites, summary scenarios"),
    _t("person_minutes_saved", "Sum over people of the minutes saved.", "person-minutes",
       "chosen_sites, summary scenarios and scenario_ranking"),
    _t("person_cost_saved", "Sum over the settlements' people of the hub_cost saved (before minus after), for "
                            "settlements with a hub before and after; given when the routing weight is not "
                            "minutes, and the scenario ranking then orders by it.", "person-weight unit "
                            "(see person_cost_unit)", "summary scenarios and scenario_ranking", "a study routed on a weight other than minutes"),
    _t("person_cost_saved_per_km", "person_cost_saved per km of new or upgraded line.", "person-weight unit per km",
       "scenario_ranking", "a study routed on a weight other than minutes"),
    _t("person_cost_unit", "The unit of person_cost_saved: person-metres, person-links or person-milliseconds.", "",
       "summary scenarios and scenario_ranking", "a study routed on a weight other than minutes"),
    # ---------------------------------------------------------------- tables
    _t("network_length_km", "network_length_m in kilometres, rounded to 0.1 km (the tables for people).", "km",
       "settlements.csv, tables.xlsx"),
    _t("nearest_hub_name_<kind>", "Name of the nearest hub of that kind.", "", "settlements.csv, tables.xlsx"),
    _t("value", "In nearest_hub.tif's attribute table: the cell value, hub number 1..n (0 = no hub reachable). In "
                "summary.json metrics: the figure itself (the diameter's or the mean path's cost).",
       "as the figure", "nearest_hub.tif raster attribute table, summary metrics"),
    # ---------------------------------------------------------------- summary.json
    _t("tool", "The program that wrote the file (geo-reach).", "", _SUM),
    _t("version", "Its version.", "", _SUM),
    _t("caution", "Model estimates only: local surveys, codes and licensed professional practice decide.", "",
       _SUM),
    _t("title", "The study's title.", "", _SUM),
    _t("study", "The study file as read, under the study file's own names (see the README's study file "
                "section).", "", _SUM),
    _t("inputs", "Each input file's SHA-256 checksum, by file name: shows which inputs gave these results.", "",
       _SUM),
    _t("baseline", "The figures today, with no scenario.", "", _SUM),
    _t("network", "What the network holds: nodes, edges, components, lengths, issues, CRS.", "", _SUM),
    _t("components", "Number of connected parts of the network.", "", "summary network, metrics"),
    _t("largest_component_nodes", "Nodes in the largest connected part.", "", "summary network, metrics"),
    _t("largest_two_way_component_nodes", "Nodes in the largest part where every node can reach every other "
                                          "with one-way rules kept.", "", "summary metrics"),
    _t("input_length_m", "Total length of the input lines.", "m", "summary network"),
    _t("issues", "Number of network issues of each kind (keyed by kind, see network_issues).", "",
       "summary network"),
    _t("crs", "The working coordinate reference system (metric).", "", "summary network"),
    _t("metrics", "Network figures on the routing weight.", "", _SUM),
    _t("diameter", "The longest of the cheapest trips between two nodes (value in the weight's unit).", "",
       "summary metrics"),
    _t("searches", "One-source searches the exact diameter took (at most one per node).", "",
       "summary metrics.diameter"),
    _t("mean_path", "Mean cost of the cheapest trips between all pairs of nodes.", "", "summary metrics"),
    _t("range_95_low", "Lower end of the 95% confidence range of a sampled mean (equals the value when exact).",
       "weight unit", "summary metrics.mean_path"),
    _t("range_95_high", "Upper end of that range.", "weight unit", "summary metrics.mean_path"),
    _t("exact", "true where the figure was computed from every node, false where from a sample.", "",
       "summary metrics.mean_path"),
    _t("sources", "Nodes the figure's searches started from.", "", "summary metrics, reach_profile"),
    _t("global_efficiency", "Mean of 1/cost over all pairs of nodes (Latora & Marchiori 2001).",
       "1/weight unit", "summary metrics"),
    _t("global_efficiency_exact", "true where global_efficiency used every node.", "", "summary metrics"),
    _t("reach_profile", "What lies within each cost step of sample sources, and how fast it grows.", "", _SUM),
    _t("steps", "The profile's steps, one per cost limit.", "", "summary reach_profile"),
    _t("cost", "A reach profile step's cost limit; in a route, the trip's cost.", "weight unit",
       "summary reach_profile.steps, route -o"),
    _t("growth", "The growth class the profile fits best.", "", "summary reach_profile"),
    _t("exponent", "Power of the polynomial fit: nodes grow as cost to this power.", "",
       "summary reach_profile.growth"),
    _t("rate", "Rate of the exponential fit: nodes grow as e to the rate times the cost.", "1/weight unit",
       "summary reach_profile.growth"),
    _t("points", "Profile steps the fit used.", "", "summary reach_profile.growth"),
    _t("fit_error_polynomial", "How far the polynomial fit misses: sum of squared differences of log(nodes); the "
                               "smaller error picks the growth kind.", "", "summary reach_profile.growth"),
    _t("fit_error_exponential", "The same for the exponential fit.", "", "summary reach_profile.growth"),
    _t("count", "Number of hubs.", "", "summary hubs"),
    _t("hub_numbers", "The number each hub has in the nearest_hub rasters -> the hub's id.", "", "summary hubs"),
    _t("surface", "The travel-time surface's grid.", "", _SUM),
    _t("cell_m", "Side of a grid cell.", "m", "summary surface"),
    _t("width", "Grid columns.", "", "summary surface"),
    _t("height", "Grid rows.", "", "summary surface"),
    _t("clipped_slopes", "Moves between neighbouring cells steeper than the walking-speed formula's limit "
                         "(walked as at the limit).", "", "summary surface"),
    _t("join_cells", "Cells where the surface's minutes start: around each point where trips join the network "
                     "(road, station, hub) with a hub reachable.", "", "summary surface"),
    _t("impassable_cells", "Cells one cannot walk through (water and other barriers).", "", "summary surface"),
    _t("population_total", "People in the study area.", "people", "summary"),
    _t("population_by_band", "People within each band's minutes of a hub, keyed by the band.", "people",
       "summary"),
    _t("population_unreachable", "People who reach no hub at all.", "people", "summary"),
    _t("by_kind", "The population figures per hub kind, keyed by kind.", "", "summary baseline"),
    _t("rural_access_index", "Share of the people within 2 km of an all-season road (Roberts, Shyam & Rastogi "
                             "2006, World Bank).", "", "summary baseline"),
    _t("share_pct", "The share of the people within the distance.", "%", "summary rural_access_index"),
    _t("population_within", "People within the distance.", "people", "summary rural_access_index"),
    _t("distance_m", "The distance used.", "m", "summary rural_access_index"),
    _t("weak_regions_count", "Number of weak regions (all of them; the list holds the top five).", "",
       "summary baseline"),
    _t("notes", "What the run (or the scenario's run) left out, repaired or could not compute, in words.", "",
       "summary baseline, scenarios"),
    _t("scenarios", "The figures of each scenario, keyed by its name.", "", _SUM),
    _t("description", "The scenario's description from the study file.", "", _SCEN),
    _t("changes", "What the scenario changes, in words.", "", _SCEN),
    _t("largest_component", "The largest connected part before and after the scenario.", "", _SCEN),
    _t("nodes_before", "Nodes in it today.", "", _SCEN),
    _t("nodes_after", "Nodes in it with the scenario.", "", _SCEN),
    _t("same_places", "true where the largest part holds the same places before and after.", "", _SCEN),
    _t("note", "Why a figure is missing, in words.", "", _SCEN, "a scenario that splits the largest part"),
    _t("diameter_change", "Diameter with the scenario minus today.", "weight unit", _SCEN),
    _t("mean_path_change", "Mean path with the scenario minus today.", "weight unit", _SCEN),
    _t("new_or_upgraded_km", "Length of new or upgraded line.", "km", _SCEN),
    _t("changed_anything", "false where the scenario changed nothing in the network or the hubs.", "", _SCEN),
    _t("touches_nothing", "Closure or upgrade layers that touch no link.", "", _SCEN,
       "a scenario whose closure or upgrade misses every link"),
    _t("people_leaving_weak_regions", "People who are in a weak region today and not with the scenario.",
       "people", _SCEN),
    _t("total", "Summed over the hub kinds.", "people", "summary scenarios.<scenario>.people_cut_off"),
    _t("kinds", "Which kinds of change the scenario makes: lines, closure, hubs (true/false), with the layers "
                "added and upgraded.", "", _SCEN),
    _t("lines", "true where the scenario adds lines (in the study file: the line layers).", "", _SCEN),
    _t("closure", "true where the scenario closes links.", "", _SCEN),
    _t("added_layers", "Line layers the scenario adds.", "", _SCEN),
    _t("upgraded", "Ids of the upgraded features, keyed by layer.", "", _SCEN),
    _t("reuse", "How the scenario was computed: what was reused from today's run and what was rerun.", "",
       _SCEN),
    _t("scenario_ranking", "The scenarios ranked by ranked_by.", "", _SUM),
    _t("scenario", "The scenario's name.", "", "summary scenario_ranking"),
    _t("people_newly_within_largest_band", "People newly within the largest band.", "people",
       "summary scenario_ranking"),
    _t("person_minutes_saved_per_km", "person_minutes_saved per km of new or upgraded line.",
       "person-minutes/km", "summary scenario_ranking"),
    _t("ranked_by", "What the ranking sorts by, in words.", "", "summary scenario_ranking"),
    _t("timing", "How long the run took.", "", _SUM),
    # ---------------------------------------------------------------- build report (build --report FILE.json)
    _t("input_features", "Line features read.", "", "build --report", "build --report"),
    _t("removed_duplicate_length_m", "Length of lines dropped as duplicates of others.", "m", "build --report",
       "build --report"),
    _t("dropped_length_m", "Length of features dropped (no geometry, unusable).", "m", "build --report",
       "build --report"),
    _t("trimmed_length_m", "Length cut off overshooting line ends.", "m", "build --report", "build --report"),
    _t("joined_gap_length_m", "Length added (or taken) by moving line ends to join gaps.", "m", "build --report",
       "build --report"),
    _t("transfer_length_m", "Length of the walking links made between stations and roads.", "m",
       "build --report", "build --report"),
    _t("dropped_features", "Features left out, each with its layer, id and reason.", "", "build --report",
       "build --report"),
    _t("default_speeds_used", "Layers whose features without a speed got the mode's default, in words.", "",
       "build --report", "build --report"),
    _t("speed_defaulted_features", "Features whose speed was missing or unreadable and defaulted.", "",
       "build --report", "build --report"),
    _t("multipart_features", "Multi-part features split into their parts.", "", "build --report",
       "build --report"),
    _t("z_m_dropped_features", "Features whose heights or measures (Z, M) were dropped.", "", "build --report",
       "build --report"),
    _t("snap_m", "Line ends closer than this were joined.", "m", "build --report", "build --report"),
    _t("dangle_m", "Dead ends shorter than this are reported.", "m", "build --report", "build --report"),
    _t("edges_by_mode", "Edges per mode (road, rail, cable, transfer).", "", "build --report", "build --report"),
    # ---------------------------------------------------------------- route (route -o ROUTE.geojson)
    _t("edge_ids", "The route's edges in travel order (edge_id).", "", "route -o", "route"),
    _t("reachable", "true where a route was found.", "", "route -o", "route"),
    _t("started", "When the run started (UTC, ISO 8601).", "", "summary timing"),
    _t("baseline_s", "Seconds for today's figures.", "s", "summary timing"),
    _t("scenario_<scenario>_s", "Seconds for one scenario.", "s", "summary timing"),
    _t("total_s", "Seconds for the whole run.", "s", "summary timing"),
    _t("criticality_s", "Seconds for the [criticality] section.", "s", "summary timing",
       "a study with [criticality]"),
    _t("indices_s", "Seconds for the [indices] section.", "s", "summary timing", "a study with [indices]"),
    _t("criticality", "The [criticality] section's figures: links examined, the work, the top links.", "", _SUM,
       "a study with [criticality]"),
    _t("links_examined", "Links closed in turn.", "", "summary criticality", "a study with [criticality]"),
    _t("direction", "Which way trips are priced: to-hub (from a place to its hub) or from-hub.", "",
       "summary criticality, summary indices, study routing"),
    _t("work", "What the criticality search cost, counted in full nearest-hub searches.", "",
       "summary criticality, criticality --json", "criticality"),
    _t("full_searches", "The work done, as a number of full single-kind searches of the network (node settlements "
                        "plus arc and seed scans, divided by those of one full search).", "",
       "summary criticality.work, criticality --json", "criticality"),
    _t("naive_full_searches", "The full searches closing each link and searching again would take: links x "
                              "hub kinds.", "", "summary criticality.work, criticality --json", "criticality"),
    _t("links", "Links examined (in work: the count behind naive_full_searches).", "",
       "summary criticality.work, criticality --json", "criticality"),
    _t("ops", "Basic steps counted: node settlements plus arc and seed scans.", "",
       "summary criticality.work, criticality --json", "criticality"),
    _t("ops_per_full_search", "Basic steps of one full single-kind search (the unit of full_searches).", "",
       "summary criticality.work, criticality --json", "criticality"),
    _t("top", "The most critical links, rank first (the rows of link_criticality).", "",
       "summary criticality, criticality --json", "criticality"),
    _t("indices", "The [indices] section's figures: measures, catchment, rows, the raster written.", "", _SUM,
       "a study with [indices]"),
    _t("measures", "The accessibility measures computed.", "", "summary indices", "a study with [indices]"),
    _t("rows", "Rows of the access_index layer (settlement x measure x hub kind).", "", "summary indices",
       "a study with [indices]"),
    _t("rows_reaching_a_hub", "Rows whose settlement reaches a hub of the row's kind within the catchment, per "
                              "measure.", "", "summary indices", "a study with [indices]"),
    _t("raster", "The raster file the section wrote.", "", "summary indices", "a study with [indices] and a surface"),
    _t("hub_kinds_within", "Band of hub_kinds_within.tif: hub kinds with a hub within the catchment minutes.",
       "hub kinds", "hub_kinds_within.tif", "a study with [indices] and a surface"),
    # ---------------------------------------------------------------- study sections [criticality], [indices]
    _t("person_m_added", "person_minutes_added when the study routes on length: people times the metres added.",
       "person-metres", "link_criticality",
       "a study routed on length_m with [criticality]"),
    _t("person_hops_added", "person_minutes_added when the study routes on hops: people times the hops added.",
       "person-hops", "link_criticality",
       "a study routed on hops with [criticality]"),
    _t("person_ms_added", "person_minutes_added when the study routes on latency: people times the ms added.",
       "person-ms", "link_criticality",
       "a study routed on latency_ms with [criticality]"),
    _t("grade_separated", "1 where the link is grade-separated (a non-zero level: a bridge or tunnel) and kept "
                          "open.", "", "hazard_links",
       "criticality --hazard, or a [criticality] hazard"),
    _t("place_id", "The place: a settlement id, or a node id when no settlements are given.", "", "hazard_places",
       "criticality --hazard, or a [criticality] hazard"),
    _t("people", "People at the place (1 per node when no settlements are given).", "people",
       "hazard_places, hazard_districts",
       "criticality --hazard, or a [criticality] hazard"),
    _t("in_hazard", "1 where the place lies inside the hazard.", "", "hazard_places",
       "criticality --hazard, or a [criticality] hazard"),
    _t("<kind>_minutes_before", "Minutes to the nearest hub of that kind before the hazard closes its links "
                                "(<kind>_m_ or _hops_ when the study routes on another weight).", "minutes",
       "hazard_places",
       "criticality --hazard, or a [criticality] hazard"),
    _t("<kind>_minutes_after", "The same with the hazard's links closed; empty = no hub of that kind reached.",
       "minutes", "hazard_places",
       "criticality --hazard, or a [criticality] hazard"),
    _t("cut_off_<kind>", "1 where the place loses every hub of that kind when the hazard closes its links.", "",
       "hazard_places",
       "criticality --hazard, or a [criticality] hazard"),
    _t("cut_off_in_place", "1 where the place lies inside the hazard and loses every hub of some kind.", "",
       "hazard_places",
       "criticality --hazard, or a [criticality] hazard"),
    _t("zone", "The district the place (or row) is in.", "", "hazard_places, hazard_districts",
       "criticality --hazard, or a [criticality] hazard"),
    _t("people_in_place", "People whose own place lies inside the hazard.", "people", "hazard_districts, summary",
       "criticality --hazard, or a [criticality] hazard"),
    _t("people_isolated", "People outside the hazard who lose every hub of some kind.", "people",
       "hazard_districts, summary",
       "criticality --hazard, or a [criticality] hazard"),
    _t("people_in_place_cut_off", "People inside the hazard who also lose every hub of some kind.", "people",
       "hazard_districts, summary",
       "criticality --hazard, or a [criticality] hazard"),
    _t("people_isolated_<kind>", "people_isolated for one hub kind.", "people", "hazard_districts",
       "criticality --hazard, or a [criticality] hazard"),
    _t("people_in_place_cut_off_<kind>", "people_in_place_cut_off for one hub kind.", "people", "hazard_districts",
       "criticality --hazard, or a [criticality] hazard"),
    _t("hazard_places.csv", "The hazard_places table ([criticality] with a hazard); line 1 is the caution.", "",
       "results folder",
       "criticality --hazard, or a [criticality] hazard"),
    _t("hazard_districts.csv", "The hazard_districts table (a hazard and [zones]); line 1 is the caution.", "",
       "results folder",
       "criticality --hazard, or a [criticality] hazard"),
    _t("link_criticality.csv", "The link_criticality table, rounded; line 1 is the caution.", "", "results folder",
       "a study with [criticality]"),
    _t("access_index.csv", "The access_index table, rounded; line 1 is the caution.", "", "results folder",
       "a study with [indices]"),
    _t("hub_kinds_within.tif", "Raster: per cell, how many hub kinds have a hub within the [indices] catchment "
                               "(within_minutes), read from each kind's travel-time surface (0 or 1 without kinds); "
                               "empty outside the surface.", "hub kinds", "results folder",
       "a study with [indices] and a surface"),
)

"""Travel-time surface: minutes from every grid cell to the nearest hub.

The hybrid model: a trip walks across the friction surface to the network,
joins it at a road (anywhere) or a rail station, and rides the network to
the nearest hub; or it walks straight to a hub.  :func:`compute_surface`
builds the friction raster (:mod:`.friction`), the entry points
(:mod:`.seeding`: road samples, stations and, given the hubs, the hubs
themselves and travel along each hub's own edge), seeds the grid at the
points' exact positions with the walk to the cell centres added, and runs the
accumulation (:mod:`.accumulate`, 16 neighbours by default).  The per-node
network costs come from the routing core and are an input here.

Contract.  ``minutes`` at a cell is the cheapest trip between the cell
*centre* and a hub: the walk on the move graph to a cell centre next to an
entry point, the straight walk from that centre to the point, then the
network (or the walk straight to the hub).  With no friction inputs it
exceeds the true cheapest trip by at most the move set's bound on the walk
(2.75 % for 16 neighbours) plus the sampling of the roads (``spacing_m``).
A hub's own cell costs at most the walk of half a cell diagonal.  Values at
exact points (settlements) are read with :func:`minutes_at_points`.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import CRSError, OptionError
from .accumulate import DIRECTIONS, READ_REACH, accumulate
from .pointwalk import minutes_at_points as _read_at
from .friction import SLOPE_LIMIT, count_steep_moves, flat_speed_kmh
from .seeding import EntryPoints, HubLegs, entry_points, grid_coordinates, nearest_edge_points, seed_cells

__all__ = ["SurfaceResult", "compute_surface", "hub_of_entry", "minutes_at_points"]


@dataclass(frozen=True)
class SurfaceResult:
    """A travel-time surface on a grid.

    Attributes
    ----------
    grid : Grid
    minutes : ndarray of float64, shape ``grid.shape``
        Minutes between the cell and its nearest hub (walk + network); NaN =
        no hub reachable.
    nearest_hub : ndarray of int32, shape ``grid.shape``
        1-based hub number (``node_hub + 1``) of that hub; 0 = none.
    entry_node : ndarray of int64, shape ``grid.shape``
        The network node the cell's trip passes through first after joining
        the network; -1 = none (no hub, or the trip reaches its hub without
        passing a node: straight to the hub, or along the hub's own edge).
    flat_kmh : ndarray of float64, shape ``grid.shape``
        The friction raster used (flat-ground speed, km/h; 0 = impassable).
    direction : str
    clipped_slopes : int
        Moves (pairs of cells, of the move set used) whose slope was beyond
        ``slope_limit`` and clipped.
    seed_cells : int
        Cells seeded from an entry point (road sample, station or hub) with a
        hub reachable: each point seeds its own cell and the eight around it.
    impassable_cells : int
    landcover_nodata_cells : int
        Cells without a land-cover class (walked at ``walk_kmh``).
    terrain_missing_cells : int
        Cells without elevation (moves touching them costed as flat).
    neighbours : int
        The move set (8 or 16).
    hub_cells : int
        Cells whose trip reaches its hub without passing a node (straight to
        the hub or along the hub's own edge).
    terrain : ndarray of float64 or None
        The elevation used (for :func:`minutes_at_points`).
    slope_limit : float
    entry_args : dict or None
        What the entry points were made from (network, node costs, spacing,
        hubs and legs), so :func:`minutes_at_points` can rebuild them instead
        of the result holding millions of points.
    """

    grid: object
    minutes: np.ndarray
    nearest_hub: np.ndarray
    entry_node: np.ndarray
    flat_kmh: np.ndarray
    direction: str
    clipped_slopes: int
    seed_cells: int
    impassable_cells: int
    landcover_nodata_cells: int
    terrain_missing_cells: int
    neighbours: int = 16
    hub_cells: int = 0
    terrain: np.ndarray | None = None
    slope_limit: float = SLOPE_LIMIT
    entry_args: dict | None = field(default=None, repr=False, compare=False)


def hub_of_entry(entry_node: np.ndarray, node_hub: np.ndarray) -> np.ndarray:
    """1-based hub number behind each entry node (0 where the node is -1 or has no hub)."""
    node_hub = np.asarray(node_hub, dtype=np.int64)
    en = np.asarray(entry_node, dtype=np.int64)
    out = np.zeros(en.shape, dtype=np.int32)
    ok = en >= 0
    h = node_hub[en[ok]]
    out[ok] = np.where(h >= 0, h + 1, 0)
    return out


def _hub_inputs(network, node_hub, hub_xy, hub_legs, walk_kmh, max_access_m):
    """Hub positions and their part-way join legs, numbered as ``node_hub`` (see :func:`compute_surface`)."""
    from .attach import Attachment, attach_points

    if hub_xy is None and isinstance(hub_legs, Attachment):
        hub_xy = hub_legs.point_xy
    if hub_xy is None:
        if hub_legs is not None:
            raise OptionError("hub_legs given without hub_xy; give the hub positions too")
        return None, None
    hub_xy = np.asarray(hub_xy, dtype=np.float64)
    if hub_xy.ndim != 2 or hub_xy.shape[1] != 2:
        raise OptionError(f"hub_xy has shape {hub_xy.shape}; expected (n_hubs, 2)")
    if len(node_hub) and node_hub.max(initial=-1) >= len(hub_xy):
        raise OptionError(f"node_hub names hub {int(node_hub.max())} but hub_xy holds {len(hub_xy)} hubs; "
                          "number both the same way")
    given = np.nonzero(np.isfinite(hub_xy).all(axis=1))[0]
    if hub_legs is None:
        att = attach_points(network, hub_xy[given], "minutes", max_access_m=max_access_m, walk_kmh=walk_kmh)
        hub_legs = HubLegs.from_attachment(att, hub_index=given)
    elif isinstance(hub_legs, Attachment):
        if hub_legs.n_points != len(hub_xy):
            raise OptionError(f"hub_legs attaches {hub_legs.n_points} points, hub_xy holds {len(hub_xy)}")
        hub_legs = HubLegs.from_attachment(hub_legs)
    elif not isinstance(hub_legs, HubLegs):
        raise OptionError("hub_legs must be an Attachment of the hubs or a HubLegs")
    keep = np.isin(hub_legs.hub, given)      # legs of hubs not on this surface (NaN rows) are dropped
    return hub_xy, HubLegs(hub_legs.hub[keep], hub_legs.edge[keep], hub_legs.fraction[keep],
                           hub_legs.minutes[keep])


def compute_surface(network, node_cost, node_hub, grid, walk_kmh: float = 5.0, terrain=None, landcover=None,
                    landcover_speeds=None, barriers=None, barrier_classes=(), direction: str = "to-hub",
                    slope_limit: float = SLOPE_LIMIT, spacing_m: float | None = None, neighbours: int = 16,
                    hub_xy=None, hub_legs=None, max_access_m: float = 5000.0) -> SurfaceResult:
    """Minutes from every cell to its nearest hub over ground and network.

    Parameters
    ----------
    network : Network
        In the grid's CRS.
    node_cost : ndarray of float64, shape (n_nodes,)
        Network minutes between each node and its nearest hub, in the trip's
        direction (node to hub for ``"to-hub"``), including the hub's own walk
        leg, as :func:`~.routing.nearest_hub` gives; NaN = no hub reachable.
    node_hub : ndarray of int, shape (n_nodes,)
        That hub, as a 0-based position in the hub list; negative = none.
    grid : Grid
    walk_kmh : float, default 5
        Walking speed on flat open ground, km/h.
    terrain : ndarray of float64, shape ``grid.shape``, optional
        Elevation, metres (NaN = unknown); enables Tobler's slope model.
    landcover : ndarray of int, shape ``grid.shape``, optional
        Land-cover class per cell (-1 = no data, walked at ``walk_kmh``).
    landcover_speeds : mapping of int to float, optional
        Flat-ground speed per class, km/h; 0 = impassable.
    barriers : geometries or GeoDataFrame, optional
        Impassable areas (every touched cell is blocked).
    barrier_classes : iterable of int
        Land-cover classes that are impassable.
    direction : {"to-hub", "from-hub"}
        Trip from the place to the hub, or from the hub out to the place.
    slope_limit : float
        Slopes steeper than this (rise/run) are clipped.
    spacing_m : float, optional
        Sample spacing along roads, metres; default ``grid.cell_m / 2``.
    neighbours : {16, 8}
        The move set of the accumulation (see :mod:`.accumulate`).
    hub_xy : ndarray of float, shape (n_hubs, 2), optional
        Hub positions in the working CRS (metres), numbered as ``node_hub``;
        rows of NaN are not hubs of this surface (e.g. hubs of another kind).
        Each hub becomes a seed of cost 0 (walking straight to it), and the
        samples on the edges it joins are costed through its join point.
        Without it the surface is seeded from the network alone.
    hub_legs : Attachment or HubLegs, optional
        The hubs' join legs.  Default: ``attach_points(network, hub_xy,
        "minutes", max_access_m=max_access_m, walk_kmh=walk_kmh)``, the call
        the routing makes for ``node_cost``, so both price a hub's leg the
        same; pass the routing's own attachment (points numbered as
        ``hub_xy``) when it was made differently.
    max_access_m : float, default 5000
        Largest hub access distance, metres, for the default ``hub_legs``.

    Returns
    -------
    SurfaceResult

    Raises
    ------
    CRSError
        The network and grid CRSs differ.
    OptionError
        Arrays of the wrong shape, bad direction, speeds, spacing or neighbours.
    InputError
        A land-cover class missing from the speed table.

    Notes
    -----
    Seeds sit at the entry points' exact positions (:func:`~.seeding.seed_cells`):
    each point seeds its own cell centre and the eight around it with its
    cost plus the straight walk to the centre, costed on the friction
    surface as a move is.  Memory about 128 bytes per cell at peak (see
    :data:`~geo_reach.ingest.rasters.SURFACE_BYTES_PER_CELL`).
    """
    if direction not in DIRECTIONS:
        raise OptionError(f"unknown direction '{direction}'; choose one of {', '.join(DIRECTIONS)}")
    if network.crs is not None and grid.crs is not None and not network.crs.equals(grid.crs):
        raise CRSError(f"network CRS {network.crs.to_string()} differs from the grid's {grid.crs.to_string()}; "
                       "make the grid in the network's CRS")
    node_hub = np.asarray(node_hub)
    if node_hub.shape != (network.n_nodes,):
        raise OptionError(f"node_hub has shape {node_hub.shape}; expected one value per node ({network.n_nodes})")
    for name, arr in (("terrain", terrain), ("landcover", landcover)):
        if arr is not None and np.shape(arr) != grid.shape:
            raise OptionError(f"{name} raster has shape {np.shape(arr)}, grid is {grid.shape}; "
                              "resample it onto the grid first")
    if isinstance(neighbours, bool) or neighbours not in (8, 16):
        raise OptionError(f"neighbours {neighbours!r}: choose 8 or 16", key="neighbours")
    hub_xy, hub_legs = _hub_inputs(network, node_hub, hub_xy, hub_legs, walk_kmh, max_access_m)
    fr = flat_speed_kmh(grid, walk_kmh, landcover=landcover, landcover_speeds=landcover_speeds,
                        barriers=barriers, barrier_classes=barrier_classes)
    spacing = grid.cell_m / 2.0 if spacing_m is None else float(spacing_m)
    if spacing > grid.cell_m / 2.0 + 1e-9:
        raise OptionError(f"sample spacing {spacing:g} m is above half the cell size ({grid.cell_m / 2:g} m); "
                          "roads could skip cells")
    pts = entry_points(network, node_cost, spacing, direction, node_hub=node_hub, hub_xy=hub_xy, hub_legs=hub_legs)
    elev = None if terrain is None else np.asarray(terrain, dtype=np.float64)
    seeds = seed_cells(pts, grid, fr.kmh, elevation=elev, direction=direction, slope_limit=slope_limit)
    acc = accumulate(fr.kmh, seeds.minutes, grid.cell_m, seed_label=seeds.point + 1, elevation=elev,
                     direction=direction, slope_limit=slope_limit, neighbours=neighbours)
    point = acc.label - 1
    has = point >= 0
    p = np.maximum(point, 0)
    entry = np.where(has, pts.via_node[p], -1) if len(pts) else np.full(grid.shape, -1, np.int64)
    hub = np.where(has, pts.hub[p], -1) if len(pts) else np.full(grid.shape, -1, np.int64)
    nearest = np.where(hub >= 0, hub + 1, 0).astype(np.int32)
    clipped = 0 if elev is None else count_steep_moves(elev, grid.cell_m, slope_limit, passable=fr.kmh > 0,
                                                       neighbours=neighbours)
    return SurfaceResult(
        grid=grid, minutes=acc.minutes, nearest_hub=nearest, entry_node=entry.astype(np.int64, copy=False),
        flat_kmh=fr.kmh, direction=direction, clipped_slopes=clipped,
        seed_cells=int(np.isfinite(seeds.minutes).sum()), impassable_cells=fr.impassable_cells,
        landcover_nodata_cells=fr.landcover_nodata_cells,
        terrain_missing_cells=0 if elev is None else int(np.isnan(elev).sum()),
        neighbours=int(neighbours), hub_cells=int((has & (entry < 0) & (hub >= 0)).sum()),
        terrain=elev, slope_limit=float(slope_limit),
        entry_args=dict(network=network, node_cost=node_cost, spacing_m=spacing, direction=direction,
                        node_hub=node_hub, hub_xy=hub_xy, hub_legs=hub_legs),
    )


def minutes_at_points(surface: SurfaceResult, x, y):
    """Minutes and nearest hub at exact points (settlements, say), in the surface's own model.

    A point's trip is the cheapest of: walking straight to a nearby cell
    centre (its own cell's or one of the 24 up to two rows and columns
    away) and going on with that cell's trip; or walking straight to an
    entry point lying in one of those cells and going on over the network
    from there: the road samples, stations and hubs the surface was seeded
    from, and the nearest point of every road near the point (where a
    straight walk meets it), costed by the same formulas.  The walks are costed as the seeds' walks are, on the
    surface's friction and terrain (:func:`~.pointwalk.minutes_at_points`),
    so a point at a hub reads 0 and a point on a road reads the road's cost.

    Parameters
    ----------
    surface : SurfaceResult
        From :func:`compute_surface` (its ``entry_args`` rebuild the entry
        points: a second or two on a network of 300,000 edges).
    x, y : array_like of float, shape (n,)
        Working CRS, metres.

    Returns
    -------
    minutes : ndarray of float64, shape (n,)
        NaN where nothing around the point reaches a hub, or outside the grid.
    nearest_hub : ndarray of int32, shape (n,)
        1-based hub number; 0 = none.
    entry_node : ndarray of int64, shape (n,)
        The node the trip passes through first (-1 = none, or none passed).
    """
    g = surface.grid
    col, row = grid_coordinates(g, x, y)
    if surface.entry_args is not None:
        a = surface.entry_args
        kw = dict(node_hub=a["node_hub"], hub_legs=a["hub_legs"])
        sampled = entry_points(a["network"], a["node_cost"], a["spacing_m"], a["direction"], hub_xy=a["hub_xy"], **kw)
        xy = np.column_stack([np.ravel(x), np.ravel(y)]).astype(np.float64)
        near = nearest_edge_points(a["network"], a["node_cost"], xy[np.isfinite(xy).all(axis=1)],
                                   (READ_REACH + 1) * g.cell_m * np.sqrt(2.0), a["direction"], **kw)
        pts = EntryPoints(*(np.concatenate([getattr(sampled, k), getattr(near, k)])
                            for k in ("x", "y", "minutes", "via_node", "edge", "hub")))
        scol, srow = grid_coordinates(g, pts.x, pts.y)
        seeds = dict(seed_col=scol, seed_row=srow, seed_minutes=pts.minutes)
    else:
        pts, seeds = None, {}
    m, cell, seed = _read_at(surface.minutes, surface.flat_kmh, g.cell_m, col, row, elevation=surface.terrain,
                             direction=surface.direction, slope_limit=surface.slope_limit, **seeds)
    c = np.maximum(cell, 0)
    hub = np.where(cell >= 0, surface.nearest_hub.ravel()[c], 0).astype(np.int32)
    node = np.where(cell >= 0, surface.entry_node.ravel()[c], -1).astype(np.int64)
    if pts is not None:
        direct = seed >= 0
        q = seed[direct]
        hub[direct] = np.where(pts.hub[q] >= 0, pts.hub[q] + 1, 0)
        node[direct] = pts.via_node[q]
    ok = np.isfinite(m)
    return m, np.where(ok, hub, 0).astype(np.int32), np.where(ok, node, -1).astype(np.int64)

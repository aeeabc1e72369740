"""Travel-time surface: minutes from every grid cell to the nearest hub.

The hybrid model: a trip walks across the friction surface to the network,
joins it at a road (anywhere) or a rail station, and rides the network to
the nearest hub.  :func:`compute_surface` builds the friction raster
(:mod:`.friction`), the network seeds (:mod:`.seeding`) and runs the
accumulation (:mod:`.accumulate`).  The per-node network costs come from the
routing core and are an input here.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CRSError, OptionError
from .accumulate import DIRECTIONS, accumulate
from .friction import SLOPE_LIMIT, count_steep_moves, flat_speed_kmh
from .seeding import entry_points, seed_raster

__all__ = ["SurfaceResult", "compute_surface", "hub_of_entry"]


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
        the network; -1 = none.
    flat_kmh : ndarray of float64, shape ``grid.shape``
        The friction raster used (flat-ground speed, km/h; 0 = impassable).
    direction : str
    clipped_slopes : int
        Neighbour pairs whose slope was beyond ``slope_limit`` and clipped.
    seed_cells : int
        Cells holding a network entry point with a hub reachable.
    impassable_cells : int
    landcover_nodata_cells : int
        Cells without a land-cover class (walked at ``walk_kmh``).
    terrain_missing_cells : int
        Cells without elevation (moves touching them costed as flat).
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


def hub_of_entry(entry_node: np.ndarray, node_hub: np.ndarray) -> np.ndarray:
    """1-based hub number behind each entry node (0 where the node is -1 or has no hub)."""
    node_hub = np.asarray(node_hub, dtype=np.int64)
    en = np.asarray(entry_node, dtype=np.int64)
    out = np.zeros(en.shape, dtype=np.int32)
    ok = en >= 0
    h = node_hub[en[ok]]
    out[ok] = np.where(h >= 0, h + 1, 0)
    return out


def compute_surface(network, node_cost, node_hub, grid, walk_kmh: float = 5.0, terrain=None, landcover=None,
                    landcover_speeds=None, barriers=None, barrier_classes=(), direction: str = "to-hub",
                    slope_limit: float = SLOPE_LIMIT, spacing_m: float | None = None) -> SurfaceResult:
    """Minutes from every cell to its nearest hub over ground and network.

    Parameters
    ----------
    network : Network
        In the grid's CRS.
    node_cost : ndarray of float64, shape (n_nodes,)
        Network minutes between each node and its nearest hub, in the trip's
        direction (node to hub for ``"to-hub"``); NaN = no hub reachable.
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

    Returns
    -------
    SurfaceResult

    Raises
    ------
    CRSError
        The network and grid CRSs differ.
    OptionError
        Arrays of the wrong shape, bad direction, speeds or spacing.
    InputError
        A land-cover class missing from the speed table.

    Notes
    -----
    Memory about 128 bytes per cell at peak (see
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
    fr = flat_speed_kmh(grid, walk_kmh, landcover=landcover, landcover_speeds=landcover_speeds,
                        barriers=barriers, barrier_classes=barrier_classes)
    spacing = grid.cell_m / 2.0 if spacing_m is None else float(spacing_m)
    if spacing > grid.cell_m / 2.0 + 1e-9:
        raise OptionError(f"sample spacing {spacing:g} m is above half the cell size ({grid.cell_m / 2:g} m); "
                          "roads could skip cells")
    pts = entry_points(network, node_cost, spacing, direction)
    seeds = seed_raster(pts, grid)
    label = np.where(seeds.via_node >= 0, seeds.via_node + 1, 0)
    elev = None if terrain is None else np.asarray(terrain, dtype=np.float64)
    acc = accumulate(fr.kmh, seeds.minutes, grid.cell_m, seed_label=label, elevation=elev,
                     direction=direction, slope_limit=slope_limit)
    entry = acc.label - 1
    clipped = 0 if elev is None else count_steep_moves(elev, grid.cell_m, slope_limit, passable=fr.kmh > 0)
    return SurfaceResult(
        grid=grid, minutes=acc.minutes, nearest_hub=hub_of_entry(entry, node_hub), entry_node=entry,
        flat_kmh=fr.kmh, direction=direction, clipped_slopes=clipped,
        seed_cells=int(np.isfinite(seeds.minutes).sum()), impassable_cells=fr.impassable_cells,
        landcover_nodata_cells=fr.landcover_nodata_cells,
        terrain_missing_cells=0 if elev is None else int(np.isnan(elev).sum()),
    )

"""A study's inputs, read once: line layer specs, the network, hubs, settlements, the grid and rasters.

Everything here turns what a :class:`~geo_reach.study.Study` names into the
objects the analysis steps take, with one-line errors naming the file, layer,
feature and the study key.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import InputError, where
from ..network.build import BuildResult, LayerSpec, build_network
from ..study import Study

__all__ = ["Hubs", "layer_specs", "build_or_read", "read_hubs", "merge_hubs", "read_settlements",
           "settlement_population", "study_grid", "load_rasters", "read_friction", "friction_for_points", "layer_ref"]


def layer_ref(study: Study, path: str, layer: str | None) -> str:
    """``path[:layer]`` with ``path`` resolved against the study's folder."""
    p = study.resolve(path)
    return f"{p}:{layer}" if layer else str(p)


def layer_specs(study: Study, tables=None) -> list[LayerSpec]:
    """LayerSpecs for ``[[lines]]`` tables (the study's own by default)."""
    out = []
    for t in (tables if tables is not None else study.lines):
        stations = None
        if t.get("stations"):
            stations = layer_ref(study, t["stations"], t.get("stations_layer"))
        out.append(LayerSpec(
            source=layer_ref(study, t["path"], t.get("layer")), mode=t.get("mode", "road"), name=t.get("name"),
            speed_field=t.get("speed_field"), class_field=t.get("class_field"), class_speeds=t.get("class_speeds"),
            speed_kmh=t.get("speed_kmh"), oneway_field=t.get("oneway_field"), level_field=t.get("level_field"),
            all_season_field=t.get("all_season_field"), access_points=stations,
            boarding_minutes=float(t.get("boarding_minutes", 0.0)), assume_crs=t.get("assume_crs")))
    return out


def build_or_read(study: Study, specs) -> BuildResult:
    """Build the network from the line layers, or read the prebuilt one the study names."""
    if not study.prebuilt:
        return build_network(specs, study.build)
    import geopandas as gpd

    from ..ingest.layers import list_layers, read_frame
    from ..network.io import read_network

    path = study.resolve(study.prebuilt)
    notes: list[str] = []
    net = read_network(path, study.routing.weight, notes)
    issues = read_frame(path, "network_issues") if "network_issues" in list_layers(path) else None
    if issues is None:
        issues = gpd.GeoDataFrame({"kind": [], "detail": [], "src_layer": [], "src_fid": []}, geometry=[], crs=net.crs)
    kinds = issues["kind"].value_counts().to_dict() if len(issues) else {}
    report = {"nodes": net.n_nodes, "edges": net.n_edges, "components": net.n_components,
              "largest_component_nodes": int((net.component == 0).sum()) if net.n_nodes else 0,
              "input_length_m": None, "network_length_m": float(net.edge_length_m.sum()),
              "issues": {k: int(v) for k, v in kinds.items()}, "crs": net.crs.to_string() if net.crs else None,
              "notes": notes}
    return BuildResult(net, issues.reset_index(drop=True), report)


@dataclass
class Hubs:
    """Hub points in the working CRS: ids, kinds, names, and the frame written as the ``hubs`` layer."""

    xy: np.ndarray
    ids: np.ndarray
    kinds: np.ndarray | None
    frame: object  # GeoDataFrame in the working CRS, one row per hub point
    notes: list = field(default_factory=list)

    @property
    def names(self) -> np.ndarray:
        """Each hub's name (its id as text where the layer has no name field)."""
        if "name" in self.frame.columns:
            return self.frame["name"].astype(str).to_numpy(object)
        return np.array([str(i) for i in self.ids], dtype=object)


def read_hubs(study: Study, table: dict, crs) -> Hubs:
    """Read a hubs table (``[hubs]`` or a scenario's ``add_hubs``), as every command reads hubs.

    Ids are the ``id_field`` values (duplicates refused) or the row number
    from 1; a multi-point hub gives one point per part sharing its id.
    """
    import geopandas as gpd
    import shapely

    from ..ingest.points import read_points

    pts = read_points(layer_ref(study, table["path"], table.get("layer")), crs, id_field=table.get("id_field"),
                      kind_field=table.get("kind_field"), what="hubs", assume_crs=table.get("assume_crs"))
    ints = len(pts.ids) and all(isinstance(v, (int, np.integer)) for v in pts.ids)
    data = {"hub_id": pts.ids.astype(np.int64) if ints else pts.ids}
    nf = table.get("name_field") or ("name" if "name" in pts.frame.columns else None)
    if nf:
        if nf not in pts.frame.columns:
            raise InputError(f"{pts.label}has no field '{nf}' for the hub names; check hub_name_field",
                             key="hub_name_field")
        data["name"] = pts.frame[nf].astype(str).to_numpy(object)
    data["kind"] = pts.kinds if pts.kinds is not None else np.full(len(pts.ids), "hub", object)
    frame = gpd.GeoDataFrame(data, geometry=shapely.points(pts.xy), crs=crs)
    return Hubs(pts.xy, pts.ids, pts.kinds, frame, list(pts.notes))


def merge_hubs(a: Hubs, b: Hubs | None, remove=()) -> Hubs:
    """The hubs ``a`` plus ``b`` minus the ids in ``remove`` (a scenario's hub changes)."""
    import geopandas as gpd
    import shapely

    frame = a.frame if b is None else gpd.GeoDataFrame(pd.concat([a.frame, b.frame], ignore_index=True),
                                                        crs=a.frame.crs)
    keep = ~frame["hub_id"].astype(str).isin([str(r) for r in remove]).to_numpy()
    frame = frame[keep].reset_index(drop=True)
    if frame["hub_id"].duplicated().any():
        raise InputError(f"hub id {frame['hub_id'][frame['hub_id'].duplicated()].iloc[0]!r} is used twice "
                         "after adding the scenario's hubs; ids must be unique")
    kinds = frame["kind"].to_numpy(object) if a.kinds is not None else None
    return Hubs(shapely.get_coordinates(frame.geometry.values), frame["hub_id"].to_numpy(object), kinds, frame)


def read_settlements(study: Study, crs):
    """The study's settlement points in ``crs`` with a numeric ``population`` column.

    Raises
    ------
    InputError
        The population field is missing or a value is negative or not a
        number (named with file, layer, feature, field and value).
    """
    from ..ingest.layers import parse_layer_ref, read_layer

    t = study.settlements
    ref = parse_layer_ref(layer_ref(study, t["path"], t.get("layer")))
    gdf = read_layer(ref, "points").to_crs(crs)
    pf = t["population_field"]
    if pf not in gdf.columns:
        raise InputError(f"{where(ref.path, ref.layer)}has no field '{pf}' for the population; check "
                         f"population_field (fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))})",
                         key="population_field")
    raw = gdf[pf]
    pop = pd.to_numeric(raw, errors="coerce")
    bad = (raw.notna() & pop.isna()) | ~np.isfinite(pop.fillna(0.0))
    if bad.any():
        fid = gdf.index[bad.to_numpy()][0]
        raise InputError(f"{where(ref.path, ref.layer, fid, pf)}population {raw[fid]!r} is not a finite number; "
                         "give a number of people (empty counts as 0)")
    if (pop < 0).any():
        fid = gdf.index[(pop < 0).to_numpy()][0]
        raise InputError(f"{where(ref.path, ref.layer, fid, pf)}negative population {pop[fid]:g}; fix the value")
    return gdf.assign(population=pop.fillna(0.0).to_numpy(float))


def settlement_population(study: Study, grid) -> np.ndarray:
    """People per grid cell from the settlement points (a settlement's people in its cell)."""
    import shapely

    s = read_settlements(study, grid.crs)
    pop = np.zeros(grid.shape)
    xy = shapely.get_coordinates(s.geometry.values)
    r, c = grid.index(xy[:, 0], xy[:, 1])
    ok = (r >= 0) & (r < grid.height) & (c >= 0) & (c < grid.width)
    np.add.at(pop, (r[ok], c[ok]), s["population"].to_numpy()[ok])
    return pop


def study_grid(study: Study, net, hubs: Hubs, pop_bounds=None):
    """The analysis grid: every place the study counts, plus the margin (or the given extent).

    The grid covers the network, every hub, every settlement and the
    population raster (``pop_bounds``, its ``(bounds, crs)`` from
    :func:`~geo_reach.ingest.rasters.raster_bounds`) - within the zones'
    extent when zones are given, so a country-wide raster used for one
    district costs only the district.  Nobody is left out silently: with a
    given ``extent`` that cuts places off, they are named in the notes.
    """
    from ..ingest.rasters import Grid

    s = study.surface
    if s.extent is not None:
        return Grid.from_bounds(s.extent, s.cell_m, 0.0, crs=net.crs)
    xs = [net.node_x.min(), net.node_x.max(), hubs.xy[:, 0].min(), hubs.xy[:, 0].max()]
    ys = [net.node_y.min(), net.node_y.max(), hubs.xy[:, 1].min(), hubs.xy[:, 1].max()]
    if study.settlements is not None:
        b = read_settlements(study, net.crs).total_bounds
        xs += [b[0], b[2]]
        ys += [b[1], b[3]]
    if pop_bounds is not None:
        from rasterio.warp import transform_bounds

        b = list(transform_bounds(pop_bounds[1], net.crs, *pop_bounds[0], densify_pts=21))
        if study.zones is not None:
            z = _zone_bounds(study, net.crs)
            b = [max(b[0], z[0]), max(b[1], z[1]), min(b[2], z[2]), min(b[3], z[3])]
        if b[0] < b[2] and b[1] < b[3]:
            xs += [b[0], b[2]]
            ys += [b[1], b[3]]
    bounds = (min(xs), min(ys), max(xs), max(ys))
    return Grid.from_bounds(bounds, s.cell_m, s.margin_m, crs=net.crs)


def _zone_bounds(study: Study, crs):
    from ..ingest.layers import parse_layer_ref, read_layer

    z = study.zones
    return read_layer(parse_layer_ref(layer_ref(study, z["path"], z.get("layer"))), "polygons").to_crs(crs).total_bounds


def load_rasters(study: Study, net, hubs: Hubs) -> dict:
    """Read and resample the study's rasters once (the grid is shared by the scenarios).

    Only the window of each raster that covers the grid is read.  Returns a
    dict with ``grid`` and, where the study names them, ``population``,
    ``terrain``, ``landcover`` (class codes, -1 = none), ``barriers``
    (polygons in the working CRS) and ``notes`` (what was read as no data).
    """
    from ..ingest.rasters import raster_bounds, read_raster, resample_to_grid

    files = study.surface_files
    margin = study.surface.margin_m
    pop_bounds = None
    if "population" in files:
        pop_bounds = raster_bounds(study.resolve(files["population"]))
        _check_overlap(study.resolve(files["population"]), pop_bounds, net, margin)
    grid = study_grid(study, net, hubs, pop_bounds)
    out = {"grid": grid, "notes": []}

    def read(key):
        path = study.resolve(files[key])
        _check_overlap(path, raster_bounds(path), net, margin)
        return read_raster(path, within=(grid.bounds, grid.crs))

    if pop_bounds is not None:
        res = resample_to_grid(read("population"), grid, "population")
        out["population"] = res.data
        if res.nonfinite:
            out["notes"].append(f"file '{study.resolve(files['population'])}': {res.nonfinite:,} cells hold NaN or "
                                "infinity without being the raster's nodata value; they count as no people "
                                "(declare them nodata or fix the raster)")
    out.update(read_friction(study, grid, net))
    if study.settlements is not None and "population" not in out:
        out["population"] = settlement_population(study, grid)
    return out


def read_friction(study: Study, grid, net) -> dict:
    """The study's friction inputs on ``grid``: ``terrain`` (m), ``landcover`` (class codes, -1 = none) and
    ``barriers`` (polygons in the working CRS), each where the study names it.

    Only the window of each raster that covers the grid is read; a raster
    wholly outside the network's extent (plus the margin) is refused.
    """
    from ..ingest.rasters import raster_bounds, read_raster, resample_to_grid

    files = study.surface_files
    margin = study.surface.margin_m
    out = {}

    def read(key):
        path = study.resolve(files[key])
        _check_overlap(path, raster_bounds(path), net, margin)
        return read_raster(path, within=(grid.bounds, grid.crs))

    if "terrain" in files:
        out["terrain"] = resample_to_grid(read("terrain"), grid, "terrain").data
    if "landcover" in files:
        lc = resample_to_grid(read("landcover"), grid, "classes").data
        out["landcover"] = np.where(np.isnan(lc), -1, lc).astype(np.int64) if lc.dtype.kind == "f" else lc
    if "barriers" in files:
        from ..ingest.layers import parse_layer_ref, read_layer

        ref = parse_layer_ref(layer_ref(study, files["barriers"], files.get("barriers_layer")))
        out["barriers"] = read_layer(ref, "polygons").to_crs(net.crs)
    return out


def friction_for_points(study: Study, net, xy) -> dict:
    """The grid and friction inputs for walks from ``xy`` (a command's points): the points' extent plus
    ``max_access_m`` and two cells on every side (no walk leaves it).

    Returns a dict like :func:`load_rasters` (``grid``, ``terrain``,
    ``landcover``, ``barriers``).
    """
    from ..ingest.rasters import Grid

    xy = np.asarray(xy, np.float64).reshape(-1, 2)
    if not len(xy):
        xy = np.column_stack([net.node_x[:1], net.node_y[:1]]) if net.n_nodes else np.zeros((1, 2))
    cell = study.surface.cell_m
    bounds = (xy[:, 0].min(), xy[:, 1].min(), xy[:, 0].max(), xy[:, 1].max())
    grid = Grid.from_bounds(bounds, cell, study.routing.max_access_m + 2 * cell, crs=net.crs)
    out = {"grid": grid, "notes": []}
    out.update(read_friction(study, grid, net))
    return out


def _check_overlap(path, bounds_crs, net, margin_m):
    """Refuse a raster lying wholly outside the network's extent (plus the margin)."""
    from rasterio.warp import transform_bounds

    (bounds, crs) = bounds_crs
    b = transform_bounds(crs, net.crs, *bounds, densify_pts=21)
    nb = (net.node_x.min() - margin_m, net.node_y.min() - margin_m, net.node_x.max() + margin_m,
          net.node_y.max() + margin_m)
    if b[0] > nb[2] or b[2] < nb[0] or b[1] > nb[3] or b[3] < nb[1]:
        raise InputError(f"file '{path}': the raster does not overlap the network "
                         f"(raster {b[0]:.0f},{b[1]:.0f} - {b[2]:.0f},{b[3]:.0f}; network "
                         f"{nb[0]:.0f},{nb[1]:.0f} - {nb[2]:.0f},{nb[3]:.0f} in {net.crs.to_string()}); "
                         "check the raster's CRS and extent")

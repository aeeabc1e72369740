"""Incremental study scenarios against the full path: every written figure identical.

A scenario that closes or upgrades features, or adds and removes hubs, runs on
the baseline network with those edges re-costed in place, and its nearest
hubs are repaired from the baseline's forests
(``run_study(..., incremental=True)``, the default).  The reference is the
full path (``incremental=False``): the scenario's edited layers rebuilt
from scratch and every hub searched again.  Both runs must write the same
files with the same figures - node hub costs per kind, settlement minutes,
people per band, change layers and rasters, the summary - floats within
1e-9 relative (``tests/helpers/compare_outputs.py``).

Why the repair can be exact: Ramalingam, G. and Reps, T. (1996). An
incremental algorithm for a generalization of the shortest-path problem.
Journal of Algorithms 21(2), 267-305 (from memory): only nodes whose
cheapest step is gone or dearer, and those below them in the shortest-path
forest, can get dearer; decreases spread from the changed arcs' heads.  The
forests themselves are checked against networkx in ``tests/test_incremental.py``.
"""

from __future__ import annotations

import shutil
import sys
import textwrap
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from rasterio.transform import from_origin

sys.path.insert(0, str(Path(__file__).parent))
from helpers.compare_outputs import compare_folders  # noqa: E402
from studykit import write_study  # noqa: E402

from geo_reach.pipeline import run_study  # noqa: E402
from geo_reach.pipeline.changes import changed_network  # noqa: E402
from geo_reach.pipeline.inputs import layer_specs, read_hubs  # noqa: E402
from geo_reach.pipeline.scenarios import scenario_inputs  # noqa: E402
from geo_reach.study import load_study  # noqa: E402

CRS = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
STEP = 400.0          # lattice spacing (m); the study area is 4 x 4 steps


def _run_both(study_path: Path, out: Path):
    study = load_study(study_path)
    a = run_study(study, out / "incremental", overwrite=True, incremental=True)
    b = run_study(load_study(study_path), out / "full", overwrite=True, incremental=False)
    return a, b


def _lattice_lines(draw):
    """Random walks on a 5 x 5 lattice (noded where they meet or cross), and a diagonal or two."""
    lines = []
    for _ in range(draw(st.integers(3, 7))):
        i, j = draw(st.integers(0, 4)), draw(st.integers(0, 4))
        pts = [(i, j)]
        for _ in range(draw(st.integers(1, 3))):
            di, dj = draw(st.sampled_from([(1, 0), (-1, 0), (0, 1), (0, -1)]))
            i, j = min(max(i + di, 0), 4), min(max(j + dj, 0), 4)
            if (i, j) != pts[-1]:
                pts.append((i, j))
        if len(pts) >= 2:
            lines.append(shapely.LineString([(X0 + a * STEP, Y0 + b * STEP) for a, b in pts]))
    for _ in range(draw(st.integers(0, 2))):
        a, b = draw(st.sampled_from([((0, 0), (4, 3)), ((0, 4), (3, 0)), ((1, 0), (4, 4)), ((0, 2), (4, 1))]))
        lines.append(shapely.LineString([(X0 + a[0] * STEP, Y0 + a[1] * STEP), (X0 + b[0] * STEP, Y0 + b[1] * STEP)]))
    if not lines:
        lines.append(shapely.LineString([(X0, Y0), (X0 + STEP, Y0)]))
    return lines


def _point(draw):
    return shapely.Point(X0 + draw(st.floats(-200, 1800)), Y0 + draw(st.floats(-200, 1800)))


@st.composite
def studies(draw):
    lines = _lattice_lines(draw)
    n = len(lines)
    speeds = [draw(st.sampled_from([20.0, 30.0, 50.0, None])) for _ in range(n)]
    oneway = [draw(st.sampled_from(["no", "no", "yes", "-1"])) for _ in range(n)]
    H = draw(st.integers(1, 4))
    hubs = [_point(draw) for _ in range(H)]
    kinds = [draw(st.sampled_from(["clinic", "market"])) for _ in range(H)]
    P = draw(st.integers(1, 4))
    places = [_point(draw) for _ in range(P)]
    people = [draw(st.integers(0, 500)) for _ in range(P)]
    fids = list(range(1, n + 1))            # GeoPackage feature ids
    scenarios = []
    for k in range(draw(st.integers(1, 2))):
        sc = {}
        close = draw(st.lists(st.sampled_from(fids), max_size=2, unique=True))
        up = draw(st.lists(st.sampled_from(fids), max_size=3, unique=True))
        if close:
            sc["close"] = close
        if up:
            sc["upgrade"] = (up, draw(st.sampled_from([("speed_factor", 2.0), ("speed_factor", 0.5),
                                                        ("speed_kmh", 90.0)])))
        if draw(st.booleans()):
            sc["add_hubs"] = [(_point(draw), draw(st.sampled_from(["clinic", "market"])))
                              for _ in range(draw(st.integers(1, 2)))]
        gone = draw(st.lists(st.integers(0, H - 1), max_size=H - 1, unique=True))
        if gone:
            sc["remove_hubs"] = sorted(gone)
        scenarios.append(sc)
    return dict(lines=lines, speeds=speeds, oneway=oneway, hubs=hubs, kinds=kinds, places=places, people=people,
                scenarios=scenarios, weight=draw(st.sampled_from(["minutes", "minutes", "length_m", "hops"])),
                direction=draw(st.sampled_from(["to-hub", "from-hub"])), seed=draw(st.integers(0, 99)))


def write_generated(folder: Path, s: dict) -> Path:
    """Write a generated study (invented place; hand-checkable sizes) and return its study file."""
    folder.mkdir(parents=True, exist_ok=True)
    gpd.GeoDataFrame({"speed": s["speeds"], "oneway": s["oneway"]}, geometry=s["lines"],
                     crs=CRS).to_file(folder / "net.gpkg", layer="roads")
    gpd.GeoDataFrame({"hub_id": [f"H{i}" for i in range(len(s["hubs"]))], "kind": s["kinds"]},
                     geometry=s["hubs"], crs=CRS).to_file(folder / "hubs.gpkg", layer="hubs")
    gpd.GeoDataFrame({"population": s["people"]}, geometry=s["places"], crs=CRS).to_file(
        folder / "net.gpkg", layer="settlements")
    rng = np.random.default_rng(s["seed"])
    with rasterio.open(folder / "pop.tif", "w", driver="GTiff", width=30, height=30, count=1, dtype="float32",
                       crs=CRS, transform=from_origin(X0 - 700, Y0 + 2300, 100, 100), nodata=-1) as ds:
        ds.write(rng.integers(0, 5, (30, 30)).astype("float32"), 1)
    text = textwrap.dedent(f"""
        title = "Generated lattice town"

        [network]
        snap_m = 1.0

        [[lines]]
        path = "net.gpkg"
        layer = "roads"
        speed_field = "speed"
        speed_kmh = 25
        oneway_field = "oneway"

        [hubs]
        path = "hubs.gpkg"
        id_field = "hub_id"
        kind_field = "kind"

        [routing]
        weight = "{s['weight']}"
        direction = "{s['direction']}"

        [surface]
        cell_m = 100
        margin_m = 400
        population = "pop.tif"
        bands = [5, 10, 20]

        [settlements]
        path = "net.gpkg"
        layer = "settlements"
        population_field = "population"

        [metrics]
        samples = 20
        profile_sources = 3

        [outputs]
        map = false
        profile_png = false
    """)
    for k, sc in enumerate(s["scenarios"]):
        text += f"\n[scenarios.s{k}]\n"
        if "close" in sc:
            text += f'close = [{{ layer = "roads", fids = {sc["close"]} }}]\n'
        if "upgrade" in sc:
            fids, (key, val) = sc["upgrade"]
            text += f'upgrade = [{{ layer = "roads", fids = {fids}, {key} = {val} }}]\n'
        if "add_hubs" in sc:
            pts = sc["add_hubs"]
            gpd.GeoDataFrame({"hub_id": [f"N{k}_{i}" for i in range(len(pts))], "kind": [p[1] for p in pts]},
                             geometry=[p[0] for p in pts], crs=CRS).to_file(folder / f"new{k}.gpkg", layer="hubs")
            text += f'add_hubs = {{ path = "new{k}.gpkg", id_field = "hub_id", kind_field = "kind" }}\n'
        if "remove_hubs" in sc:
            text += "remove_hubs = [" + ", ".join(f'"H{i}"' for i in sc["remove_hubs"]) + "]\n"
    p = folder / "study.toml"
    p.write_text(text)
    return p


def _assert_incremental_taken(summary):
    for name, r in summary.get("scenarios", {}).items():
        assert "re-costed in place" in r["reuse"], (name, r["reuse"])


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                   HealthCheck.too_slow])
@given(s=studies())
def test_random_scenarios_write_the_same_figures_incremental_and_full(s, tmp_path_factory):
    d = tmp_path_factory.mktemp("gen")
    p = write_generated(d / "study", s)
    a, b = _run_both(p, d)
    _assert_incremental_taken(a)
    for k, sc in enumerate(s["scenarios"]):
        moved = abs(a["scenarios"][f"s{k}"].get("person_minutes_saved") or 0.0) > 0
        for what in ("close", "upgrade", "add_hubs", "remove_hubs"):
            if what in sc:
                event(f"{what}{' (changes minutes)' if moved else ''}")
    diffs = compare_folders(d / "incremental", d / "full")
    assert not diffs, diffs[:10]
    # the scenario network made in place is the rebuilt one, array for array
    study = load_study(p)
    specs = layer_specs(study)
    from geo_reach.network.build import build_network

    base = build_network(specs, study.build).network
    hubs = read_hubs(study, study.hubs, base.crs)
    for name in study.scenarios:
        sspecs, _, _, kinds = scenario_inputs(study, name, specs, hubs)
        inplace, _ = changed_network(base, sspecs, kinds)
        _assert_same_network(inplace, build_network(sspecs, study.build).network)
    shutil.rmtree(d, ignore_errors=True)


def _assert_same_network(a, b):
    for f in ("node_x", "node_y", "node_entry", "edge_from", "edge_to", "edge_length_m", "edge_minutes",
              "edge_latency_ms", "edge_oneway", "edge_mode", "edge_src_layer", "edge_src_fid"):
        x, y = getattr(a, f), getattr(b, f)
        assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), f
    assert (a.edge_closed is None) == (b.edge_closed is None)
    if a.edge_closed is not None:
        assert np.array_equal(a.edge_closed, b.edge_closed)
    assert set(a.extra) == set(b.extra)
    for k in a.extra:
        x, y = a.extra[k], b.extra[k]
        if x.dtype.kind == "f":
            assert np.array_equal(x, y, equal_nan=True), k
        else:
            assert list(x) == list(y), k
    assert shapely.equals_exact(a.edge_geometry, b.edge_geometry, 0).all()


def test_kit_study_closures_upgrades_and_hub_changes_identical(tmp_path):
    """The pipeline kit (a 3 x 3 km street grid, two hub kinds, settlements and zones): a closure, an
    upgrade, a mix with a hub removed, and a new clinic; every file's figures identical."""
    extra = ('\n[scenarios.shut]\ndescription = "two streets closed"\nclose = [{ layer = "roads", fids = [3, 4] }]\n'
             '\n[scenarios.fast]\nupgrade = [{ layer = "roads", fids = [1, 2, 5], speed_factor = 2.0 }]\n'
             '\n[scenarios.mix]\nupgrade = [{ layer = "roads", fids = [6], speed_kmh = 80 }]\n'
             'close = [{ layer = "roads", fids = [6, 7] }]\nremove_hubs = ["M1"]\n')
    p = write_study(tmp_path / "kit", extra=extra)
    a, _ = _run_both(p, tmp_path)
    for name in ("shut", "fast", "mix", "new_clinic"):
        assert "repaired from the baseline" in a["scenarios"][name]["reuse"]
    assert "rebuilt" in a["scenarios"]["far_link"]["reuse"]      # an added layer is rebuilt in full
    diffs = compare_folders(tmp_path / "incremental", tmp_path / "full")
    assert not diffs, diffs[:10]
    # the closure changed something, so the equality above is not between two unchanged runs
    assert a["scenarios"]["shut"]["person_minutes_saved"] < 0


def test_the_comparison_sees_a_changed_figure(tmp_path):
    """The folder comparison is not blind: one changed number in a layer, a raster or the summary is found."""
    import json

    p = write_study(tmp_path / "kit", proposal=False)
    run_study(load_study(p), tmp_path / "a")
    shutil.copytree(tmp_path / "a", tmp_path / "b")
    assert compare_folders(tmp_path / "a", tmp_path / "b") == []
    s = json.loads((tmp_path / "b" / "summary.json").read_text())
    s["baseline"]["population_total"] = s["baseline"]["population_total"] * (1 + 1e-6)
    (tmp_path / "b" / "summary.json").write_text(json.dumps(s))
    assert any("population_total" in d for d in compare_folders(tmp_path / "a", tmp_path / "b"))
    shutil.copy(tmp_path / "a" / "summary.json", tmp_path / "b" / "summary.json")
    with rasterio.open(tmp_path / "b" / "hub_minutes.tif", "r+", IGNORE_COG_LAYOUT_BREAK="YES") as ds:
        arr = ds.read(1)
        i = np.argwhere(np.isfinite(arr) & (arr > 0))[0]
        arr[tuple(i)] *= 1.001
        ds.write(arr, 1)
    assert any("hub_minutes.tif" in d for d in compare_folders(tmp_path / "a", tmp_path / "b"))
    shutil.copy(tmp_path / "a" / "hub_minutes.tif", tmp_path / "b" / "hub_minutes.tif")
    g = gpd.read_file(tmp_path / "b" / "results.gpkg", layer="settlements")
    col = [c for c in g.columns if c.startswith("hub_minutes")][0]
    g.loc[0, col] = g.loc[0, col] + 1.0
    g.to_file(tmp_path / "b" / "results.gpkg", layer="settlements")
    assert any(f"settlements.{col}" in d for d in compare_folders(tmp_path / "a", tmp_path / "b"))


def test_demo_study_scenarios_identical(tmp_path):
    """The demo region (terrain, water barriers, rail and cable, three hub kinds) with its proposed road
    (an added layer: rebuilt in full either way) and three scenarios of our own made in memory: trunk
    road links closed, tracks upgraded to 40 km/h with a clinic removed, and a bridge closed together
    with a hub added.  Every file's figures identical, incremental and full."""
    from geo_reach.cli.demo import repo_root

    root = repo_root()

    def study():
        st_ = load_study(root / "data_samples" / "study.toml")
        st_.scenarios["trunk_closed"] = {"close": [{"layer": "roads", "fids": [1, 2, 3]}]}
        st_.scenarios["tracks_upgraded"] = {"upgrade": [{"layer": "roads", "fids": [134, 147, 148, 149, 150], "speed_kmh": 40.0}],
                                            "remove_hubs": ["H04"]}
        st_.scenarios["bridge_closed"] = {"close": [{"layer": "roads", "fids": [124]}],
                                          "add_hubs": {"path": str(new_hub), "id_field": "hub_id",
                                                       "kind_field": "kind"}}
        return st_

    new_hub = tmp_path / "new_hub.geojson"
    gpd.GeoDataFrame({"hub_id": ["N1"], "kind": ["clinic"]}, geometry=[shapely.Point(-21.1, -31.0)],
                     crs="EPSG:4326").to_file(new_hub)
    a = run_study(study(), tmp_path / "incremental", incremental=True)
    run_study(study(), tmp_path / "full", incremental=False)
    for name in ("trunk_closed", "tracks_upgraded", "bridge_closed"):
        assert "repaired from the baseline" in a["scenarios"][name]["reuse"], name
    assert "rebuilt" in a["scenarios"]["proposed_road"]["reuse"]
    diffs = compare_folders(tmp_path / "incremental", tmp_path / "full")
    assert not diffs, diffs[:10]
    assert a["scenarios"]["trunk_closed"]["person_minutes_saved"] < 0
    assert a["scenarios"]["tracks_upgraded"]["person_minutes_saved"] != 0


def test_entry_places_are_shared_only_while_the_same_edges_stay_routable():
    """A network re-costed in place keeps the baseline's spatial indexes of where points join while the
    same edges stay routable (an upgrade); a closure builds its own, and points then join only open edges
    - the same legs as on a network made from scratch with that closure."""
    import dataclasses

    from helpers.routing_nets import grid

    from geo_reach.analysis.attach import _TREES, attach_points, share_entry_places

    net = grid(6, 6, spacing=100.0)
    xy = np.array([[130.0, 40.0], [310.0, 260.0]])
    attach_points(net, xy, "minutes")
    up = dataclasses.replace(net, edge_minutes=net.edge_minutes * 0.5)
    share_entry_places(net, up)
    assert _TREES[up]["minutes"] is _TREES[net]["minutes"]
    shut_mask = np.zeros(net.n_edges, bool)
    shut_mask[:8] = True
    shut = dataclasses.replace(net, edge_closed=shut_mask)
    share_entry_places(net, shut)
    assert "minutes" not in _TREES.get(shut, {})
    fresh = dataclasses.replace(net, edge_closed=shut_mask.copy())
    a, b = attach_points(shut, xy, "minutes"), attach_points(fresh, xy, "minutes")
    assert not np.isin(a.leg_edge[a.leg_edge >= 0], np.nonzero(shut_mask)[0]).any()
    assert np.array_equal(a.leg_edge, b.leg_edge) and np.array_equal(a.leg_node, b.leg_node)

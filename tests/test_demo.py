"""The demo end to end: the whole study on the invented region, twice, identical apart from timing.

Invented data exercises the whole job here; the figures themselves are checked against outside
references in the other test files.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyogrio
import rasterio


def test_demo_runs_writes_everything_and_is_deterministic(tmp_path):
    outs = []
    for k in range(2):
        out = tmp_path / f"demo{k}"
        p = subprocess.run([sys.executable, "-m", "geo_reach", "demo", "-o", str(out), "--quiet"],
                           capture_output=True, text=True)
        assert p.returncode == 0, p.stderr
        outs.append(out)
    text = p.stdout
    assert "map.html" in text and "beyond 120 min" in text and "weak region #1" in text
    assert "proposed_road" in text and "Model estimates" in text
    a, b = (json.loads((o / "summary.json").read_text()) for o in outs)
    a.pop("timing"); b.pop("timing")
    assert a == b
    # every file byte for byte, apart from summary.json (its timing key differs, compared above)
    names = sorted(p.relative_to(outs[0]).as_posix() for p in outs[0].rglob("*") if p.is_file())
    assert names == sorted(p.relative_to(outs[1]).as_posix() for p in outs[1].rglob("*") if p.is_file())
    differ = [n for n in names if n != "summary.json"
              and (outs[0] / n).read_bytes() != (outs[1] / n).read_bytes()]
    assert not differ, differ
    for f in ("hub_minutes.tif", "nearest_hub.tif", "hub_minutes_change_proposed_road.tif", "connection_m.tif"):
        with rasterio.open(outs[0] / f) as x, rasterio.open(outs[1] / f) as y:
            assert x.crs is not None
            assert np.array_equal(x.read(1), y.read(1), equal_nan=True)
    layers = set(pyogrio.list_layers(outs[0] / "results.gpkg")[:, 0])
    assert {"edges", "nodes", "hubs", "network_issues", "diameter_path", "reach_bands", "weak_regions",
            "settlements", "zones", "proposed_road_edge_change"} <= layers
    for f in ("reach_profile.png", "settlements.csv", "zones.csv", "results.reach_bands.sld",
              "results.weak_regions.sld", "results.edges.sld"):
        assert (outs[0] / f).exists(), f
    s = a["baseline"]
    assert s["population_by_band"]["120"] + s["population_beyond"] == \
        __import__("pytest").approx(s["population_total"])
    assert a["scenarios"]["proposed_road"]["people_newly_within"]["120"] >= 0
    assert a["caution"].startswith("Model estimates")


def test_run_into_a_path_under_a_file_is_refused_before_work(tmp_path):
    f = tmp_path / "afile"
    f.write_text("keep")
    study = Path(__file__).resolve().parents[1] / "data_samples" / "study.toml"
    p = subprocess.run([sys.executable, "-m", "geo_reach", "run", str(study), "-o",
                        str(f / "out"), "--quiet"], capture_output=True, text=True)
    assert p.returncode == 2
    assert len(p.stderr.strip().splitlines()) == 1 and "afile" in p.stderr
    assert f.read_text() == "keep"

"""The move set as an option (study ``surface.neighbours``, ``--neighbours``), and hubs as seeds end to end."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio

sys.path.insert(0, str(Path(__file__).parent))
from studykit import CRS, X0, Y0, write_study  # noqa: E402
from helpers.cli import cli  # noqa: E402

from geo_reach.analysis.options import SurfaceOptions  # noqa: E402
from geo_reach.errors import InputError, OptionError  # noqa: E402
from geo_reach.study import load_study  # noqa: E402


def test_surface_options_neighbours():
    assert SurfaceOptions().neighbours == 16
    assert SurfaceOptions(neighbours=8).neighbours == 8
    for bad in (4, 12, 32, True, "16", 16.5):
        with pytest.raises(OptionError) as e:
            SurfaceOptions(neighbours=bad)
        assert e.value.key == "neighbours"


def _study_with(tmp_path, line):
    p = write_study(tmp_path, proposal=False)
    text = p.read_text().replace("bands = [15, 30, 60]", f"bands = [15, 30, 60]\n{line}")
    p.write_text(text)
    return p


def test_study_key(tmp_path):
    assert load_study(_study_with(tmp_path / "a", "neighbours = 8")).surface.neighbours == 8
    assert load_study(write_study(tmp_path / "b", proposal=False)).surface.neighbours == 16
    for line in ("neighbours = 12", 'neighbours = "16"'):
        p = _study_with(tmp_path / line.replace(" ", "").replace('"', ""), line)
        with pytest.raises(InputError) as e:
            load_study(p)
        assert "surface.neighbours" in str(e.value)
        n = next(i for i, ln in enumerate(p.read_text().splitlines(), 1) if ln.startswith("neighbours"))
        assert f"line {n}" in str(e.value)


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    d = tmp_path_factory.mktemp("surfopt")
    write_study(d, proposal=False)
    code, _, err = cli("build", f"{d / 'net.gpkg'}:roads", "-o", d / "built.gpkg", "--speed-field", "speed")
    assert code == 0, err
    return d


def _minutes(folder, name="hub_minutes.tif"):
    with rasterio.open(folder / name) as ds:
        return ds.read(1).astype(np.float64), ds.transform


def test_cli_neighbours_and_hub_seeds(built, tmp_path):
    d = built
    runs = {}
    for nb in ("8", "16"):
        code, out, err = cli("surface", d / "built.gpkg", "--hubs", d / "hubs.geojson", "--hub-id-field", "hub_id",
                             "--hub-kind-field", "kind", "-o", tmp_path / f"n{nb}", "--neighbours", nb, "--quiet")
        assert code == 0, err
        runs[nb] = _minutes(tmp_path / f"n{nb}")
    m8, t = runs["8"]
    m16, _ = runs["16"]
    # the 16-neighbour moves include the 8: never dearer, and cheaper off the road grid's axes somewhere
    assert (m16 <= m8 + 1e-4).all() and (m16 < m8 - 0.01).any()
    # the clinic C1 stands 10 m east and 10 m north of a road junction; 100 m cells: its own cell costs at
    # most the walk of half a cell diagonal (70.7 m at 5 km/h = 0.85 min), in the all-hub and the clinic surface
    col, row = (X0 + 10 - t.c) / t.a, (Y0 + 10 - t.f) / t.e
    r, c = int(math.floor(row)), int(math.floor(col))
    half_diag = math.sqrt(2) / 2 * 100 * 60 / 5000
    assert m16[r, c] <= half_diag + 1e-4
    clinic, _ = _minutes(tmp_path / "n16", "hub_minutes_clinic.tif")
    market, _ = _minutes(tmp_path / "n16", "hub_minutes_market.tif")
    assert clinic[r, c] <= half_diag + 1e-4
    # the market surface does not seed the clinic: there the cell is reached over the network
    assert market[r, c] > clinic[r, c] + 1.0
    code, out, err = cli("surface", d / "built.gpkg", "--hubs", d / "hubs.geojson", "-o", tmp_path / "bad",
                         "--neighbours", "12", "--quiet")
    assert code == 2 and "--neighbours" in err and not (tmp_path / "bad").exists()

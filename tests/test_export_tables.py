"""Planner-ready tables (settlements.csv, zones.csv, <scenario>_*.csv): names, rounding, values, CSV form.

Outside references, beside each check:

* Rounding: Python's ``decimal`` module (IBM's General Decimal Arithmetic
  specification, ROUND_HALF_EVEN) on the exact binary value of each float.
  Minutes and km to 0.1, people whole, shares in % to 0.1: common practice in
  access reports.
* CSV: RFC 4180 (Shafranovich 2005), read back with Python's ``csv`` module;
  formula-looking text prefixed with ``'`` as the OWASP "CSV Injection" page
  recommends.
* Zone shares: recomputed here cell by cell from the GeoTIFFs the run wrote
  (read with rasterio) and shapely's point-in-polygon test on cell centres,
  independent of the pipeline's rasterised zones.
* Scenario "after" values can only fall when a hub is added (Cormen et al.
  2009, Introduction to Algorithms, ch. 24, from memory: a new hub is one
  more zero-cost arc from the super-source, so no shortest-path weight grows).
"""

from __future__ import annotations

import csv
import subprocess
import sys
from decimal import ROUND_HALF_EVEN, Decimal
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers.kit_run import IDS, NAMES, run_named  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.export.tables import (ANY_KIND, planner_round, read_csv, term_for, unit_of,  # noqa: E402
                                     write_csv)
from geo_reach.glossary import lookup  # noqa: E402


@pytest.fixture(scope="module")
def kit(tmp_path_factory):
    return run_named(tmp_path_factory.mktemp("tables"))


# ------------------------------------------------------------------ rounding
def _ref(x: float, places: int) -> float:
    q = Decimal(1).scaleb(-places)
    return float(Decimal(x).quantize(q, rounding=ROUND_HALF_EVEN))


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=20))
def test_rounding_matches_decimal_half_even(values):
    t = pd.DataFrame({"hub_minutes": values, "population": np.abs(values), "share_within_30_pct": values,
                      "network_length_km": values, "hub_minutes_change": values, "nearest_hub": values})
    r = planner_round(t)
    assert r["hub_minutes"].tolist() == [_ref(v, 1) for v in values]
    assert r["network_length_km"].tolist() == [_ref(v, 1) for v in values]
    assert r["share_within_30_pct"].tolist() == [_ref(v, 1) for v in values]
    assert r["hub_minutes_change"].tolist() == [_ref(v, 1) for v in values]
    assert r["population"].tolist() == [int(_ref(abs(v), 0)) for v in values]
    assert str(r["population"].dtype) == "Int64"
    assert r["nearest_hub"].tolist() == values              # ids are never rounded


def test_rounding_keeps_missing_and_drops_negative_zero():
    r = planner_round(pd.DataFrame({"hub_minutes_change": [-0.04, np.nan, 0.05], "population": [np.nan, 2.5, 3.5]}))
    assert str(r["hub_minutes_change"][0]) == "0.0"          # not "-0.0"
    assert np.isnan(r["hub_minutes_change"][1])
    assert r["population"].isna().tolist() == [True, False, False]
    assert r["population"][1:].tolist() == [2, 4]            # half to even (decimal reference above)


def test_units_come_from_the_glossary():
    assert unit_of("hub_minutes") == "minutes" and unit_of("hub_minutes_clinic") == "minutes"
    assert unit_of("network_length_km") == "km" and unit_of("share_within_7_5_pct") == "%"
    assert unit_of("population_beyond_change") == "people" and unit_of("nearest_hub") == ""
    assert term_for("nearest_hub_name_market").meaning.startswith("Name of the nearest hub")
    assert term_for("hub_minutes_before").name == "<field>_before"


# ------------------------------------------------------------------ the tables of a run
SETTLEMENT_COLUMNS = ["settlement_id", "name", "population", "hub_minutes", "nearest_hub", "nearest_hub_name",
                      "network_length_km", "hub_minutes_clinic", "nearest_hub_clinic", "nearest_hub_name_clinic",
                      "hub_minutes_market", "nearest_hub_market", "nearest_hub_name_market"]
ZONE_COLUMNS = ["zone_id", "population", "share_within_15_pct", "share_within_30_pct", "share_within_60_pct",
                "population_beyond", "mean_hub_minutes"]


def test_every_table_file_and_column(kit):
    _, out, _ = kit
    files = sorted(p.name for p in out.glob("*.csv"))
    assert files == ["far_link_settlements.csv", "far_link_zones.csv", "new_clinic_settlements.csv",
                     "new_clinic_zones.csv", "settlements.csv", "zones.csv"]
    assert read_csv(out / "settlements.csv").columns.tolist() == SETTLEMENT_COLUMNS
    assert read_csv(out / "zones.csv").columns.tolist() == ZONE_COLUMNS
    for f in files:
        cols = read_csv(out / f).columns.tolist()
        assert len(set(cols)) == len(cols), f
        assert not {"pop", "zone", "minutes", "network_km", "mean_minutes", "zid", "sid", "label"} & set(cols), f
        missing = [c for c in cols if lookup(c) is None or term_for(c) is None]
        assert not missing, (f, missing)
        assert lookup(f) is not None, f                       # the file name is in the glossary too


def test_settlement_values_are_the_layer_values_rounded(kit):
    """One trip, one number: the table is the GeoPackage layer, rounded and named."""
    _, out, _ = kit
    t = read_csv(out / "settlements.csv")
    layer = pyogrio.read_dataframe(out / "results.gpkg", layer="settlements")
    hubs = pyogrio.read_dataframe(out / "results.gpkg", layer="hubs")
    # the formula-looking name is written with a leading ' (OWASP); everything else as given
    assert t["settlement_id"].tolist() == IDS and t["name"].tolist() == [NAMES[0], "'=1+1", *NAMES[2:]]
    minutes = layer["hub_minutes"] if "hub_minutes" in layer else layer["minutes"]
    np.testing.assert_array_equal(t["hub_minutes"].to_numpy(float), [_ref(v, 1) for v in minutes])
    assert t["population"].tolist() == [int(_ref(v, 0)) for v in layer["population"]]
    km = layer["network_length_m"] / 1000 if "network_length_m" in layer else layer["network_km"]
    np.testing.assert_array_equal(t["network_length_km"].to_numpy(float), [_ref(v, 1) for v in km])
    names = dict(zip(hubs["hub_id"], hubs["name"]))
    assert t["nearest_hub_name"].tolist() == [names[h] for h in t["nearest_hub"]]
    assert t["nearest_hub_name_clinic"].tolist() == [names[h] for h in t["nearest_hub_clinic"]]


def _zone_reference(minutes_tif, pop_grid, zones, bands):
    """Shares (%) per zone from the cells whose centre lies in the zone (shapely), independent of rasterio."""
    with rasterio.open(minutes_tif) as ds:
        m = ds.read(1, masked=True).filled(np.nan).astype(float)
        tr = ds.transform
    rows, cols = np.indices(m.shape)
    xs, ys = tr.c + tr.a * (cols.ravel() + 0.5), tr.f + tr.e * (rows.ravel() + 0.5)   # north-up grid
    pts = shapely.points(xs, ys)
    res = []
    for geom in zones.geometry:
        inside = shapely.contains(geom, pts).reshape(m.shape)
        pop = pop_grid[inside]
        mm = m[inside]
        total = pop.sum()
        shares = [100.0 * pop[mm <= b].sum() / total for b in bands]
        reach = np.isfinite(mm)
        mean = (pop[reach] * mm[reach]).sum() / pop[reach].sum()
        res.append((total, shares, mean))
    return res


def _population_on_grid(study_dir, like_tif):
    """The kit's population raster (1 person per 100 m cell) on the results grid (same cell size)."""
    with rasterio.open(like_tif) as g, rasterio.open(study_dir / "pop.tif") as p:
        out = np.zeros(g.shape)
        pv = p.read(1)
        rows, cols = np.indices(g.shape)
        gt = g.transform
        xs, ys = gt.c + gt.a * (cols + 0.5), gt.f + gt.e * (rows + 0.5)
        pt = p.transform
        r = np.floor((ys - pt.f) / pt.e).astype(int)
        c = np.floor((xs - pt.c) / pt.a).astype(int)
        ok = (r >= 0) & (r < p.height) & (c >= 0) & (c < p.width)
        out[ok] = pv[r[ok], c[ok]]
    return out


def test_zone_shares_against_a_cell_by_cell_count(kit):
    p, out, _ = kit
    zones = pyogrio.read_dataframe(p.parent / "net.gpkg", layer="zones")
    pop = _population_on_grid(p.parent, out / "hub_minutes.tif")
    t = read_csv(out / "zones.csv")
    assert t["zone_id"].tolist() == zones["zid"].tolist()
    for k, (total, shares, mean) in enumerate(_zone_reference(out / "hub_minutes.tif", pop, zones, [15, 30, 60])):
        assert t["population"][k] == round(total)
        for b, s in zip((15, 30, 60), shares):
            # the GeoTIFF holds float32 minutes: a cell within 1e-4 min of a band edge may fall either way
            assert t[f"share_within_{b}_pct"][k] == pytest.approx(_ref(s, 1), abs=0.15)
        assert t["mean_hub_minutes"][k] == pytest.approx(mean, abs=0.06)
    # per kind (scenario tables, "before"): the clinic rows against hub_minutes_clinic.tif
    z = read_csv(out / "new_clinic_zones.csv")
    clinic = z[z["hub_kind"] == "clinic"].reset_index(drop=True)
    for k, (total, shares, mean) in enumerate(_zone_reference(out / "hub_minutes_clinic.tif", pop, zones, [15, 30, 60])):
        for b, s in zip((15, 30, 60), shares):
            assert clinic[f"share_within_{b}_pct_before"][k] == pytest.approx(s, abs=0.15)
        assert clinic["mean_hub_minutes_before"][k] == pytest.approx(mean, abs=0.06)


def test_scenario_tables_before_after_change(kit):
    p, out, _ = kit
    for name in ("far_link", "new_clinic"):
        s = read_csv(out / f"{name}_settlements.csv")
        assert s["hub_kind"].tolist() == [ANY_KIND] * 4 + ["clinic"] * 4 + ["market"] * 4
        # rounded one by one: the change is after minus before to within one last digit
        assert np.allclose(s["hub_minutes_change"], s["hub_minutes_after"] - s["hub_minutes_before"], atol=0.11)
        base = read_csv(out / "settlements.csv")
        assert s["hub_minutes_before"][:4].tolist() == base["hub_minutes"].tolist()
        assert s["hub_minutes_before"][4:8].tolist() == base["hub_minutes_clinic"].tolist()
        z = read_csv(out / f"{name}_zones.csv")
        assert set(z["hub_kind"]) == {ANY_KIND, "clinic", "market"}
        for c in ("share_within_15_pct", "population_beyond", "mean_hub_minutes"):
            assert np.allclose(z[f"{c}_change"], z[f"{c}_after"] - z[f"{c}_before"], atol=1.01)
    # a new clinic: nobody's minutes to a clinic grow (Cormen et al. 2009, ch. 24)
    s = read_csv(out / "new_clinic_settlements.csv")
    clinic = s[s["hub_kind"] == "clinic"]
    assert (clinic["hub_minutes_change"] <= 0).all() and (clinic["hub_minutes_change"] < 0).any()
    assert (s[s["hub_kind"] == "market"]["hub_minutes_change"] == 0).all()
    # the "any" rows of the layer the GeoPackage keeps agree with the table
    layer = pyogrio.read_dataframe(out / "results.gpkg", layer="far_link_settlements")
    after = layer["hub_minutes_after"] if "hub_minutes_after" in layer else layer["minutes_after"]
    t = read_csv(out / "far_link_settlements.csv")
    assert t["hub_minutes_after"][:4].tolist() == [_ref(v, 1) for v in after]


def test_compare_writes_the_scenario_tables(kit, tmp_path):
    p, _, _ = kit
    out = tmp_path / "cmp"
    r = subprocess.run([sys.executable, "-m", "geo_reach", "compare", str(p), "-o", str(out), "--quiet"],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    names = sorted(f.name for f in out.glob("*.csv"))
    assert names == ["far_link_settlements.csv", "far_link_zones.csv", "new_clinic_settlements.csv",
                     "new_clinic_zones.csv"]
    assert (out / "tables.xlsx").is_file()


# ------------------------------------------------------------------ CSV form
def test_csv_caution_line_rfc4180_and_text_safety(tmp_path):
    t = pd.DataFrame({"settlement_id": [1, 2, 3], "name": ['a, "b"', "=SUM(A1)", "line\nbreak"],
                      "hub_minutes": [1.5, np.nan, 3.0], "population": pd.array([1, pd.NA, 3], dtype="Int64")})
    path = write_csv(tmp_path / "t.csv", t)
    raw = path.read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf\"Model estimates")           # UTF-8 byte-order mark, then the caution
    assert b"\r\n" in raw and raw.count(b"\r\n") >= 5                  # RFC 4180 line ends
    with open(path, newline="", encoding="utf-8-sig") as f:
        rows = list(csv.reader(f))
    assert rows[0] == [CAUTION]
    assert rows[1] == ["settlement_id", "name", "hub_minutes", "population"]
    assert rows[2] == ["1", 'a, "b"', "1.5", "1"]
    assert rows[3] == ["2", "'=SUM(A1)", "", ""]
    assert rows[4] == ["3", "line\nbreak", "3.0", "3"]
    back = read_csv(path)
    assert back["name"].tolist() == ['a, "b"', "'=SUM(A1)", "line\nbreak"]
    assert not list(tmp_path.glob(".geo-reach-*"))                     # no temporary left behind

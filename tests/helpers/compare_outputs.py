"""Compare two results folders figure by figure (the incremental scenario path against the full one).

Every file the run writes is compared: ``summary.json`` (numbers within a
relative tolerance; the run's timing and the text saying what was reused
left out), every layer of every GeoPackage (every column, geometry as WKB),
every GeoTIFF band, every CSV table and every sheet of ``tables.xlsx``.
Other files (map, report, styles, charts) hold the same figures as text or
pictures and are compared for existence only.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

SKIP_KEYS = {"timing", "reuse"}


def close(a, b, rel: float) -> bool:
    if isinstance(a, bool) or isinstance(b, bool):
        return a == b
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if math.isnan(a) or math.isnan(b):
            return math.isnan(a) and math.isnan(b)
        return a == b or abs(a - b) <= rel * max(abs(a), abs(b))
    return a == b


def compare_json(a, b, rel: float, path: str = "") -> list[str]:
    out = []
    if isinstance(a, dict) and isinstance(b, dict):
        ka, kb = set(a) - SKIP_KEYS, set(b) - SKIP_KEYS
        if ka != kb:
            return [f"{path}: keys {sorted(ka ^ kb)} differ"]
        for k in sorted(ka):
            out += compare_json(a[k], b[k], rel, f"{path}.{k}")
        return out
    if isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            return [f"{path}: {len(a)} vs {len(b)} items"]
        for i, (x, y) in enumerate(zip(a, b)):
            out += compare_json(x, y, rel, f"{path}[{i}]")
        return out
    return [] if close(a, b, rel) else [f"{path}: {a!r} vs {b!r}"]


def compare_arrays(a, b, rel: float, what: str) -> list[str]:
    a, b = np.asarray(a), np.asarray(b)
    if a.shape != b.shape:
        return [f"{what}: shape {a.shape} vs {b.shape}"]
    if a.dtype.kind in "fc" or b.dtype.kind in "fc":
        try:
            fa, fb = a.astype(float), b.astype(float)
        except (TypeError, ValueError):
            pass
        else:
            same_nan = np.isnan(fa) == np.isnan(fb)
            ok = np.isnan(fa) | (fa == fb) | (np.abs(fa - fb) <= rel * np.maximum(np.abs(fa), np.abs(fb)))
            if not (same_nan.all() and ok.all()):
                i = int(np.nonzero(~(same_nan & ok))[0][0]) if a.ndim == 1 else -1
                return [f"{what}: differ (first at {i}: {fa.ravel()[i]!r} vs {fb.ravel()[i]!r})"]
            return []
    eq = np.array([x == y or (x != x and y != y) for x, y in zip(a.ravel(), b.ravel())], bool)
    if not eq.all():
        i = int(np.nonzero(~eq)[0][0])
        return [f"{what}: differ (first at {i}: {a.ravel()[i]!r} vs {b.ravel()[i]!r})"]
    return []


def compare_frames(fa, fb, rel: float, what: str) -> list[str]:
    import shapely

    if list(fa.columns) != list(fb.columns):
        return [f"{what}: columns {list(fa.columns)} vs {list(fb.columns)}"]
    if len(fa) != len(fb):
        return [f"{what}: {len(fa)} vs {len(fb)} rows"]
    out = []
    for c in fa.columns:
        if c == getattr(fa, "_geometry_column_name", None):
            wa = shapely.to_wkb(np.asarray(fa[c].values, object))
            wb = shapely.to_wkb(np.asarray(fb[c].values, object))
            if not np.array_equal(wa, wb):
                out.append(f"{what}.{c}: geometries differ")
            continue
        va, vb = fa[c].to_numpy(), fb[c].to_numpy()
        if va.dtype.kind == "O" or vb.dtype.kind == "O":
            try:
                va, vb = va.astype(float), vb.astype(float)
            except (TypeError, ValueError):
                pass
        out += compare_arrays(va, vb, rel, f"{what}.{c}")
    return out


def compare_folders(a: Path, b: Path, rel: float = 1e-9) -> list[str]:
    """Differences between results folders ``a`` and ``b`` (empty list = the same figures)."""
    import geopandas as gpd
    import pandas as pd
    import pyogrio
    import rasterio

    a, b = Path(a), Path(b)
    names_a = sorted(p.name for p in a.iterdir())
    names_b = sorted(p.name for p in b.iterdir())
    if names_a != names_b:
        return [f"files differ: {sorted(set(names_a) ^ set(names_b))}"]
    out = []
    for name in names_a:
        pa, pb = a / name, b / name
        if name.endswith(".json"):
            out += compare_json(json.loads(pa.read_text()), json.loads(pb.read_text()), rel, name)
        elif name.endswith(".gpkg"):
            la = [x[0] for x in pyogrio.list_layers(pa)]
            lb = [x[0] for x in pyogrio.list_layers(pb)]
            if la != lb:
                out.append(f"{name}: layers {la} vs {lb}")
            for layer in [x for x in la if x in lb]:
                out += compare_frames(gpd.read_file(pa, layer=layer), gpd.read_file(pb, layer=layer), rel,
                                      f"{name}:{layer}")
        elif name.endswith(".tif"):
            with rasterio.open(pa) as ra, rasterio.open(pb) as rb:
                if ra.count != rb.count or ra.transform != rb.transform:
                    out.append(f"{name}: bands or transform differ")
                    continue
                for k in range(1, ra.count + 1):
                    out += compare_arrays(ra.read(k), rb.read(k), rel, f"{name}[{k}]")
        elif name.endswith(".csv"):
            out += compare_frames(pd.read_csv(pa), pd.read_csv(pb), rel, name)
        elif name.endswith(".xlsx"):
            sa, sb = pd.read_excel(pa, sheet_name=None), pd.read_excel(pb, sheet_name=None)
            if list(sa) != list(sb):
                out.append(f"{name}: sheets {list(sa)} vs {list(sb)}")
                continue
            for sheet in sa:
                out += compare_frames(sa[sheet], sb[sheet], rel, f"{name}:{sheet}")
    return out

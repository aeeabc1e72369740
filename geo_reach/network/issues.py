"""The build's issues layer and report: every repair and every suspect spot, written down as it is found.

Each topology step adds points to an :class:`IssueLog`; the report is a
plain dict (the JSON report of ``build`` and ``check``) that the steps add
their lengths and counts to.  Nothing the builder changes goes unrecorded.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import shapely

__all__ = ["ISSUE_KINDS", "IssueLog", "empty_report", "LENGTH_KEYS"]

#: Kinds of spot in the ``network_issues`` layer (each is listed in the README).
ISSUE_KINDS = ("gap_joined", "unjoined_gap", "dangle", "crossing_split", "crossing_kept",
               "duplicate_removed", "dropped_feature", "zero_length", "self_loop",
               "speed_defaulted", "geometry_repaired", "access_unmatched")

#: Report keys holding lengths in metres (rounded to the millimetre at the end).
LENGTH_KEYS = ("input_length_m", "network_length_m", "removed_duplicate_length_m", "dropped_length_m",
               "trimmed_length_m", "joined_gap_length_m", "transfer_length_m")


class IssueLog:
    """Issue points as they are found: kind, x, y (working CRS; NaN = no place), detail, layer, feature id."""

    def __init__(self) -> None:
        self.rows: list[tuple] = []

    def add(self, kind: str, x: float | None, y: float | None, detail: str, layer: str = "", fid: int = -1) -> None:
        """Record one spot (``x``/``y`` ``None`` for a fact with no place, such as a feature with no geometry)."""
        self.rows.append((kind, float(x) if x is not None else np.nan,
                          float(y) if y is not None else np.nan, detail, layer, int(fid)))

    def count(self, kind: str) -> int:
        """How many spots of ``kind`` were recorded (with or without a place)."""
        return sum(1 for r in self.rows if r[0] == kind)

    def frame(self, crs: Any) -> Any:
        """The ``network_issues`` layer: a GeoDataFrame of points, sorted by kind, x, y.

        Rows with no place are left out of the layer (the report counts and lists them).
        """
        import geopandas as gpd

        df = pd.DataFrame(self.rows, columns=["kind", "x", "y", "detail", "src_layer", "src_fid"])
        has = df["x"].notna().to_numpy()
        df = df[has].reset_index(drop=True)
        order = np.lexsort((df["y"].to_numpy(float), df["x"].to_numpy(float), df["kind"].to_numpy(str)))
        df = df.iloc[order].reset_index(drop=True)
        geom = shapely.points(df["x"].to_numpy(float), df["y"].to_numpy(float))
        return gpd.GeoDataFrame(df.drop(columns=["x", "y"]), geometry=geom, crs=crs)


def empty_report() -> dict:
    """A report with every key at its starting value."""
    return {
        "nodes": 0, "edges": 0, "components": 0, "largest_component_nodes": 0,
        "input_features": 0, "input_length_m": 0.0, "network_length_m": 0.0,
        "removed_duplicate_length_m": 0.0, "dropped_length_m": 0.0, "trimmed_length_m": 0.0,
        "joined_gap_length_m": 0.0, "transfer_length_m": 0.0,
        "issues": {k: 0 for k in ISSUE_KINDS},
        "dropped_features": [], "default_speeds_used": [], "speed_defaulted_features": 0,
        "multipart_features": 0, "z_m_dropped_features": 0,
        "crs": None, "snap_m": None, "dangle_m": None,
        "caution": None,
    }

"""Typed options of the analysis steps: the one set of defaults.

The command line, the study schema and the Python API all read their defaults
from these dataclasses (``RoutingOptions.walk_kmh`` is *the* default walking
speed), and each dataclass checks its own values once, when it is made.  An
out-of-range value raises :class:`~geo_reach.errors.OptionError` whose ``key``
is the field's name; the command line shows it as the flag, the study loader
as the dotted key.

The network builder's options live beside the builder
(:class:`geo_reach.network.build.BuildOptions`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace

from ..errors import OptionError
from ..network.weights import MINUTES, Weight, as_weight

__all__ = ["DIRECTIONS", "RoutingOptions", "MetricsOptions", "SurfaceOptions", "ComputeOptions", "CriticalityOptions",
           "IndicesOptions", "defaults", "replace"]

#: Which way a trip runs: from each place to its hub, or from the hub out to each place.
DIRECTIONS = ("to-hub", "from-hub")


def _positive(key: str, value, unit: str = "") -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise OptionError(f"{key} {value!r}: must be a positive number{unit}", key=key)


def _not_negative(key: str, value, unit: str = "") -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
        raise OptionError(f"{key} {value!r}: must be zero or more{unit}", key=key)


@dataclass(frozen=True)
class RoutingOptions:
    """How trips are costed: the weight, the direction and the walk to and from the network.

    Attributes
    ----------
    weight : Weight
        What a trip's cost counts (a name is turned into a :class:`Weight`).
    direction : {'to-hub', 'from-hub'}
        ``to-hub``: the trip from each place to its hub (one-way links make
        the two differ).
    max_access_m : float
        Places farther than this (metres) from any entry are reported and
        left out.
    walk_kmh : float
        Off-network walking speed on flat open ground, km/h (5 km/h is common
        practice for walking).
    """

    weight: Weight = MINUTES
    direction: str = "to-hub"
    max_access_m: float = 5000.0
    walk_kmh: float = 5.0

    def __post_init__(self):
        object.__setattr__(self, "weight", as_weight(self.weight))
        if self.direction not in DIRECTIONS:
            raise OptionError(f"direction {self.direction!r} is not known; choose one of {', '.join(DIRECTIONS)}",
                              key="direction")
        _not_negative("max_access_m", self.max_access_m, " metres")
        _positive("walk_kmh", self.walk_kmh, " km/h")
        object.__setattr__(self, "max_access_m", float(self.max_access_m))
        object.__setattr__(self, "walk_kmh", float(self.walk_kmh))

    @property
    def reverse(self) -> bool:
        """True when the search runs on the reversed graph (trips *to* the hubs)."""
        return self.direction == "to-hub"


@dataclass(frozen=True)
class MetricsOptions:
    """Network-wide figures: how many sources to sample and whether to go exact.

    Attributes
    ----------
    samples : int
        Random sources for the sampled mean path and efficiency on large
        networks (at least 2).
    seed : int
        Seed of that sample (results are reproducible).
    exact : bool
        Exact mean path whatever the size (one search per node).
    profile_sources : int
        Random sources the reach profile is averaged over.
    node_figures : bool or None
        Per-node eccentricity and closeness (default: on small networks).
    """

    samples: int = 200
    seed: int = 0
    exact: bool = False
    profile_sources: int = 20
    node_figures: bool | None = None

    def __post_init__(self):
        if isinstance(self.samples, bool) or not isinstance(self.samples, int) or self.samples < 2:
            raise OptionError(f"samples {self.samples!r}: give 2 or more sources", key="samples")
        if isinstance(self.profile_sources, bool) or not isinstance(self.profile_sources, int) \
                or self.profile_sources < 1:
            raise OptionError(f"profile_sources {self.profile_sources!r}: give 1 or more sources",
                              key="profile_sources")


@dataclass(frozen=True)
class SurfaceOptions:
    """The travel-time surface: grid, bands and the weak-region threshold.

    Attributes
    ----------
    cell_m : float
        Cell side, metres.
    margin_m : float
        Margin around the study area (network, hubs, places, population), metres.
    bands : tuple of float
        Reach band limits in minutes, increasing.
    weak_minutes : float or None
        Weak-region threshold in minutes (default: the largest band).
    extent : tuple of 4 floats or None
        ``(xmin, ymin, xmax, ymax)`` of the grid in the working CRS instead of
        the study area plus the margin.
    neighbours : {16, 8}
        Move set of the walk across the grid: 16 (axes, diagonals and knight
        moves; straight walking overstated by at most 2.75 %) or 8 (axes and
        diagonals; at most 8.24 %).
    """

    cell_m: float = 100.0
    margin_m: float = 2000.0
    bands: tuple = (30.0, 60.0, 120.0)
    weak_minutes: float | None = None
    extent: tuple | None = None
    neighbours: int = 16

    def __post_init__(self):
        _positive("cell_m", self.cell_m, " metres")
        _not_negative("margin_m", self.margin_m, " metres")
        bands = tuple(float(b) for b in self.bands)
        if not bands or any(not math.isfinite(b) or b <= 0 for b in bands):
            raise OptionError(f"bands {list(self.bands)}: give positive minutes, e.g. 30,60,120", key="bands")
        object.__setattr__(self, "bands", tuple(sorted(set(bands))))
        if self.weak_minutes is not None:
            _positive("weak_minutes", self.weak_minutes, " minutes")
        if self.extent is not None:
            ext = tuple(float(v) for v in self.extent)
            if len(ext) != 4 or not all(map(math.isfinite, ext)) or ext[0] >= ext[2] or ext[1] >= ext[3]:
                raise OptionError(f"extent {list(self.extent)}: give xmin, ymin, xmax, ymax in the working CRS, "
                                  "with xmin < xmax and ymin < ymax", key="extent")
            object.__setattr__(self, "extent", ext)
        if isinstance(self.neighbours, bool) or self.neighbours not in (8, 16):
            raise OptionError(f"neighbours {self.neighbours!r}: choose 8 (axes and diagonals) or 16 (also the "
                              "knight moves)", key="neighbours")
        object.__setattr__(self, "neighbours", int(self.neighbours))

    @property
    def threshold(self) -> float:
        """The weak-region threshold in minutes (``weak_minutes``, else the largest band)."""
        return float(self.weak_minutes) if self.weak_minutes is not None else max(self.bands)


def defaults(cls) -> dict:
    """Field name -> default value of an options dataclass (for help texts and the glossary).

    >>> defaults(RoutingOptions)["walk_kmh"]
    5.0
    """
    return {f.name: f.default for f in fields(cls)}


@dataclass(frozen=True)
class ComputeOptions:
    """Where the study's independent work runs (``[compute]``): in-process, a local cluster or a running one.

    Attributes
    ----------
    workers : int or None
        Start a local dask.distributed cluster of this many worker processes.
    scheduler : str or None
        Join a running scheduler at this address (``tcp://host:8786``).
    timeout_s : float
        Seconds to wait for the scheduler and a worker.
    """

    workers: int | None = None
    scheduler: str | None = None
    timeout_s: float = 30.0


@dataclass(frozen=True)
class CriticalityOptions:
    """The ``[criticality]`` section: every link closed in turn, or one hazard closing many.

    Attributes
    ----------
    links : str or tuple of int
        ``"all"``, a file of edge ids (resolved against the study folder), or the ids.
    hazard, hazard_layer : str or None
        Hazard polygons (every link they touch closes).
    hazard_raster : str or None
        A hazard raster; cells above ``hazard_above`` close the links they touch.
    hazard_above : float or None
    closes_bridges : bool
        Grade-separated links close too.
    """

    links: object = "all"
    hazard: str | None = None
    hazard_layer: str | None = None
    hazard_raster: str | None = None
    hazard_above: float | None = None
    closes_bridges: bool = False

    @property
    def is_hazard(self) -> bool:
        return self.hazard is not None or self.hazard_raster is not None


@dataclass(frozen=True)
class IndicesOptions:
    """The ``[indices]`` section: accessibility indices of every settlement (minutes).

    Attributes
    ----------
    measures : tuple of str
        One or more of cumulative, gravity, 2sfca, e2sfca, bfca.
    within_minutes : float or None
        The catchment T, minutes (gravity without it sums over every reachable hub).
    decay, decay_param : str or None, float or None
        Gravity's decay form and its parameter B.
    capacity_field : str or None
        The hubs' capacity field (default 1 per hub).
    zone_minutes, zone_weights : tuple of float or None
        E2SFCA's sub-zones (default thirds of T, weights 1, 0.68, 0.22).
    """

    measures: tuple = ()
    within_minutes: float | None = None
    decay: str | None = None
    decay_param: float | None = None
    capacity_field: str | None = None
    zone_minutes: tuple | None = None
    zone_weights: tuple | None = None

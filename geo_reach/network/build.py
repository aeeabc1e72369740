"""The network builder: from messy line layers to a clean, routable network.

This module is the builder's front: the options (:class:`LayerSpec`,
:class:`BuildOptions`, the one place the build defaults live), the result
type, and :func:`build_network` / :func:`check_layers`, which run the steps
kept in their own modules.  The topology steps work on one flat table of
straight segments with numpy (a uniform grid hash finds candidate segment
pairs) and scipy's cKDTree, never a Python loop per feature, so a million
segments build in seconds:

1. :mod:`~geo_reach.network.prepare` - read each layer, drop what has no
   usable geometry (reported), drop Z/M, explode multi-parts, reproject to
   the working CRS (:mod:`~geo_reach.network.geodesy`), read the attributes,
   remove exact duplicate features.
2. :mod:`~geo_reach.network.noding` - find every pair of segments that
   touch or cross (grid hash, :mod:`~geo_reach.network.gridhash`, then the
   closed-form intersection), and mark the meeting points as nodes on both
   lines: a vertex where one exists, a new vertex otherwise
   (``crossing_split``).  Pairs at different levels meet only at line ends;
   an interior crossing between them is kept (``crossing_kept``).  Modes
   never meet here.
3. :mod:`~geo_reach.network.overshoots` - trim overshoots: a free line end
   running less than the tolerance past a node of its own line is cut back
   to it.
4. :mod:`~geo_reach.network.joining` - join line ends closer than the
   tolerance to each other (``gap_joined``), then dead ends lying within the
   tolerance of another line's interior onto that line (a T-junction, also
   ``gap_joined``).
5. :mod:`~geo_reach.network.stations` - attach stations (rail) and access
   nodes (cable); modes join only there, through ``transfer`` links
   carrying the boarding penalty.
6. :mod:`~geo_reach.network.assembly` - cut every line at its nodes into
   edges, keeping every vertex; merge nodes closer than 1 mm (numeric
   noise); remove duplicate edges; measure every edge on the ellipsoid and
   cost it; report dead ends near other lines (``unjoined_gap``, between the
   tolerance and ten times it) and short dead-end stubs (``dangle``).

All tolerances are metres on the ground in the working CRS, which is always
metric (the UTM zone of the data's centre unless given).

References
----------
.. [1] Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy
   87, 43-55 (pyproj.Geod implements it; used for ``length_m``).
.. [2] O'Rourke, J. (1998). Computational Geometry in C, 2nd ed., section 7.7
   (segment-segment intersection by parametric cross products).
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields
from typing import Any, Callable

import numpy as np

from ..errors import InputError, OptionError, where
from .assembly import assemble
from .costs import MODES
from .geodesy import geodesic_lengths, working_crs
from .gridhash import box_pairs
from .issues import ISSUE_KINDS, LENGTH_KEYS, IssueLog, empty_report
from .joining import join_ends
from .model import Network
from .noding import node_crossings, report_crossings
from .overshoots import trim_overshoots
from .prepare import prepare_lines, read_specs, remove_duplicate_features
from .stations import attach_access
from .table import NOISE_M, LineTable

__all__ = ["LayerSpec", "BuildOptions", "BuildResult", "build_network", "check_layers",
           "working_crs", "geodesic_lengths", "ISSUE_KINDS", "BUILD_DEFAULTS", "DANGLE_FACTOR",
           "box_pairs", "NOISE_M"]

#: ``dangle_m`` defaults to this many times ``snap_m``.
DANGLE_FACTOR = 10.0


@dataclass
class LayerSpec:
    """One input line layer and its cost rules.

    Parameters
    ----------
    source : str, LayerRef or GeoDataFrame
        ``path`` or ``path:layername``, or a GeoDataFrame (its index is taken
        as the source feature id).
    mode : {'road', 'rail', 'cable'}
    name : str, optional
        Label used in ``src_layer`` (default: the layer name or file stem).
    speed_field, class_field : str, optional
        A field with the speed in km/h; a field with a road class looked up in
        ``class_speeds`` (over the defaults in :mod:`geo_reach.network.costs`).
    class_speeds : dict, optional
    speed_kmh : float, optional
        One speed for the whole layer (and the fallback for bad values).
    oneway_field : str, optional
        yes/true/1 = one-way in the digitised direction, -1 = against it.
    level_field : str, optional
        Vertical level; interior crossings of different levels are not joined.
    all_season_field : str, optional
        Carried to the ``all_season`` edge field (1/0).
    access_points : str, LayerRef or GeoDataFrame, optional
        Stations (rail) or access nodes (cable), snapped to the line.
    boarding_minutes : float
        Rail: penalty paid on each boarding, on the transfer link from road to rail.
    assume_crs : CRS-like, optional
        CRS to assume when the layer has none.
    closed_field : str, optional
        A field that is true for features closed to traffic (a scenario's
        closures): they stay in the network (same nodes and edges as without
        the closure) with no cost on any weight (``closed`` = 1 on their edges).
    """

    source: Any
    mode: str = "road"
    name: str | None = None
    speed_field: str | None = None
    class_field: str | None = None
    class_speeds: dict | None = None
    speed_kmh: float | None = None
    oneway_field: str | None = None
    level_field: str | None = None
    all_season_field: str | None = None
    access_points: Any = None
    boarding_minutes: float = 0.0
    assume_crs: Any = None
    closed_field: str | None = None


@dataclass
class BuildOptions:
    """Options shared by all layers of one build: the one place the build defaults live.

    Parameters
    ----------
    crs : CRS-like, optional
        The working CRS (projected, metres); default the UTM zone of the data's centre.
    snap_m : float
        The snapping tolerance (m): line ends this close to each other, or to
        another line, are joined; overshoots shorter than this are trimmed.
    dangle_m : float, optional
        Dead ends shorter than this (m) off a junction are reported as
        dangles; default :data:`DANGLE_FACTOR` times ``snap_m``.
    access_snap_m : float
        Largest distance (m) from a station or access node to its line.
    transfer_max_m : float
        Largest distance (m) from a rail station to the road it is linked to.
    transfer_walk_kmh : float
        Walking speed (km/h) on transfer links.

    All distances are metres on the ground.  :data:`BUILD_DEFAULTS` (or
    :meth:`defaults`) lists the defaults for the study schema and the command line.

    Raises
    ------
    OptionError
        A value out of range; the message names the option in words and by
        its key (``snap_m`` ...), never by a command-line flag.
    """

    crs: Any = None
    snap_m: float = 1.0
    dangle_m: float | None = None
    access_snap_m: float = 100.0
    transfer_max_m: float = 1000.0
    transfer_walk_kmh: float = 5.0

    def __post_init__(self) -> None:
        if not (self.snap_m >= 0 and np.isfinite(self.snap_m)):
            raise OptionError(f"the snapping tolerance (snap_m) {self.snap_m} must be a distance of zero or more "
                              "metres", key="snap_m")
        if self.dangle_m is None:
            self.dangle_m = DANGLE_FACTOR * self.snap_m
        if not (self.dangle_m >= 0 and np.isfinite(self.dangle_m)):
            raise OptionError(f"the dangle length (dangle_m) {self.dangle_m} must be zero or more metres", key="dangle_m")
        if not (self.transfer_walk_kmh > 0 and np.isfinite(self.transfer_walk_kmh)):
            raise OptionError(f"the transfer walking speed (transfer_walk_kmh) {self.transfer_walk_kmh} must be a "
                              "positive speed in km/h", key="transfer_walk_kmh")
        for name, words in (("transfer_max_m", "the largest transfer distance"),
                            ("access_snap_m", "the station snapping distance")):
            v = getattr(self, name)
            if not (v >= 0 and np.isfinite(v)):
                raise OptionError(f"{words} ({name}) {v} must be zero or more metres", key=name)

    @classmethod
    def defaults(cls) -> dict[str, Any]:
        """Every option's default, by name (``dangle_m``: None, meaning :data:`DANGLE_FACTOR` x ``snap_m``).

        >>> BuildOptions.defaults()["snap_m"]
        1.0
        """
        return {f.name: f.default for f in fields(cls)}


#: The build defaults by option name (see :class:`BuildOptions`).
BUILD_DEFAULTS: dict[str, Any] = BuildOptions.defaults()


@dataclass
class BuildResult:
    """What :func:`build_network` returns: the network, the issues layer and the report."""

    network: Network | None
    issues: Any  # GeoDataFrame
    report: dict = field(default_factory=dict)


def build_network(layers: list, options: BuildOptions | None = None, *,
                  progress: Callable[[str], None] | None = None) -> BuildResult:
    """Build a clean, routable network from line layers.

    Parameters
    ----------
    layers : list of LayerSpec (or of str, taken as road layers)
    options : BuildOptions, optional
    progress : callable, optional
        Called with a short step name as each step starts.

    Returns
    -------
    BuildResult
        ``network`` (a :class:`~geo_reach.network.model.Network` in the
        working CRS), ``issues`` (GeoDataFrame of points: ``kind``,
        ``detail``, ``src_layer``, ``src_fid``) and ``report`` (dict, the
        JSON report).

    Raises
    ------
    InputError
        Missing file or layer, wrong geometry type, empty layer, no CRS,
        unknown field or option.
    """
    return _run(layers, options or BuildOptions(), progress, assemble_network=True)


def check_layers(layers: list, options: BuildOptions | None = None, *,
                 progress: Callable[[str], None] | None = None) -> BuildResult:
    """The data-quality pass: the issues and the report, without costing a network.

    Same topology rules as :func:`build_network` (so the same spots are
    reported); ``network`` in the result is ``None``.
    """
    return _run(layers, options or BuildOptions(), progress, assemble_network=False)


def _finish_report(report: dict, issues: IssueLog, net: Network) -> None:
    """Counts per issue kind and the network's figures."""
    for kind in ISSUE_KINDS:
        report["issues"][kind] = issues.count(kind)
        report[kind] = report["issues"][kind]   # also at the top level, one key per kind
    report["nodes"] = net.n_nodes
    report["edges"] = net.n_edges
    report["components"] = net.n_components
    report["largest_component_nodes"] = int((net.component == 0).sum()) if net.n_nodes else 0
    report["network_length_m"] = float(net.edge_length_m.sum())
    report["edges_by_mode"] = {m: int((net.edge_mode == m).sum()) for m in (*MODES, "transfer")
                               if (net.edge_mode == m).any()}
    for k in LENGTH_KEYS:
        report[k] = round(report[k], 3)


def _run(layers: list, options: BuildOptions, progress: Callable[[str], None] | None,
         assemble_network: bool) -> BuildResult:
    step = progress or (lambda name: None)
    specs = [s if isinstance(s, LayerSpec) else LayerSpec(s) for s in layers]
    if not specs:
        raise OptionError("no line layer given; name at least one line layer")
    issues = IssueLog()
    report = empty_report()
    step("reading layers")
    frames = read_specs(specs)
    labels = [lab for _, lab, _ in frames]
    crs = working_crs([f for f, _, _ in frames], options.crs)
    from .._meta import CAUTION

    report.update(caution=CAUTION, crs=crs.to_string(), snap_m=options.snap_m, dangle_m=options.dangle_m)
    lines = prepare_lines(specs, frames, crs, issues, report)
    if len(lines) == 0:
        raise InputError(f"{where(*frames[0][2])}no usable line remains after dropping empty geometries; "
                         "check the layer")
    lines = remove_duplicate_features(lines, labels, issues, report)
    step("noding")
    tab = LineTable.from_lines(lines, labels)
    node_crossings(tab, issues)
    trim_overshoots(tab, options.snap_m, crs, issues, report)
    join_ends(tab, options.snap_m, crs, issues, report)
    report_crossings(tab, issues)
    plan = attach_access(tab, lines["layer"].to_numpy(), specs, labels, crs, options.access_snap_m,
                         options.transfer_max_m, issues)
    step("assembling")
    net = assemble(tab, lines, labels, specs, plan, options, crs, issues, report, step)
    step("done")
    _finish_report(report, issues, net)
    return BuildResult(net if assemble_network else None, issues.frame(crs), report)

"""geo-reach: how well places are connected over road, rail and cable networks.

The Python API in one place::

    import geo_reach as gr
    result = gr.build_network([gr.LayerSpec("roads.gpkg:roads", class_field="class")])
    cost, hub = gr.nearest_hub(result.network, [0, 42])
    study = gr.load_study("study.toml"); gr.run_study(study, "out/")

Names are imported on first use, so ``import geo_reach`` (and the command
line's start-up) stays fast.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from ._meta import CAUTION, __version__
from .errors import GeoReachError, InputError


def _numba_cache_dir() -> None:
    """Compiled kernels are cached beside the package; where that is read-only (a system install, a
    read-only home), cache them in a writable folder instead (numba reads ``NUMBA_CACHE_DIR`` when it
    is first imported, so this runs before any kernel module)."""
    import os
    import tempfile

    if os.environ.get("NUMBA_CACHE_DIR"):
        return
    here = os.path.dirname(os.path.abspath(__file__))
    if os.access(here, os.W_OK):
        return
    for base in (os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache"),
                 tempfile.gettempdir()):
        folder = os.path.join(base, "geo-reach-numba")
        try:
            os.makedirs(folder, exist_ok=True)
        except OSError:
            continue
        if os.access(folder, os.W_OK):
            os.environ["NUMBA_CACHE_DIR"] = folder
            return


_numba_cache_dir()

#: Public name -> the module that defines it.
_API = {
    "Network": ".network.model", "WEIGHTS": ".network.weights", "Weight": ".network.weights",
    "as_weight": ".network.weights",
    "BuildOptions": ".network.build", "BuildResult": ".network.build", "LayerSpec": ".network.build",
    "build_network": ".network.build", "check_layers": ".network.build", "read_network": ".network.io",
    "RoutingOptions": ".analysis.options", "MetricsOptions": ".analysis.options",
    "SurfaceOptions": ".analysis.options",
    "attach_points": ".analysis.attach", "hub_access": ".analysis.access",
    "nearest_hub": ".analysis.routing", "one_to_all": ".analysis.routing",
    "od_matrix": ".analysis.trips", "shortest_path": ".analysis.trips",
    "diameter": ".analysis.metrics", "global_efficiency": ".analysis.metrics", "mean_path": ".analysis.metrics",
    "reach_profile": ".analysis.profile", "compute_surface": ".analysis.surface",
    "load_study": ".study", "run_study": ".pipeline",
}

__all__ = ["CAUTION", "__version__", "GeoReachError", "InputError", *_API]


def __getattr__(name):
    if name in _API:
        import importlib

        value = getattr(importlib.import_module(_API[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'geo_reach' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_API))

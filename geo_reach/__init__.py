"""geo-reach: how well places are connected over road, rail and cable networks.

The Python API in one place::

    import geo_reach as gr
    result = gr.build_network([gr.LayerSpec("roads.gpkg:roads", class_field="class")])
    cost, hub = gr.nearest_hub(result.network, [0, 42])
    study = gr.load_study("study.toml"); gr.run_study(study, "out/")

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from ._meta import CAUTION, __version__  # noqa: E402
from .errors import GeoReachError, InputError  # noqa: E402
from .network.model import Network  # noqa: E402
from .network.weights import WEIGHTS, Weight, as_weight  # noqa: E402
from .network.build import BuildOptions, BuildResult, LayerSpec, build_network, check_layers  # noqa: E402
from .analysis.attach import attach_points  # noqa: E402
from .analysis.access import hub_access  # noqa: E402
from .analysis.routing import nearest_hub, one_to_all  # noqa: E402
from .analysis.trips import od_matrix, shortest_path  # noqa: E402
from .analysis.metrics import diameter, global_efficiency, mean_path  # noqa: E402
from .analysis.profile import reach_profile  # noqa: E402
from .analysis.surface import compute_surface  # noqa: E402
from .study import load_study  # noqa: E402
from .pipeline import run_study  # noqa: E402

__all__ = [
    "CAUTION", "__version__", "GeoReachError", "InputError", "Network", "WEIGHTS", "Weight", "as_weight",
    "BuildOptions", "BuildResult", "LayerSpec", "build_network", "check_layers",
    "attach_points", "hub_access", "nearest_hub", "od_matrix", "one_to_all", "shortest_path",
    "diameter", "global_efficiency", "mean_path", "reach_profile", "compute_surface",
    "load_study", "run_study",
]

"""The network: building a clean, routable network from line layers, the network type, weights, costs.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from .build import BuildOptions, BuildResult, LayerSpec, build_network, check_layers
from .io import read_network
from .model import Adjacency, Network
from .weights import WEIGHT_NAMES, WEIGHTS, Weight, as_weight

__all__ = ["BuildOptions", "BuildResult", "LayerSpec", "build_network", "check_layers", "read_network",
           "Adjacency", "Network", "WEIGHT_NAMES", "WEIGHTS", "Weight", "as_weight"]

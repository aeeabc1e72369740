"""The network: building a clean, routable network from line layers, the network type, weights, costs.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

#: Public name -> the module that defines it (imported on first use, so start-up stays fast).
_API = {
    "BuildOptions": ".build",
    "BuildResult": ".build",
    "LayerSpec": ".build",
    "build_network": ".build",
    "check_layers": ".build",
    "read_network": ".io",
    "Adjacency": ".model",
    "Network": ".model",
    "WEIGHT_NAMES": ".weights",
    "WEIGHTS": ".weights",
    "Weight": ".weights",
    "as_weight": ".weights",
}

__all__ = list(_API)


def __getattr__(name):
    if name in _API:
        import importlib

        value = getattr(importlib.import_module(_API[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_API))

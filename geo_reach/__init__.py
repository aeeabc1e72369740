"""geo-reach: how well places are connected over road, rail and cable networks.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

__version__ = "0.1.0"

from .errors import GeoReachError, InputError  # noqa: E402
from .network.model import Network, WEIGHTS  # noqa: E402

#: The caution every report and map carries.
CAUTION = ("Model estimates only: local surveys, codes and licensed professional practice "
           "decide health, emergency and investment choices.")

__all__ = ["Network", "WEIGHTS", "GeoReachError", "InputError", "CAUTION", "__version__"]

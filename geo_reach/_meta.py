"""Facts about the tool itself that every layer may read: its version and the caution line.

This is a leaf module: it imports nothing from geo-reach, so any module can
import it without pulling in the rest of the package.
"""

__all__ = ["__version__", "CAUTION", "TOOL"]

__version__ = "0.1.0"

#: The tool's name as written into outputs.
TOOL = "geo-reach"

#: The caution every report, table and map carries.
CAUTION = ("Model estimates only: local surveys, codes and licensed professional practice "
           "decide health, emergency and investment choices.")

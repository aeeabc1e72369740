"""A commented starter study from the user's own layers (``geo-reach init``)."""

from .inspect import Source, classify_points, line_suggestions, read_sources
from .write import starter_study, write_checked

__all__ = ["Source", "read_sources", "classify_points", "line_suggestions", "starter_study", "write_checked"]

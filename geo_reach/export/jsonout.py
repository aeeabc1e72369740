"""The one JSON encoder for everything geo-reach writes or prints as JSON.

Rules, the same in every output (``summary.json``, build reports, ``--json``
on the console, GeoJSON routes):

* NaN and infinities are written as ``null`` (JSON has no such numbers); a
  field that can be null says in the glossary what null means there.
* numpy scalars and arrays become plain numbers and lists; paths and other
  objects become their text.
* Floats keep 12 significant digits, so the same inputs give byte-identical
  files on every machine.
"""

from __future__ import annotations

import json
import math
from pathlib import PurePath

import numpy as np

__all__ = ["jsonable", "dumps", "SIGNIFICANT_DIGITS"]

#: Significant digits kept in floats.
SIGNIFICANT_DIGITS = 12


def jsonable(obj):
    """``obj`` with numpy types, non-finite floats, paths and tuples made JSON-ready (recursively).

    Examples
    --------
    >>> jsonable({"a": np.float64("nan"), "b": [np.int64(3), 0.1 + 0.2], "c": (1, float("inf"))})
    {'a': None, 'b': [3, 0.3], 'c': [1, None]}
    """
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return jsonable(obj.tolist())
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        if not math.isfinite(f):
            return None
        return float(f"{f:.{SIGNIFICANT_DIGITS}g}")
    if obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, PurePath):
        return str(obj)
    if hasattr(obj, "name") and hasattr(obj, "unit"):   # a Weight
        return str(obj)
    return str(obj)


def dumps(obj, indent: int | None = 2) -> str:
    """``obj`` as JSON text (see the module rules), without a trailing newline."""
    return json.dumps(jsonable(obj), indent=indent, ensure_ascii=False, allow_nan=False)

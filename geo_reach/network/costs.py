"""Cost rules per mode: speeds for road and rail, signal latency for cable.

Every default here is ours and documented; the build report lists each
default that was used, so an analyst can see where the numbers came from.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

__all__ = [
    "MODES", "DEFAULT_SPEED_KMH", "DEFAULT_CLASS_SPEEDS_KMH", "FIBRE_SIGNAL_SPEED_M_PER_MS",
    "feature_speeds", "minutes_from_length", "latency_from_length", "parse_oneway", "read_oneway",
    "ONEWAY_FORWARD", "ONEWAY_REVERSE", "ONEWAY_BOTH",
]

#: Modes a line layer can have; ``transfer`` links are made by the builder.
MODES = ("road", "rail", "cable")

#: Speed used when a layer gives no speed rule at all (km/h).  Our own
#: round figures for a rural network: a mixed road of fair condition, and a
#: regional passenger train including dwell times.
DEFAULT_SPEED_KMH = {"road": 40.0, "rail": 60.0}

#: Default class-to-speed table (km/h), matched case-insensitively.  Our own
#: planning figures for rural roads in fair condition; override with
#: ``class_speeds``.  Synonyms map common class words onto the same figure.
DEFAULT_CLASS_SPEEDS_KMH = {
    "motorway": 100.0, "expressway": 100.0, "highway": 90.0, "trunk": 80.0,
    "primary": 70.0, "main": 65.0, "secondary": 55.0, "tertiary": 45.0,
    "feeder": 40.0, "collector": 40.0, "local": 30.0, "residential": 25.0,
    "street": 25.0, "unclassified": 30.0, "service": 15.0, "track": 15.0,
    "path": 5.0, "footpath": 5.0, "ferry": 15.0,
}

#: Signal speed in optical fibre, metres per millisecond: c / n_g with the
#: group index n_g ~ 1.468 of standard single-mode fibre (ITU-T G.652) at
#: 1550 nm, i.e. about 4.9 microseconds per km.  Common practice; the index
#: value is from memory of fibre datasheets.
FIBRE_SIGNAL_SPEED_M_PER_MS = 299_792.458 / 1.468


def minutes_from_length(length_m: ArrayLike, speed_kmh: ArrayLike) -> np.ndarray:
    """Travel time in minutes for ``length_m`` metres at ``speed_kmh``.

    >>> float(minutes_from_length(1000.0, 60.0))
    1.0
    """
    return np.asarray(length_m, dtype=float) / 1000.0 / np.asarray(speed_kmh, dtype=float) * 60.0


def latency_from_length(length_m: ArrayLike) -> np.ndarray:
    """One-way signal latency in ms over ``length_m`` metres of fibre.

    >>> round(float(latency_from_length(1_000_000.0)), 2)   # 1000 km
    4.9
    """
    return np.asarray(length_m, dtype=float) / FIBRE_SIGNAL_SPEED_M_PER_MS


#: One-way values (matched case-insensitively, spaces trimmed; numbers by value): one-way in the
#: digitised direction ...
ONEWAY_FORWARD = ("yes", "true", "1", "y", "t", "forward", "fwd")
#: ... one-way against it ...
ONEWAY_REVERSE = ("-1", "reverse", "rev", "backward", "r")
#: ... and both ways (as are null and empty values).
ONEWAY_BOTH = ("no", "false", "0", "n", "f", "both", "none", "two-way", "twoway", "b")


def read_oneway(values: Sequence) -> tuple[np.ndarray, np.ndarray]:
    """Direction code per feature, and which values are not in the documented sets.

    Parameters
    ----------
    values : sequence
        The one-way field's values.

    Returns
    -------
    code : ndarray of int8
        1 one-way in the digitised direction (:data:`ONEWAY_FORWARD`), -1
        against it (:data:`ONEWAY_REVERSE`), 0 both ways (:data:`ONEWAY_BOTH`,
        null or empty).
    unknown : ndarray of bool
        Values in none of the sets (their code is 0); the builder refuses them.

    >>> code, unknown = read_oneway(["yes", "no", None, -1, 1.0, "TRUE", "f", " T ", "", "reversible", 2])
    >>> code.tolist(), unknown.tolist()
    ([1, 0, 0, -1, 1, 1, 0, 1, 0, 0, 0], [False, False, False, False, False, False, False, False, False, True, True])
    """
    out = np.zeros(len(values), dtype=np.int8)
    unknown = np.zeros(len(values), dtype=bool)
    for i, v in enumerate(values):
        if v is None or v is pd.NA or (isinstance(v, float) and np.isnan(v)):
            continue
        if isinstance(v, (bool, np.bool_)):
            out[i] = 1 if v else 0
            continue
        if isinstance(v, (int, float, np.integer, np.floating)):
            if not np.isfinite(v):
                continue
            s = str(int(v)) if float(v).is_integer() else str(v)
        else:
            s = str(v).strip().lower()
        if s in ONEWAY_FORWARD:
            out[i] = 1
        elif s in ONEWAY_REVERSE:
            out[i] = -1
        elif s and s not in ONEWAY_BOTH:
            unknown[i] = True
    return out, unknown


def parse_oneway(values: Sequence) -> np.ndarray:
    """Direction code per feature, reading any value outside the documented sets as both ways.

    The lenient reading (for guessing whether a field is a one-way flag);
    the builder uses :func:`read_oneway` and refuses unknown values.

    >>> parse_oneway(["yes", "no", None, -1, 1.0, "TRUE", "f", "t"]).tolist()
    [1, 0, 0, -1, 1, 1, 0, 1]
    """
    return read_oneway(values)[0]


def feature_speeds(frame: pd.DataFrame, mode: str, speed_field: str | None = None, class_field: str | None = None,
                   class_speeds: dict | None = None, speed_kmh: float | None = None
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, str | None]:
    """Speed per feature (km/h) and what was defaulted.

    Precedence per feature: a valid value of ``speed_field``; else the
    class table (``class_speeds`` over :data:`DEFAULT_CLASS_SPEEDS_KMH`) for
    ``class_field``; else ``speed_kmh``; else the mode default
    (:data:`DEFAULT_SPEED_KMH`).  A speed that is missing, non-numeric, zero
    or negative is not valid and falls through to the next rule.

    Returns
    -------
    speed : ndarray of float64, shape (len(frame),)
    defaulted : ndarray of bool
        Features whose preferred rule gave no valid speed, so a later rule
        gave it (the class table, ``speed_kmh`` or the mode default): each
        is reported per feature.
    reason : ndarray of object
        Why each defaulted feature was defaulted and what was used (``None`` elsewhere).
    layer_default : str or None
        Set when the layer had no rule at all and the mode default was used.
    """
    n = len(frame)
    speed = np.full(n, np.nan)
    reason = np.full(n, None, dtype=object)
    preferred_missing = np.zeros(n, dtype=bool)
    layer_default = None
    if speed_field is not None:
        raw = frame[speed_field]
        num = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
        ok = np.isfinite(num) & (num > 0)
        speed[ok] = num[ok]
        bad = ~ok
        preferred_missing |= bad
        for i in np.nonzero(bad)[0]:
            v = raw.iloc[i]
            reason[i] = (f"{speed_field} is missing" if v is None or (isinstance(v, float) and np.isnan(v))
                         else f"{speed_field}={v!r} is not a positive number")
    table = {k.lower(): float(v) for k, v in DEFAULT_CLASS_SPEEDS_KMH.items()}
    if class_speeds:
        table.update({str(k).lower(): float(v) for k, v in class_speeds.items()})
    if class_field is not None:
        cls = frame[class_field].astype("string").str.strip().str.lower().to_numpy(dtype=object, na_value=None)
        todo = np.isnan(speed)
        for i in np.nonzero(todo)[0]:
            c = cls[i]
            if c is not None and c in table:
                speed[i] = table[c]
                if preferred_missing[i]:      # the speed field failed: say the class gave the speed
                    reason[i] = f"{reason[i]}; class {c!r} speed {table[c]:g} km/h used"
            else:
                preferred_missing[i] = True
                if reason[i] is None:
                    reason[i] = f"{class_field}={c!r} is not in the class table" if c is not None else f"{class_field} is missing"
    fallback = float(speed_kmh) if speed_kmh is not None else DEFAULT_SPEED_KMH.get(mode, np.nan)
    todo = np.isnan(speed)
    if speed_field is None and class_field is None and speed_kmh is None:
        layer_default = f"{mode}: no speed rule given; {fallback:g} km/h used for every feature"
    speed[todo] = fallback
    for i in np.nonzero(preferred_missing & todo)[0]:
        reason[i] = f"{reason[i]}; {fallback:g} km/h used"
    defaulted = preferred_missing if (speed_field or class_field) else np.zeros(n, bool)
    return speed, defaulted, reason, layer_default

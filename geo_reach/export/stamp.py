"""The one timestamp written into outputs, so that the same inputs give byte-identical files.

GeoPackages record a ``last_change`` time and spreadsheets a creation time.
geo-reach writes a fixed value there instead of the clock: ``SOURCE_DATE_EPOCH``
when it is set (the reproducible-builds convention, reproducible-builds.org),
otherwise the newest modification time among the command's inputs, otherwise
1970-01-01.  Run times stay in ``summary.json`` under ``timing`` only.
"""

from __future__ import annotations

import datetime as _dt
import os

__all__ = ["output_time", "set_output_time", "current_output_time"]

_current: _dt.datetime | None = None


def output_time(inputs=()) -> _dt.datetime:
    """The timestamp for outputs made from ``inputs`` (UTC, whole seconds)."""
    env = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    if env.isdigit():
        return _dt.datetime.fromtimestamp(int(env), _dt.timezone.utc)
    times = []
    for p in inputs:
        try:
            times.append(int(os.stat(p).st_mtime))
        except (OSError, TypeError, ValueError):
            continue
    return _dt.datetime.fromtimestamp(max(times) if times else 0, _dt.timezone.utc)


def set_output_time(inputs=()) -> _dt.datetime:
    """Fix the timestamp for the outputs of this run (and tell GDAL, for GeoPackage ``last_change``)."""
    global _current
    _current = output_time(inputs)
    _tell_gdal(_current)
    return _current


def current_output_time() -> _dt.datetime:
    """The timestamp fixed for this run (from ``SOURCE_DATE_EPOCH`` or 1970 if none was set)."""
    return _current if _current is not None else output_time(())


def _tell_gdal(t: _dt.datetime) -> None:
    import pyogrio

    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": t.strftime("%Y-%m-%dT%H:%M:%S.000Z")})

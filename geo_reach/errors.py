"""One error tree for the whole tool.

Every error the tool raises on purpose derives from :class:`GeoReachError`.
Problems with the user's data or options derive from :class:`InputError`
(and from the matching builtin, so ``except FileNotFoundError`` still works);
the command line turns them into one line on stderr and exit status 2.

A message names the file, the layer, the feature and what to do, in that
order where they apply.  Build messages with :func:`where` so the wording is
the same in every module.
"""

from __future__ import annotations

__all__ = [
    "GeoReachError",
    "InputError",
    "MissingInputError",
    "LayerError",
    "CRSError",
    "OutputExistsError",
    "OutputError",
    "OptionError",
    "where",
]


class GeoReachError(Exception):
    """Base class of every error geo-reach raises on purpose.

    Parameters
    ----------
    message : str
        One line: where, what is wrong, what to do.
    key : str, optional
        The option the message is about, in neutral words as the library
        names it (``max_access_m``, ``snap_m`` ...).  The message then starts
        with that name; the command line rewrites it to the flag the user
        typed (``--max-access-m``) and the study loader to the dotted key
        (``routing.max_access_m``), so a value is blamed where it was given.
    """

    def __init__(self, *args, key: str | None = None):
        super().__init__(*args)
        self.key = key

    def with_message(self, message: str) -> "GeoReachError":
        """A copy of this error (same class and key) with another message."""
        # Built afresh rather than copied: copy.copy goes through __reduce_ex__, which libraries may patch
        # (distributed installs tblib's pickling support, which cannot rebuild a class with two builtin bases).
        err = type(self)(message, key=self.key)
        err.__dict__.update({k: v for k, v in self.__dict__.items() if k != "key"})
        return err


class InputError(GeoReachError, ValueError):
    """The user's data or options cannot be used as given (exit status 2)."""


class MissingInputError(InputError, FileNotFoundError):
    """An input file, layer or field does not exist."""


class LayerError(InputError):
    """A layer exists but holds the wrong kind of data (geometry type, emptiness)."""


class CRSError(InputError):
    """A layer or raster has no coordinate reference system, or an unusable one."""


class OptionError(InputError):
    """A command-line option or API argument is out of range or inconsistent."""


class OutputError(InputError, OSError):
    """An output cannot be written where the user asked."""


class OutputExistsError(OutputError, FileExistsError):
    """An output already exists and ``overwrite`` was not given."""


def where(path=None, layer=None, feature=None, field=None) -> str:
    """Return the location prefix used by every message: ``file 'a.gpkg', layer 'roads', feature 7: ``.

    Parameters
    ----------
    path, layer, feature, field : optional
        The parts that apply; ``None`` parts are left out.

    Examples
    --------
    >>> where("roads.gpkg", "roads", 7)
    "file 'roads.gpkg', layer 'roads', feature 7: "
    >>> where("roads.shp")
    "file 'roads.shp': "
    """
    parts = []
    if path is not None:
        parts.append(f"file '{path}'")
    if layer is not None:
        parts.append(f"layer '{layer}'")
    if feature is not None:
        parts.append(f"feature {feature}")
    if field is not None:
        parts.append(f"field '{field}'")
    return (", ".join(parts) + ": ") if parts else ""

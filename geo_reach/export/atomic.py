"""Atomic writes: build an output under a temporary name beside it, then rename.

Nothing half-written is ever left under the user's name, and an existing file
is replaced only once the new one is complete.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from pathlib import Path

from ..errors import OutputError, OutputExistsError

__all__ = ["check_output", "atomic_path", "atomic_dir"]


def check_output(path, overwrite: bool = False, what: str = "output") -> Path:
    """Check that ``path`` can be written, before any work starts.

    Raises
    ------
    OutputExistsError
        ``path`` exists and ``overwrite`` is false.
    OutputError
        The parent folder is missing or is not a folder.
    """
    path = Path(path)
    parent = path.parent if str(path.parent) else Path(".")
    if path.exists() and not overwrite:
        raise OutputExistsError(
            f"file '{path}': {what} already exists; pass --overwrite to replace it or choose another name"
        )
    if not parent.exists():
        raise OutputError(f"file '{path}': output folder '{parent}' does not exist; create it first")
    if not parent.is_dir():
        raise OutputError(f"file '{path}': '{parent}' is a file, not a folder; choose another output path")
    if path.exists() and path.is_dir() and what != "folder":
        raise OutputError(f"file '{path}': is a folder; choose a file name")
    return path


@contextlib.contextmanager
def atomic_path(path, suffix: str | None = None):
    """Yield a temporary path beside ``path``; on success rename it over ``path``.

    On any error the temporary file is removed and ``path`` is untouched.

    Raises
    ------
    OutputError
        The folder does not allow creating the temporary file.
    """
    path = Path(path)
    suffix = suffix if suffix is not None else path.suffix
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=".partial" + suffix, dir=path.parent or ".")
    except OSError as err:
        raise OutputError(f"file '{path}': cannot write in folder '{path.parent}' ({err.strerror}); "
                          "choose a writable folder") from err
    os.close(fd)
    os.unlink(tmp)  # writers (GDAL) want to create the file themselves
    tmp = Path(tmp)
    try:
        yield tmp
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


@contextlib.contextmanager
def atomic_dir(path):
    """Yield a temporary folder beside ``path``; on success it replaces ``path``.

    The old folder (if any) is moved aside first and deleted only after the
    new one is in place, so a failure leaves the old results as they were.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".partial", dir=path.parent))
    except OSError as err:
        raise OutputError(f"file '{path}': cannot create a folder in '{path.parent}' ({err.strerror}); "
                          "choose a writable location") from err
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old = None
    if path.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".old", dir=path.parent))
        os.rmdir(old)
        os.replace(path, old)
    os.replace(tmp, path)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)

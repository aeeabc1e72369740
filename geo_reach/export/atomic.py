"""Atomic writes: every output is built under a short temporary name beside it, then renamed.

Nothing half-written is ever left under the user's name, an existing file is
replaced only once the new one is complete, and a command writing several
outputs changes all of them or none (:class:`OutputSet`).

Temporary names are short (``.geo-reach-<pid>-<6 hex>.partial<suffix>``,
under 40 bytes) so that a long output name never makes them exceed the file
system's 255-byte limit, and they carry the process id so a later run can
remove those an interrupted run left behind (:func:`remove_stale`).

A results folder carries a marker file (:data:`MARKER`) listing the files the
tool wrote; :func:`geo_reach.export.guard.check_folder` replaces a folder
only when everything in it is on that list.
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import re
import secrets
import shutil
from pathlib import Path

from ..errors import OutputError, OutputExistsError

__all__ = ["check_output", "atomic_path", "atomic_dir", "OutputSet", "temp_name", "remove_stale", "MARKER",
           "write_marker", "read_marker", "os_error", "write_error", "disk_full"]

#: The marker file of a results folder: JSON listing every file the tool wrote there.
MARKER = ".geo-reach-results.json"
_TEMP = re.compile(r"^\.geo-reach-(\d+)-[0-9a-f]{6}\.(partial|old)")
# hidden temporaries of earlier versions: ".<stem>.<8 random>.partial<suffix>" and ".<name>.<8>.old"
_LEGACY = re.compile(r"^\..+\.[A-Za-z0-9_]{8}\.(partial|old)(\.[A-Za-z0-9]+)?$")


def temp_name(suffix: str = "", kind: str = "partial") -> str:
    """A short hidden name for a temporary beside an output (``kind`` 'partial' or 'old')."""
    return f".geo-reach-{os.getpid()}-{secrets.token_hex(3)}.{kind}{suffix}"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale(folder) -> list[Path]:
    """Remove temporaries that interrupted runs left in ``folder``; return what was removed.

    A temporary of this version is removed when its process is gone; one of
    an earlier version (no process id in its name) always.
    """
    folder = Path(folder)
    removed = []
    try:
        entries = list(folder.iterdir())
    except OSError:
        return removed
    for p in entries:
        m = _TEMP.match(p.name)
        stale = (m is not None and int(m.group(1)) != os.getpid() and not _alive(int(m.group(1)))) \
            or (m is None and _LEGACY.match(p.name) is not None)
        if stale:
            with contextlib.suppress(OSError):
                shutil.rmtree(p) if p.is_dir() and not p.is_symlink() else p.unlink()
                removed.append(p)
    return removed


def os_error(path, err: OSError, doing: str = "write") -> OutputError:
    """A one-line :class:`OutputError` for an OS error while writing ``path`` (named as the user gave it)."""
    if err.errno == errno.ENOSPC:
        why = "the disk is full (no space left on device); free some space or choose another folder"
    elif err.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        why = f"permission denied ({err.strerror}); choose a folder you can write to"
    elif err.errno == errno.ENAMETOOLONG:
        why = "the name is too long for the file system (255 bytes per name); choose a shorter name"
    else:
        why = f"{err.strerror or err}; check the folder"
    return OutputError(f"file '{path}': cannot {doing} it: {why}")


#: Below this many free bytes after a failed write, the failure is blamed on a full disk.
_FULL_BELOW = 1 << 20
_FULL_WORDS = ("no space left", "disk is full", "disk full", "enospc", "not enough space")


def disk_full(path, err: BaseException | None = None) -> bool:
    """Whether a write to ``path`` most likely failed because its file system is full.

    GDAL and SQLite report a full disk in their own words (``database or
    disk is full``) or not at all, without an errno; so the error's text is
    read, and the free space of the folder is measured (under 1 MiB: full).
    """
    if isinstance(err, OSError) and err.errno == errno.ENOSPC:
        return True
    text = " ".join(str(err).split()).lower() if err is not None else ""
    if any(w in text for w in _FULL_WORDS):
        return True
    folder = Path(path).parent if str(Path(path).parent) else Path(".")
    try:
        return shutil.disk_usage(folder).free < _FULL_BELOW
    except OSError:
        return False


def write_error(path, err: BaseException, layer=None) -> OutputError:
    """A one-line :class:`OutputError` for a writer's failure (GDAL, SQLite, pyarrow ...) on ``path``."""
    from ..errors import where

    if disk_full(path, err):
        return OutputError(f"{where(path, layer)}cannot write it: the disk is full (no space left on device); "
                           "free some space or choose another folder")
    if isinstance(err, OSError) and err.errno is not None:
        return os_error(path, err)
    msg = " ".join(str(err).split())[:200]
    return OutputError(f"{where(path, layer)}could not be written ({msg}); check the folder is writable and "
                       "has free space")


def check_output(path, overwrite: bool = False, what: str = "output") -> Path:
    """Check that ``path`` can be written, before any work starts.

    Raises
    ------
    OutputExistsError
        ``path`` exists and ``overwrite`` is false.
    OutputError
        The parent folder is missing or is not a folder, or ``path`` is a folder.
    """
    path = Path(path)
    parent = path.parent if str(path.parent) else Path(".")
    if path.exists() and path.is_dir():
        raise OutputError(f"file '{path}': is a folder; give a file name for the {what}")
    if path.exists() and not overwrite:
        raise OutputExistsError(f"file '{path}': {what} already exists; replace it with overwrite or choose "
                                "another name", key="overwrite")
    if not parent.exists():
        raise OutputError(f"file '{path}': output folder '{parent}' does not exist; create it first")
    if not parent.is_dir():
        raise OutputError(f"file '{path}': '{parent}' is a file, not a folder; choose another output path")
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


@contextlib.contextmanager
def atomic_path(path, suffix: str | None = None):
    """Yield a temporary path beside ``path``; on success rename it over ``path``.

    On any error (or interruption) the temporary is removed and ``path`` is
    untouched.  The temporary does not exist when yielded (writers such as
    GDAL create the file themselves).

    Raises
    ------
    OutputError
        The folder does not allow creating the temporary, or the rename fails.
    """
    path = Path(path)
    suffix = suffix if suffix is not None else path.suffix
    folder = path.parent if str(path.parent) else Path(".")
    tmp = folder / temp_name(suffix)
    try:
        yield tmp
        os.replace(tmp, path)
    except OSError as err:
        _remove(tmp)
        if isinstance(err, OutputError):
            raise _renamed(err, tmp, path) from err.__cause__
        raise os_error(path, err) from err
    except BaseException as err:
        _remove(tmp)
        new = _renamed(err, tmp, path)
        if new is err:
            raise
        raise new from err.__cause__


def _renamed(err: BaseException, tmp: Path, target: Path) -> BaseException:
    """``err`` with the temporary's path in its message replaced by the target's (messages name what the user gave)."""
    from ..errors import GeoReachError

    if isinstance(err, GeoReachError) and str(tmp) in str(err):
        out = err.with_message(str(err).replace(str(tmp), str(target)))
        out.__cause__ = err.__cause__
        return out
    return err


def _remove(p: Path) -> None:
    with contextlib.suppress(FileNotFoundError, NotADirectoryError):
        if p.is_dir() and not p.is_symlink():
            shutil.rmtree(p, ignore_errors=True)
        else:
            p.unlink()
    for extra in ("-journal", "-wal", "-shm", ".aux.xml"):
        with contextlib.suppress(OSError):
            Path(str(p) + extra).unlink()


def write_marker(folder, files) -> None:
    """Write the results folder's marker, listing ``files`` (names relative to ``folder``)."""
    from .._meta import TOOL, __version__

    data = {"tool": TOOL, "version": __version__,
            "note": "geo-reach wrote this folder; with --overwrite it replaces only the files listed here",
            "files": sorted(str(f) for f in files)}
    (Path(folder) / MARKER).write_text(json.dumps(data, indent=1) + "\n", encoding="utf-8")


def read_marker(folder) -> set[str] | None:
    """The files a results folder's marker lists, or None when the folder has no readable marker."""
    p = Path(folder) / MARKER
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
        files = data["files"]
        if data.get("tool") != "geo-reach" or not isinstance(files, list):
            return None
        return {str(f) for f in files}
    except (OSError, ValueError, KeyError, TypeError):
        return None


@contextlib.contextmanager
def atomic_dir(path):
    """Yield a temporary folder beside ``path``; on success it replaces ``path``.

    The folder gets the user's umask (not the 0700 of a temporary folder) and
    the marker file listing everything written into it.  The old folder (if
    any) is moved aside first and deleted only after the new one is in place,
    so a failure leaves the old results as they were.  Whether the old folder
    may be replaced is decided before the work starts
    (:func:`geo_reach.export.guard.check_folder`).
    """
    path = Path(path)
    parent = path.parent if str(path.parent) else Path(".")
    try:
        parent.mkdir(parents=True, exist_ok=True)
        tmp = parent / temp_name()
        tmp.mkdir(mode=0o777)
        os.chmod(tmp, 0o777 & ~_umask())
    except OSError as err:
        raise os_error(path, err, "create the folder") from err
    try:
        yield tmp
        write_marker(tmp, [p.relative_to(tmp).as_posix() for p in sorted(tmp.rglob("*")) if p.is_file()])
    except OSError as err:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(err, OutputError):
            raise _renamed(err, tmp, path) from err.__cause__
        raise os_error(path, err, "write into") from err
    except BaseException as err:
        shutil.rmtree(tmp, ignore_errors=True)
        new = _renamed(err, tmp, path)
        if new is err:
            raise
        raise new from err.__cause__
    old = None
    try:
        if path.exists():
            old = parent / temp_name(kind="old")
            os.replace(path, old)
        os.replace(tmp, path)
    except OSError as err:
        if old is not None and not path.exists():
            with contextlib.suppress(OSError):
                os.replace(old, path)
                old = None
        shutil.rmtree(tmp, ignore_errors=True)
        raise os_error(path, err, "put in place") from err
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


class OutputSet:
    """Several output files written all or nothing.

    Use as a context manager; :meth:`path` gives the temporary to write each
    target to.  When the block ends without an error every target is
    replaced by its temporary; if any replacement fails, those already made
    are rolled back and the old files are restored.  On an error or an
    interruption every temporary is removed and no target changes.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with OutputSet([d / "a.txt", d / "b.txt"]) as out:
    ...     _ = out.path(d / "a.txt").write_text("a")
    ...     _ = out.path(d / "b.txt").write_text("b")
    >>> sorted(p.name for p in d.iterdir())
    ['a.txt', 'b.txt']
    """

    def __init__(self, targets):
        self.targets = [Path(t) for t in targets if t is not None]
        self._tmp = {}

    def path(self, target) -> Path:
        """The temporary path to write ``target`` to (it does not exist yet)."""
        return self._tmp[Path(target)]

    def __enter__(self) -> "OutputSet":
        for t in self.targets:
            folder = t.parent if str(t.parent) else Path(".")
            self._tmp[t] = folder / temp_name(t.suffix)
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            for tmp in self._tmp.values():
                _remove(tmp)
            for t, tmp in self._tmp.items():
                new = _renamed(exc, tmp, t)
                if new is not exc:
                    raise new from exc.__cause__
            if isinstance(exc, OSError) and not isinstance(exc, OutputError):
                target = next((t for t, tmp in self._tmp.items() if str(tmp) in str(exc)), self.targets[0])
                raise os_error(target, exc) from exc
            return False
        missing = [t for t, tmp in self._tmp.items() if not tmp.exists()]
        if missing:
            for tmp in self._tmp.values():
                _remove(tmp)
            raise OutputError(f"file '{missing[0]}': was not written; please report this")
        done, backups = [], {}
        try:
            for t, tmp in self._tmp.items():
                if t.exists():
                    bak = t.parent / temp_name(kind="old")
                    os.replace(t, bak)
                    backups[t] = bak
                os.replace(tmp, t)
                done.append(t)
        except BaseException as err:
            for t in done:
                with contextlib.suppress(OSError):
                    t.unlink()
            for t, bak in backups.items():
                with contextlib.suppress(OSError):
                    os.replace(bak, t)
            for tmp in self._tmp.values():
                _remove(tmp)
            if isinstance(err, OSError):
                raise os_error(t, err, "put in place") from err
            raise
        for bak in backups.values():
            _remove(bak)
        return False

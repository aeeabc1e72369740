"""Before any work: no output may name, or sit inside, an input; outputs never collide.

Every command resolves all its inputs and outputs (files and folders, after
following symbolic links) and calls :func:`check_io` before it reads
anything large.  Refused, with exit status 2 and nothing on disk touched:

* an output that is an input (``build X.gpkg:roads -o X.gpkg``), or that is
  a side file of an input Shapefile;
* a folder to be replaced that contains an input (``run study.toml -o .``);
* an output inside an input folder;
* two outputs naming the same file;
* an output that exists, without ``overwrite``;
* a name longer than the file system allows (255 bytes per name);
* a results folder holding files geo-reach did not write (they are named).
  ``overwrite`` replaces only a folder whose every file is listed in its
  marker (:data:`geo_reach.export.atomic.MARKER`).
"""

from __future__ import annotations

import os
from pathlib import Path

from ..errors import OutputError, OutputExistsError
from .atomic import MARKER, check_output, read_marker, remove_stale

__all__ = ["resolved", "input_path", "check_io", "check_folder", "NAME_MAX"]

#: Longest file or folder name, in bytes (common to ext4, xfs, btrfs, NTFS via UTF-16 aside).
NAME_MAX = 255
#: Side files of a Shapefile (ESRI 1998, "ESRI Shapefile Technical Description"; common practice).
_SHAPEFILE_SIDES = (".shp", ".shx", ".dbf", ".prj", ".cpg", ".qix", ".sbn", ".sbx", ".qmd", ".shp.xml")


def resolved(path) -> Path:
    """``path`` made absolute with every symbolic link followed (the path need not exist)."""
    return Path(os.path.realpath(os.path.abspath(os.fspath(path))))


def input_path(ref) -> Path:
    """The file (or folder) an input reference reads: ``path`` of ``path:layer``, resolved."""
    text = os.fspath(ref)
    if not os.path.exists(text) and ":" in text:
        head, _, tail = text.rpartition(":")
        if head and os.path.exists(head) and "/" not in tail and "\\" not in tail:
            text = head
    return resolved(text)


def _expand(p: Path) -> list[Path]:
    """An input and the side files read with it (a Shapefile's .shx, .dbf ...; GeoPackage journals)."""
    out = [p]
    if p.suffix.lower() == ".shp":
        stem = str(p)[:-4]
        out += [Path(stem + s) for s in _SHAPEFILE_SIDES if s != ".shp"]
    return out


def _check_name(p: Path, shown) -> None:
    for part in p.parts:
        if len(os.fsencode(part)) > NAME_MAX:
            raise OutputError(f"file '{shown}': the name '{part[:40]}...' is {len(os.fsencode(part))} bytes long, "
                              f"over the file system's limit of {NAME_MAX}; choose a shorter name")


def check_io(inputs=(), files=(), folder=None, overwrite: bool = False) -> None:
    """Refuse, before any work, outputs that would destroy an input or each other.

    Also fixes the timestamp written into the outputs from the inputs
    (:func:`geo_reach.export.stamp.set_output_time`), so the same inputs give
    byte-identical files.

    Parameters
    ----------
    inputs : iterable of path-like or ``path:layer`` str
        Everything the command reads (None entries are skipped).
    files : iterable of (path, what) pairs
        Output files, with a word for messages (``"GeoPackage"``, ``"CSV
        file"``); None paths are skipped.
    folder : path-like, optional
        A results folder the command writes as a whole.
    overwrite : bool
        Existing outputs may be replaced (a folder only if geo-reach wrote
        everything in it).

    Raises
    ------
    OutputError, OutputExistsError
        One line naming the output as the user gave it and what to do.
    """
    from .stamp import set_output_time

    ins: dict[Path, str] = {}
    for ref in inputs:
        if ref is None:
            continue
        p = input_path(ref)
        for q in _expand(p):
            ins.setdefault(q, os.fspath(ref))
    set_output_time([q for q in ins if q.is_file()])
    outs: dict[Path, str] = {}
    for path, what in files:
        if path is None:
            continue
        r = resolved(path)
        _check_name(Path(os.path.abspath(path)), path)
        if r in outs:
            raise OutputError(f"file '{path}': named twice as an output (also as the {outs[r]}); "
                              "give each output its own name")
        outs[r] = what
        if r in ins:
            raise OutputError(f"file '{path}': is also an input ('{ins[r]}'); writing it would destroy the input, "
                              "so choose another output name")
        for q, shown in ins.items():
            if q != r and Path(shown).exists() and os.path.isdir(q) and r.is_relative_to(q):
                raise OutputError(f"file '{path}': lies inside the input folder '{shown}'; choose an output "
                                  "outside it")
        check_output(path, overwrite, what)
        remove_stale(r.parent)
    if folder is not None:
        r = resolved(folder)
        _check_name(Path(os.path.abspath(folder)), folder)
        for q, shown in ins.items():
            if q == r or q.is_relative_to(r):
                raise OutputError(f"file '{folder}': the results folder would hold the input '{shown}', and "
                                  "replacing the folder would delete it; choose another output folder")
            if os.path.isdir(q) and r.is_relative_to(q):
                raise OutputError(f"file '{folder}': lies inside the input folder '{shown}'; choose an output "
                                  "outside it")
        for o in outs:
            if o == r or o.is_relative_to(r):
                raise OutputError(f"file '{folder}': the results folder would hold another output of this "
                                  "command; choose separate places")
        check_folder(folder, overwrite)
        remove_stale(r.parent)


def check_folder(folder, overwrite: bool) -> None:
    """Refuse a results folder that cannot be written, or replaced without losing someone's files.

    A new or empty folder is fine.  An existing one is replaced only with
    ``overwrite`` and only when every file in it is listed in its marker
    (geo-reach wrote them all); otherwise the files geo-reach did not write
    are named and nothing happens.
    """
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"file '{folder}': is a file, not a folder; choose another output folder")
    anc = folder
    while not anc.exists():
        anc = anc.parent
    if not anc.is_dir():
        raise OutputError(f"file '{folder}': '{anc}' is a file, so the folder cannot be made there; "
                          "choose another output folder")
    if not os.access(anc, os.W_OK | os.X_OK):
        raise OutputError(f"file '{folder}': '{anc}' is not writable; choose another output folder")
    if not folder.is_dir():
        return
    if folder.is_symlink():
        raise OutputError(f"file '{folder}': is a symbolic link; give the real folder")
    present = sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*") if not p.is_dir())
    present = [p for p in present if p != MARKER]
    if not present and not (folder / MARKER).exists():
        return
    listed = read_marker(folder)
    if listed is None:
        shown = ", ".join(present[:5]) + (" ..." if len(present) > 5 else "")
        raise OutputError(f"file '{folder}': the folder holds files geo-reach did not write ({shown}); "
                          "choose a new or empty folder")
    foreign = [p for p in present if p not in listed]
    if foreign:
        shown = ", ".join(foreign[:5]) + (" ..." if len(foreign) > 5 else "")
        raise OutputError(f"file '{folder}': the folder holds files geo-reach did not write ({shown}); it is "
                          "never replaced as a whole: move those files or choose another folder")
    if not overwrite:
        raise OutputExistsError(f"file '{folder}': the folder already holds results; replace them with "
                                "overwrite or choose another folder", key="overwrite")

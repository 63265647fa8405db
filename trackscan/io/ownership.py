"""Which files trackscan wrote: it never replaces a file it did not write.

Every folder trackscan writes into (the output folder, the frames folder,
the folder of a ``frame --json`` file) gets a marker file :data:`MARKER`,
a small JSON file listing what trackscan wrote there::

    {"files": [".cache", "report.html", "scan.json", ...],
     "output_folder": true, "written_by": "trackscan"}

A listed name that is a folder (``.cache``, ``suggested``, ``input``) means
everything inside it.  A name is entered *before* the file is made visible,
so a file that exists is trackscan's only if it is listed (or, in a frames
folder from before markers, named in its record.json).  ``output_folder``
says whether the folder is a whole output folder of trackscan
(:func:`trackscan.io.output.prepare_output_dir`); a copied scan.json never
makes a folder trackscan's.

:func:`guard_folder` claims a folder for the length of a ``with`` block:
it takes the folder's advisory lock (:mod:`trackscan.io.folderlock`), and
every atomic write of this process into the folder
(:func:`trackscan.io.atomic.atomic_open`) is checked and listed first; a
write that would replace a file trackscan did not write raises
:class:`ForeignFileError` (exit code 2) before anything is written.
Outside such a block (library use) writes are not checked.  Worker
processes write only paths their parent claimed for them
(:func:`claim_path`).

A marker of an older trackscan (plain text) is read as an output folder
whose present files are all trackscan's.
"""

from __future__ import annotations

import contextlib
import json
import os
from pathlib import Path

from trackscan.errors import InputError
from trackscan.io import atomic
from trackscan.io.folderlock import LOCK_NAME, folder_lock

__all__ = ["MARKER", "ForeignFileError", "FolderOwnership", "guard_folder", "claim_path",
           "read_ownership"]

MARKER = ".trackscan-output"
"""Marker file listing what trackscan wrote in a folder."""

#: Names of the record of generated frames and the sidecars trackscan writes
#: beside each generated cube (for frames folders from before markers).
_RECORD = "record.json"
_SIDECARS = (".xyz", ".log")
_CUBE_SUFFIXES = (".cube.gz", ".cube.bz2", ".cube.xz", ".cube", ".cub")
_INTERNAL = (MARKER, LOCK_NAME)


class ForeignFileError(InputError):
    """trackscan would replace a file it did not write."""


def _real(path) -> str:
    return os.path.realpath(os.path.abspath(os.fspath(path)))


class FolderOwnership:
    """The marker of one folder: what trackscan wrote there.

    Parameters
    ----------
    folder : Path
    output_folder : bool
        Whether the folder is a whole trackscan output folder.
    files : set of str
        Names relative to the folder (POSIX), listed in the marker.
    inherited : set of str
        Names known to be trackscan's without being listed (frames recorded
        in record.json by an older version, or files under an old marker).
    """

    def __init__(self, folder, output_folder=False, files=(), inherited=()):
        self.folder = Path(folder)
        self.real = _real(folder)
        self.output_folder = bool(output_folder)
        self.files = set(files)
        self.inherited = set(inherited)

    # -- reading -----------------------------------------------------------
    def relative(self, path) -> str | None:
        """`path` relative to the folder (POSIX), or None when outside it."""
        real = _real(path)
        rel = os.path.relpath(real, self.real)
        if rel == "." or rel.startswith(".." + os.sep) or rel == "..":
            return None
        return Path(rel).as_posix()

    def owns(self, rel: str) -> bool:
        """True when trackscan wrote the file (or folder) `rel`."""
        top = rel.split("/", 1)[0]
        return rel in self.files or top in self.files or rel in self.inherited \
            or top in self.inherited

    # -- claiming ----------------------------------------------------------
    def claim(self, path) -> None:
        """Check that trackscan may write `path`, and list it (saved at once).

        Raises
        ------
        ForeignFileError
            `path` exists and trackscan did not write it.
        """
        rel = self.relative(path)
        if rel is None or rel in _INTERNAL:
            return
        if self.owns(rel):
            return
        top = rel.split("/", 1)[0]
        name = rel
        if "/" in rel and not os.path.lexists(self.folder / top):
            name = top                      # trackscan makes this subfolder: all of it is its
        elif os.path.lexists(path):
            raise ForeignFileError("trackscan did not write this file and will not replace it "
                                   "(move it away or choose another folder; nothing was "
                                   "written)", path)
        self.files.add(name)
        self.save()

    def claim_subfolder(self, name: str) -> None:
        """List the subfolder `name` as trackscan's when trackscan makes it.

        An existing subfolder trackscan did not make stays the user's (each
        file trackscan writes into it is then checked on its own).
        """
        if self.owns(name) or os.path.lexists(self.folder / name):
            return
        self.files.add(name)
        self.save()

    def save(self) -> None:
        """Write the marker (atomically; it is never checked itself)."""
        data = {"written_by": "trackscan", "output_folder": self.output_folder,
                "files": sorted(self.files)}
        try:
            atomic.write_text_atomic(self.folder / MARKER,
                                     json.dumps(data, indent=1, sort_keys=True) + "\n")
        except OSError as exc:
            raise InputError(f"cannot write into this folder ({exc.strerror})",
                             self.folder) from None


def _record_names(folder: Path) -> set:
    """Names of generated frames (and sidecars) in an older record.json."""
    rec = folder / _RECORD
    if not rec.is_file():
        return set()
    try:
        frames = json.loads(rec.read_text(encoding="utf-8"))["frames"]
        names = {_RECORD}
        for f in frames:
            name = str(f["file"])
            names.add(name)
            stem = name
            for suffix in _CUBE_SUFFIXES:
                if stem.lower().endswith(suffix):
                    stem = stem[: -len(suffix)]
                    break
            names.update(stem + s for s in _SIDECARS)
        return names
    except (OSError, ValueError, KeyError, TypeError):
        return set()


def read_ownership(folder) -> FolderOwnership | None:
    """The marker of `folder`, or None when it has none."""
    folder = Path(folder)
    path = folder / MARKER
    if not path.is_file():
        return None
    try:
        text = path.read_text(encoding="utf-8")
    except OSError:
        return None
    try:
        data = json.loads(text)
        if not isinstance(data, dict) or not isinstance(data.get("files"), list):
            raise ValueError
    except ValueError:
        # an older trackscan's plain marker: an output folder, its files trackscan's
        present = {p.name for p in folder.iterdir()} - set(_INTERNAL)
        return FolderOwnership(folder, True, present)
    return FolderOwnership(folder, bool(data.get("output_folder")),
                           (str(f) for f in data["files"]))


def load_or_new(folder, *, output_folder: bool = False) -> FolderOwnership:
    """The folder's marker, or a new one (not yet saved); frames records count."""
    folder = Path(folder)
    own = read_ownership(folder)
    if own is None:
        own = FolderOwnership(folder, output_folder)
    own.inherited |= _record_names(folder)
    if output_folder:
        own.output_folder = True
    return own


#: Folders guarded by this process: real path -> [FolderOwnership, guard, depth].
_ACTIVE: dict = {}


class _Guard:
    """Hook for :func:`trackscan.io.atomic.atomic_open`: claims paths in one folder."""

    def __init__(self, ownership: FolderOwnership):
        self.ownership = ownership

    def before_write(self, path) -> None:
        self.ownership.claim(path)


@contextlib.contextmanager
def guard_folder(folder, *, output_folder: bool = False, purpose: str = "its files"):
    """Lock `folder` and check every write of this process into it.

    Parameters
    ----------
    folder : str or os.PathLike
        Created if missing.
    output_folder : bool
        Mark it as a whole output folder of trackscan.
    purpose : str
        Words for the "folder in use" message.

    Yields
    ------
    FolderOwnership

    Raises
    ------
    FolderBusyError
        Another trackscan run holds the folder.
    """
    with folder_lock(folder, purpose=purpose):
        key = _real(folder)
        active = _ACTIVE.get(key)
        if active is not None:              # nested (e.g. the frames folder is --out): share
            own, guard = active[0], active[1]
            active[2] += 1
        else:
            own = load_or_new(folder, output_folder=output_folder)
            guard = _Guard(own)
            _ACTIVE[key] = [own, guard, 1]
            atomic.add_write_guard(guard)
        if output_folder and not (own.output_folder and (Path(folder) / MARKER).is_file()):
            own.output_folder = True
            own.save()                  # (other folders get a marker with their first file)
        try:
            yield own
        finally:
            _ACTIVE[key][2] -= 1
            if _ACTIVE[key][2] == 0:
                del _ACTIVE[key]
                atomic.remove_write_guard(guard)


def claim_path(path) -> None:
    """Claim `path` in every guarded folder of this process (before another process writes it).

    Raises
    ------
    ForeignFileError
    """
    atomic.check_write(path)

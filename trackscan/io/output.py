"""Output folders: trackscan writes only into folders that are its own.

``analyze``, ``refine``, ``report`` and ``demo`` write scan.json, report
files and a cache into one folder.  So that a mistyped ``--out`` can never
overwrite a researcher's files, a folder is used only when it is new, empty,
or already trackscan's: its marker file (:data:`MARKER`, see
:mod:`trackscan.io.ownership`) says it is a trackscan output folder.  A
copied scan.json does not make a folder trackscan's.  Inside the folder
trackscan replaces only files it wrote (listed in the marker).

:func:`open_output_dir` also locks the folder for the run: a second run
into the same folder stops at once with one line (exit code 2).
"""

from __future__ import annotations

import contextlib
from pathlib import Path

from trackscan.errors import InputError
from trackscan.io.ownership import MARKER, guard_folder, read_ownership

__all__ = ["MARKER", "prepare_output_dir", "open_output_dir", "is_trackscan_folder"]


def is_trackscan_folder(folder) -> bool:
    """True when the marker of `folder` says it is a trackscan output folder."""
    own = read_ownership(folder)
    return own is not None and own.output_folder


def _check(folder: Path) -> None:
    if folder.exists() and not folder.is_dir():
        raise InputError("output path exists and is not a folder", folder)
    if folder.is_dir() and any(p.name != ".trackscan-lock" for p in folder.iterdir()) \
            and not is_trackscan_folder(folder):
        raise InputError("output folder holds files trackscan did not write; choose a new or "
                         "empty folder with --out (nothing was written)", folder)


def prepare_output_dir(folder) -> Path:
    """Create or check an output folder before anything is written into it.

    Parameters
    ----------
    folder : str or os.PathLike

    Returns
    -------
    Path
        The folder, created if needed, with the marker file in it.

    Raises
    ------
    InputError
        The path is a file, or a folder that holds files trackscan did not
        write (choose another ``--out``).
    """
    folder = Path(folder)
    _check(folder)
    with open_output_dir(folder):
        pass
    return folder


@contextlib.contextmanager
def open_output_dir(folder):
    """Check, lock and guard an output folder for the length of the block.

    Yields
    ------
    Path
        The folder (created if needed, marked as trackscan's).  Inside the
        block every atomic write into it is checked
        (:func:`trackscan.io.ownership.guard_folder`).

    Raises
    ------
    InputError
        As :func:`prepare_output_dir`; :class:`FolderBusyError` when
        another trackscan run writes into the folder.
    """
    folder = Path(folder)
    _check(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the output folder ({exc.strerror})", folder) from None
    with guard_folder(folder, output_folder=True, purpose="--out") as own:
        _check(folder)                      # again, now that the folder is ours alone
        _remove_stale_temporaries(folder)
        yield folder
        del own


def _remove_stale_temporaries(folder: Path) -> None:
    """Delete temporary files an interrupted earlier run left (the folder is locked)."""
    from trackscan.io.atomic import remove_stale_temporaries

    for sub in (folder, folder / ".cache", folder / "suggested"):
        if sub.is_dir():
            remove_stale_temporaries(sub)

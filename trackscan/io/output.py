"""Output folders: trackscan writes only into folders that are its own.

``analyze``, ``refine``, ``report`` and ``demo`` write scan.json, report
files and a cache into one folder.  So that a mistyped ``--out`` can never
overwrite a researcher's files, a folder is used only when it is new, empty,
or already trackscan's: it holds the marker file :data:`MARKER` (written when
trackscan first uses it) or a scan.json of trackscan's schema.
"""

from __future__ import annotations

import json
from pathlib import Path

from trackscan.errors import InputError
from trackscan.io.atomic import write_text_atomic

__all__ = ["MARKER", "prepare_output_dir", "is_trackscan_folder"]

MARKER = ".trackscan-output"
"""Marker file in every folder trackscan writes results into."""

_SCHEMA_PREFIX = "trackscan.scan/"


def is_trackscan_folder(folder) -> bool:
    """True when `folder` holds trackscan's marker or a trackscan scan.json."""
    folder = Path(folder)
    if (folder / MARKER).is_file():
        return True
    scan = folder / "scan.json"
    if scan.is_file():
        try:
            with open(scan, encoding="utf-8") as fh:
                head = json.load(fh)
            return str(head.get("schema", "")).startswith(_SCHEMA_PREFIX)
        except (OSError, ValueError, AttributeError):
            return False
    return False


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
    if folder.exists() and not folder.is_dir():
        raise InputError("output path exists and is not a folder", folder)
    if folder.is_dir() and any(folder.iterdir()) and not is_trackscan_folder(folder):
        raise InputError("output folder holds files trackscan did not write; choose a new or "
                         "empty folder with --out (nothing was written)", folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        if not (folder / MARKER).is_file():
            write_text_atomic(folder / MARKER, "This folder holds results written by trackscan.\n")
    except OSError as exc:
        raise InputError(f"cannot create the output folder ({exc.strerror})", folder) from None
    return folder

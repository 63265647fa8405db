"""Per-frame result cache: a rerun only analyses new or changed frames.

A frame's analysis depends on the bytes of its cube file, the analysis
settings, whether the cell is periodic, and the trackscan version.  The
cache key is a SHA-256 over all four; each entry is one JSON file
``<cache_dir>/<key>.json`` holding the frame dict, written atomically.
"""

from __future__ import annotations

import hashlib
import json
import logging
from pathlib import Path

from trackscan import __version__
from trackscan.errors import InputError
from trackscan.io.atomic import write_text_atomic
from trackscan.io.filecheck import regular_file_problem

__all__ = ["file_digest", "cache_key", "load_entry", "store_entry", "CACHE_FORMAT"]

logger = logging.getLogger(__name__)

#: Bumped when the cached frame dict changes shape.
CACHE_FORMAT = 1


def file_digest(path) -> str:
    """SHA-256 hex digest of a file's bytes.

    Raises
    ------
    InputError
        Not a regular file (checked before opening: a FIFO would block), or
        unreadable.
    """
    problem = regular_file_problem(path)
    if problem is not None:
        raise InputError(problem, path)
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc.strerror})", path) from None
    return h.hexdigest()


def cache_key(digest: str, settings: dict, *, periodic: bool) -> str:
    """Key of one frame analysis.

    Parameters
    ----------
    digest : str
        :func:`file_digest` of the cube file.
    settings : dict
        ``AnalysisSettings.to_dict()``.
    periodic : bool
    """
    blob = json.dumps({"file": digest, "settings": settings, "periodic": bool(periodic),
                       "version": __version__, "format": CACHE_FORMAT}, sort_keys=True)
    return hashlib.sha256(blob.encode()).hexdigest()


def load_entry(cache_dir, key: str):
    """The cached frame dict for `key`, or None (missing or unreadable)."""
    path = Path(cache_dir) / f"{key}.json"
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    try:
        data = json.loads(text)
    except json.JSONDecodeError:
        logger.warning("ignoring a broken cache entry %s", path)
        return None
    return data if isinstance(data, dict) else None


def store_entry(cache_dir, key: str, frame: dict) -> None:
    """Write a frame dict to the cache (atomically)."""
    write_text_atomic(Path(cache_dir) / f"{key}.json",
                      json.dumps(frame, sort_keys=True, separators=(",", ":")))

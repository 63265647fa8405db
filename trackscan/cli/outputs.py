"""The output folder of one command run, taken back when the input turns out bad.

``analyze``, ``refine`` and ``report`` need their output folder (for the
result cache) before they have read every frame, so bad input may only show
once the folder exists.  :func:`output_folder` opens it
(:func:`trackscan.io.output.open_output_dir`: checked, locked and guarded so
that only files trackscan wrote there are replaced) and, when this run created
it and then stops on an :class:`~trackscan.errors.InputError`, removes it
again: bad input leaves nothing behind.  A folder that existed before is
never removed.
"""

from __future__ import annotations

import contextlib
import logging
import shutil
from pathlib import Path

from trackscan.errors import InputError
from trackscan.io.output import open_output_dir

__all__ = ["output_folder"]

logger = logging.getLogger(__name__)


@contextlib.contextmanager
def output_folder(target):
    """Yield the prepared output folder; remove it on bad input if this run made it.

    Parameters
    ----------
    target : str or os.PathLike

    Yields
    ------
    Path
    """
    target = Path(target)
    created = not target.exists() and not target.is_symlink()
    try:
        with open_output_dir(target) as out:
            yield out
    except InputError:
        if created:
            logger.debug("bad input: removing the output folder %s made by this run", target)
            shutil.rmtree(target, ignore_errors=True)
        raise

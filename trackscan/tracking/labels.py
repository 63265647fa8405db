"""Names of critical-point tracks and of frames.

A track follows one critical point through the scan.  Its label has to
survive beside atom labels in tables and figures, so it must not read as an
element symbol and number ("B1" would be boron 1, "C1" carbon 1, "N1"
nitrogen 1).  trackscan's scheme is a lower-case word, a hyphen and a number:

========================  ==============  =====================================
kind                      label           number
========================  ==============  =====================================
nuclear (attractor)       ``nucleus-3``   the atom it sits on (1-based)
bond CP                   ``bond-1``      order of first appearance in the scan
ring CP                   ``ring-1``      order of first appearance
cage CP                   ``cage-1``      order of first appearance
non-nuclear attractor     ``nna-1``       order of first appearance
degenerate point          ``degenerate-1``  order of first appearance
========================  ==============  =====================================

Frames are named so that a frame keeps its name when refinement adds
frames (:func:`frame_labels`): the frames the researcher listed are ``1``,
``2``, ... in scan order, and the frames refinement computed are ``r1``,
``r2``, ... in the order they were computed (by refinement round, then by
coordinate value along the scan).  A change first bracketed by frames 4 and 5
is still between frames 4 and 5 (or between refined frames inside them)
after any number of refinements; the position of a frame in scan order
(``Frame.index``) is a different number and does shift.

Frame-local critical-point ids (``b1``, ``r2`` in one frame's list) are a
different thing: they are positions in one frame and are not kept across
frames.
"""

from __future__ import annotations

import re

__all__ = ["TRACK_WORD", "track_label", "nuclear_track_label", "track_sort_key", "frame_labels",
           "REFINED_PREFIX"]

#: The word of each critical-point kind in a track label.
TRACK_WORD = {"nuclear": "nucleus", "non_nuclear": "nna", "bond": "bond", "ring": "ring",
              "cage": "cage", "degenerate": "degenerate"}

#: Prefix of the labels of frames that refinement computed.
REFINED_PREFIX = "r"

_KIND_ORDER = {word: n for n, word in enumerate(TRACK_WORD.values())}
_LABEL = re.compile(r"^([a-z]+)-(\d+)$")


def track_label(kind: str, number: int) -> str:
    """Label of the `number`-th track of a non-nuclear `kind` (``bond-1``)."""
    return f"{TRACK_WORD[kind]}-{int(number)}"


def nuclear_track_label(atom: int) -> str:
    """Label of the nuclear attractor track on `atom` (1-based): ``nucleus-3``."""
    return f"{TRACK_WORD['nuclear']}-{int(atom)}"


def track_sort_key(label: str) -> tuple:
    """Sort key: by kind (nuclei, then by Morse index), then by number.

    Labels outside the scheme (from an older scan.json) sort last, by text.
    """
    m = _LABEL.match(str(label))
    if m is None or m.group(1) not in _KIND_ORDER:
        return (len(_KIND_ORDER), 0, str(label))
    return (_KIND_ORDER[m.group(1)], int(m.group(2)), "")


def frame_labels(frames) -> tuple:
    """Stable labels of frames given in scan order.

    Parameters
    ----------
    frames : sequence of trackscan.model.Frame
        In scan order.  A frame with a ``refine`` record was computed by
        refinement; the others were listed by the researcher.

    Returns
    -------
    tuple of str
        ``"1"``, ``"2"``, ... for listed frames (their position among the
        listed frames, in scan order) and ``"r1"``, ``"r2"``, ... for refined
        frames, numbered by ``(round, position in scan order)``.  Refinement
        rounds continue their numbering across runs, so later rounds never
        rename earlier frames.
    """
    frames = list(frames)
    labels = [""] * len(frames)
    listed = [k for k, f in enumerate(frames) if f.refine is None]
    for n, k in enumerate(listed, start=1):
        labels[k] = str(n)
    refined = sorted((k for k, f in enumerate(frames) if f.refine is not None),
                     key=lambda k: (int(frames[k].refine.round or 0), k))
    for n, k in enumerate(refined, start=1):
        labels[k] = f"{REFINED_PREFIX}{n}"
    return tuple(labels)

"""Rigid alignment of neighbouring frames on their nuclei (Kabsch).

A relaxed scan may rotate or drift the molecule from one frame to the next.
Before critical points are matched, each frame is rotated and shifted onto
the previous one, so that distances between critical points of neighbouring
frames measure how the density changed, not how the molecule moved.
"""

from __future__ import annotations

import numpy as np

from trackscan.coordinates import apply_transform, kabsch

__all__ = ["kabsch", "chain_alignments", "apply_transform"]


def chain_alignments(positions) -> list:
    """Transforms that put every frame into the first frame's coordinates.

    Frame ``k`` is aligned on the already aligned frame ``k - 1`` (not on
    frame 0), so a scan whose geometry drifts far from its start still has
    small steps between neighbours.

    Parameters
    ----------
    positions : sequence of (n, 3) arrays, bohr
        Nuclear positions of the frames, in scan order.

    Returns
    -------
    list of (rotation, shift)
        One per frame; the first is the identity.
    """
    out = [(np.eye(3), np.zeros(3))]
    prev = np.asarray(positions[0], dtype=np.float64)
    for pos in positions[1:]:
        t = kabsch(pos, prev)
        out.append(t)
        prev = apply_transform(pos, t)
    return out

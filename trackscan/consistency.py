"""Checks that the frames of one scan describe the same molecule."""

from __future__ import annotations

import os

import numpy as np

from trackscan.elements import symbol
from trackscan.errors import ConsistencyError

__all__ = ["check_same_atoms"]


def check_same_atoms(frames) -> None:
    """Check that all frames carry the same atoms in the same order.

    Positions may differ from frame to frame; atomic numbers and their order
    may not.

    Parameters
    ----------
    frames : iterable of (name, numbers)
        A label per frame (usually its file) and its atomic numbers.

    Raises
    ------
    ConsistencyError
        Naming both frames and the first atom that differs.
    """
    first_name = None
    first = None
    for name, numbers in frames:
        numbers = np.asarray(numbers, dtype=int)
        name = os.fspath(name)
        if first is None:
            first_name, first = name, numbers
            continue
        if len(numbers) != len(first):
            raise ConsistencyError(
                f"has {len(numbers)} atoms but {first_name} has {len(first)}; "
                "all frames of a scan must carry the same atoms", name)
        diff = np.nonzero(numbers != first)[0]
        if diff.size:
            i = int(diff[0])
            raise ConsistencyError(
                f"atom {i + 1} is {symbol(numbers[i])} but it is {symbol(first[i])} in "
                f"{first_name}; all frames of a scan must carry the same atoms in the same order",
                name)

"""XYZ geometry files: one or more frames of element symbols and coordinates.

Each frame is a line with the atom count, a free comment line, then one line
per atom: element symbol (or atomic number) and x, y, z in angstrom.  Inside
trackscan positions are in bohr; conversion happens here.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from trackscan.elements import SYMBOLS, atomic_number, symbol
from trackscan.errors import ParseError
from trackscan.io.atomic import write_text_atomic
from trackscan.units import ANGSTROM_IN_BOHR, BOHR_IN_ANGSTROM

__all__ = ["XYZFrame", "read_xyz", "write_xyz", "format_xyz"]


@dataclass(frozen=True, eq=False)
class XYZFrame:
    """One geometry.

    Parameters
    ----------
    numbers : (n,) int array
        Atomic numbers.
    positions : (n, 3) float64 array, bohr
        Nuclear positions.
    comment : str
        The frame's comment line (without the newline).
    """

    numbers: np.ndarray
    positions: np.ndarray
    comment: str = ""

    def __post_init__(self):
        numbers = np.array(self.numbers, dtype=np.int64).reshape(-1)
        positions = np.array(self.positions, dtype=np.float64)
        if positions.shape != (len(numbers), 3):
            raise ValueError(f"positions has shape {positions.shape}, "
                             f"expected ({len(numbers)}, 3)")
        if "\n" in self.comment or "\r" in self.comment:
            raise ValueError("an XYZ comment must be a single line")
        numbers.setflags(write=False)
        positions.setflags(write=False)
        object.__setattr__(self, "numbers", numbers)
        object.__setattr__(self, "positions", positions)

    @property
    def n_atoms(self) -> int:
        """Number of atoms."""
        return len(self.numbers)

    @property
    def symbols(self) -> list:
        """Element symbols."""
        return [symbol(z) for z in self.numbers]


def _element(token: str, path, lineno) -> int:
    if token.isdigit():
        z = int(token)
        if 1 <= z < len(SYMBOLS):
            return z
    else:
        try:
            z = atomic_number(token)
        except KeyError:
            z = 0
        if z > 0:
            return z
    raise ParseError(f"unknown element {token!r}", path, lineno)


def read_xyz(path) -> list:
    """Read every frame of an XYZ file.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    list of XYZFrame
        Positions converted from angstrom to bohr.

    Raises
    ------
    ParseError
        If the file is missing, unreadable or malformed (with the line number).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except IsADirectoryError:
        raise ParseError("is a directory, expected an XYZ file", path) from None
    except FileNotFoundError:
        raise ParseError("no such file", path) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ParseError(f"cannot read: {exc}", path) from None
    lines = text.splitlines()
    frames = []
    i = 0
    while i < len(lines):
        if not lines[i].strip():
            i += 1
            continue
        head = lines[i].split()
        try:
            n = int(head[0])
        except ValueError:
            raise ParseError(f"expected the atom count, got {lines[i].strip()[:40]!r}",
                             path, i + 1) from None
        if len(head) != 1 or n <= 0:
            raise ParseError(f"expected one positive atom count, got {lines[i].strip()[:40]!r}",
                             path, i + 1)
        if i + 1 >= len(lines):
            raise ParseError(f"frame {len(frames) + 1} has no comment line", path, i + 1)
        if i + 2 + n > len(lines):
            raise ParseError(f"frame {len(frames) + 1} claims {n} atoms but the file ends "
                             f"after {len(lines) - i - 2}", path, len(lines))
        comment = lines[i + 1].rstrip()
        numbers = np.empty(n, dtype=np.int64)
        pos = np.empty((n, 3))
        for a in range(n):
            lineno = i + 3 + a
            fields = lines[lineno - 1].split()
            if len(fields) < 4:
                raise ParseError(f"expected an element and x, y, z, got {len(fields)} fields",
                                 path, lineno)
            numbers[a] = _element(fields[0], path, lineno)
            try:
                xyz = [float(v) for v in fields[1:4]]
            except ValueError:
                raise ParseError(f"coordinates are not numbers: {' '.join(fields[1:4])!r}",
                                 path, lineno) from None
            if not all(math.isfinite(v) for v in xyz):
                raise ParseError("coordinates must be finite", path, lineno)
            pos[a] = xyz
        frames.append(XYZFrame(numbers, pos * ANGSTROM_IN_BOHR, comment))
        i += 2 + n
    if not frames:
        raise ParseError("no frames in XYZ file", path)
    return frames


def format_xyz(frames) -> str:
    """Text of an XYZ file for one frame or a list of frames (angstrom, 10 decimals)."""
    if isinstance(frames, XYZFrame):
        frames = [frames]
    out = []
    for fr in frames:
        out.append(f"{fr.n_atoms}\n{fr.comment}\n")
        ang = fr.positions * BOHR_IN_ANGSTROM
        for z, (x, y, w) in zip(fr.numbers, ang):
            out.append(f"{symbol(z):<2s} {x:16.10f} {y:16.10f} {w:16.10f}\n")
    return "".join(out)


def write_xyz(path: str | os.PathLike, frames) -> None:
    """Write one frame or a list of frames to an XYZ file, atomically.

    Parameters
    ----------
    path : str or os.PathLike
    frames : XYZFrame or list of XYZFrame
        Positions in bohr; written in angstrom.
    """
    write_text_atomic(path, format_xyz(frames))

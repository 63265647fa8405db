"""What tracking needs of the frames of a scan, read off the typed model.

A :class:`FrameView` pairs a :class:`trackscan.model.Frame` with its place
in the list given to tracking and caches the arrays the matching needs; the
critical points are the model's own :class:`trackscan.model.CriticalPoint`
objects.  Nothing here parses a dict: frames arrive as model objects
(:meth:`trackscan.model.Frame.from_dict` checks a dict and names the key
path of anything malformed).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from trackscan.consistency import check_same_atoms as _check_same_numbers
from trackscan.errors import InputError
from trackscan.model import ATTRACTOR_KINDS, KINDS, MORSE_INDEX, Frame

__all__ = ["FrameView", "view_frame", "displacement", "check_same_atoms", "KINDS",
           "ATTRACTOR_KINDS", "MORSE_INDEX"]


@dataclass(frozen=True, eq=False)
class FrameView:
    """One frame as tracking sees it.

    Attributes
    ----------
    frame : trackscan.model.Frame
    listed : int
        Position of the frame in the list given to tracking.
    """

    frame: Frame
    listed: int

    @property
    def label(self) -> str:
        """The frame's stable label (``Frame.label``), else its list position."""
        return self.frame.label if self.frame.label is not None else str(self.listed)

    @property
    def value(self) -> float:
        return float(self.frame.value)

    @cached_property
    def numbers(self) -> np.ndarray:
        """Atomic numbers, in atom order."""
        return self.frame.numbers

    @property
    def elements(self) -> tuple:
        return self.frame.elements

    @cached_property
    def positions(self) -> np.ndarray:
        """Nuclear positions, (n, 3), bohr."""
        return self.frame.positions

    @property
    def cps(self) -> tuple:
        """The frame's critical points (model objects)."""
        return self.frame.critical_points

    @cached_property
    def bond_ends(self) -> dict:
        """Bond CP id -> its two path ends (atom number, attractor id or None)."""
        return self.frame.bond_ends()

    @property
    def complete(self) -> bool:
        """False when the frame's search did not close (Poincaré–Hopf failed)."""
        return self.frame.usable

    @property
    def poincare_hopf_holds(self):
        return self.frame.holds_poincare_hopf

    @cached_property
    def spacing(self) -> float:
        """Largest grid spacing of the frame, bohr (nan when unknown)."""
        return float("nan") if self.frame.grid is None else self.frame.grid.max_spacing

    @property
    def significant_digits(self):
        """Printed precision of the density values, when the frame records it."""
        return None if self.frame.grid is None else self.frame.grid.significant_digits

    @cached_property
    def cell(self):
        """Periodic cell (rows: cell vectors, bohr) or None."""
        return None if self.frame.grid is None else self.frame.grid.cell(f"frame {self.listed}")

    def of_kind(self, kind: str) -> list:
        """Critical points of one kind, in frame order."""
        return self.frame.of_kind(kind)

    def cp_by_id(self) -> dict:
        """Map of CP id -> CriticalPoint."""
        return {cp.id: cp for cp in self.cps}


def view_frame(frame, listed: int) -> FrameView:
    """The :class:`FrameView` of a frame (a model Frame, or its contract dict).

    Raises
    ------
    InputError
        The frame has no finite coordinate value; a dict is malformed
        (:class:`trackscan.model.ScanFormatError`, naming the key path).
    """
    if isinstance(frame, dict):
        frame = Frame.from_dict(frame, f"frame {listed}")
    if not isinstance(frame, Frame):
        raise InputError(f"frame {listed}: expected a Frame, got {type(frame).__name__}")
    if frame.value is None:
        raise InputError(f"frame {listed}: missing or non-numeric 'value'")
    return FrameView(frame=frame, listed=listed)


def displacement(a, b, cell=None) -> np.ndarray:
    """``b - a`` (broadcasting), by the minimum image when `cell` is given."""
    d = np.asarray(b, dtype=np.float64) - np.asarray(a, dtype=np.float64)
    if cell is None:
        return d
    f = d @ np.linalg.inv(cell)
    return (f - np.round(f)) @ cell


def check_same_atoms(views) -> None:
    """Raise ConsistencyError unless all frames have the same atoms in order."""
    _check_same_numbers((f"frame {v.listed} (value {v.value:g})", v.numbers) for v in views)

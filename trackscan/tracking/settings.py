"""Settings of scan tracking: one frozen value object with documented defaults."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = ["TrackingSettings"]

_DIRECTIONS = ("auto", "ascending", "descending")


@dataclass(frozen=True)
class TrackingSettings:
    """How critical points are followed and changes judged.

    Attributes
    ----------
    match_gate : float, bohr
        A critical point of frame k and one of the same kind in frame k+1
        (after alignment) can be the same point only if they are closer than
        ``match_gate`` plus the largest nuclear displacement between the two
        frames.  Default 1.0.
    switch_penalty : float, bohr
        Added to the matching cost of two bond CPs whose paths end on
        different attractors, so that among nearby bond CPs the one linking
        the same atoms wins.  Default 0.3.
    fold_gate : float, bohr
        Two critical points whose Morse indices differ by one and that are
        lost (or born) between the same two frames are paired as a fold when
        they are closer than this.  Default 2.5.
    printed_digits : int
        Significant digits of the density values in the input files, when a
        frame does not record its own (cube files print 5).  Default 5.
    significance : float
        A fold pair that exists in a single frame only (or is missing from a
        single frame only) is judged noise when the density difference of its
        two members is below ``significance`` times that frame's resolution
        floor.  Default 3.0.
    warning_horizon : float
        Early warnings flag a frame when an indicator extrapolates to zero
        within this many scan steps ahead.  Default 1.5.
    direction : {'auto', 'ascending', 'descending'}
        Order in which the scan runs.  ``auto``: descending when the frames
        are listed with strictly decreasing values, else ascending.
    """

    match_gate: float = 1.0
    switch_penalty: float = 0.3
    fold_gate: float = 2.5
    printed_digits: int = 5
    significance: float = 3.0
    warning_horizon: float = 1.5
    direction: str = "auto"

    def __post_init__(self):
        for name in ("match_gate", "switch_penalty", "fold_gate", "significance",
                     "warning_horizon"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)) \
                    or not math.isfinite(value) or value < 0:
                raise ValueError(f"{name} must be a finite number >= 0, got {value!r}")
        if not isinstance(self.printed_digits, int) or not 1 <= self.printed_digits <= 17:
            raise ValueError(f"printed_digits must be an integer in 1..17, got {self.printed_digits!r}")
        if self.direction not in _DIRECTIONS:
            raise ValueError(f"direction must be one of {_DIRECTIONS}, got {self.direction!r}")

    def to_dict(self) -> dict:
        """Plain dict of all settings."""
        return asdict(self)

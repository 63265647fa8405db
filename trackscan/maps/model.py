"""The typed model of a plane scan's scan.json (DESIGN.md "2-D scans").

Built on :mod:`trackscan.model` (the same declarative fields, ``to_dict`` /
``from_dict`` with key-path errors, unknown keys kept in ``extra``):

- :class:`PlaneFrame` -- a :class:`~trackscan.model.Frame` with ``values``
  (the two coordinate values); tracking and refinement take it as a frame
  (its ``value`` is set to the coordinate that varies along an edge);
- :class:`Boundary` -- one structural change along a grid edge;
- :class:`PlaneHeader` -- the ``scan`` header with two ``coordinates``;
- :class:`PlaneScanResult` -- the whole document (``dimensions: 2``).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

from trackscan.model import (
    _OPTIONAL, SCHEMA, Coordinate, Event, Frame, Structure, Uncertainty, _extra, _fail, _key,
    _Model,
)

__all__ = ["PlaneFrame", "Boundary", "PlaneHeader", "PlaneScanResult", "PLANE_DIMENSIONS"]

#: ``dimensions`` of a plane scan's scan.json.
PLANE_DIMENSIONS = 2


@dataclass(frozen=True, eq=False)
class PlaneFrame(Frame):
    """A frame of a plane scan: a :class:`Frame` with its two coordinate values.

    Attributes
    ----------
    values : (2,) tuple of float or None
        Value of the first and of the second coordinate (their units).
    """

    values: tuple | None = _key("values", mode=_OPTIONAL)

    def _check(self, path):
        super()._check(path)
        if self.values is not None and len(self.values) != PLANE_DIMENSIONS:
            _fail(f"{path}.values", "expected two values [value1, value2]")

    @property
    def is_grid_frame(self) -> bool:
        """True for frames of the coarse grid (not made by refinement)."""
        return self.refine is None


@dataclass(frozen=True, eq=False)
class Boundary(_Model):
    """One structural change between two frames along a grid edge of the plane.

    Attributes
    ----------
    between : (2,) tuple of int
        Frame indices of the bracket: the last frame with the old structure
        and the first with the new one, along the edge.
    bracket : (2,) tuple of (2,) tuple
        Their coordinate values ``[[v1, v2], [v1, v2]]``.
    mechanism : str
        ``fold``, ``conflict``, ``mixed`` or ``unresolved``.
    structures : (2,) tuple of int
        Structure numbers at the two ends of the bracket.
    estimate : (2,) tuple of float
        Where in the plane the change happens (on the edge).
    uncertainty : Uncertainty or None
        The ± of the estimate along the edge, in the unit of the coordinate
        that varies along it.
    events : tuple of Event
    edge : (2,) tuple of int
        The grid frames at the two ends of the edge.
    along : int
        0 when the first coordinate varies along the edge, 1 for the second.
    estimate_method, evaluations, refine, fit, note, structure_type_changed,
    mechanism_candidate, resolution_limited
        As on a 1-D change.
    """

    between: tuple = _key("between", default=dataclasses.MISSING)
    bracket: tuple = _key("bracket", default=dataclasses.MISSING)
    mechanism: str = _key("mechanism", default=dataclasses.MISSING)
    structures: tuple = _key("structures", default=dataclasses.MISSING)
    estimate: tuple | None = _key("estimate")
    uncertainty: Uncertainty | None = _key("uncertainty", kind=Uncertainty)
    events: tuple = _key("events", kind=Event, many=True, default=())
    edge: tuple | None = _key("edge", mode=_OPTIONAL)
    along: int = _key("along", default=0)
    estimate_method: str | None = _key("estimate_method", mode=_OPTIONAL)
    evaluations: int | None = _key("evaluations", mode=_OPTIONAL)
    refine: dict | None = _key("refine", mode=_OPTIONAL)
    note: str | None = _key("note", mode=_OPTIONAL)
    structure_type_changed: bool | None = _key("structure_type_changed", mode=_OPTIONAL)
    mechanism_candidate: str | None = _key("mechanism_candidate", mode=_OPTIONAL)
    fit: dict | None = _key("fit", mode=_OPTIONAL)
    resolution_limited: bool | None = _key("resolution_limited", mode=_OPTIONAL)
    extra: dict = _extra()

    def _check(self, path):
        if len(self.bracket) != 2 or any(len(p) != PLANE_DIMENSIONS for p in self.bracket):
            _fail(f"{path}.bracket", "expected two points [[v1, v2], [v1, v2]]")
        if self.along not in (0, 1):
            _fail(f"{path}.along", f"expected 0 or 1, got {self.along!r}")

    @property
    def width(self) -> float:
        """Bracket length along the edge (unit of the varying coordinate)."""
        a, b = self.bracket
        return abs(float(b[self.along]) - float(a[self.along]))


@dataclass(frozen=True, eq=False)
class PlaneHeader(_Model):
    """The ``scan`` header of a plane scan: two coordinates instead of one."""

    name: str = _key("name", default="scan")
    coordinates: tuple = _key("coordinates", kind=Coordinate, many=True, default=())
    density_source: str | None = _key("density_source")
    settings: dict | None = _key("settings")
    tracking: dict | None = _key("tracking", mode=_OPTIONAL)
    periodic: bool | None = _key("periodic", mode=_OPTIONAL)
    trackscan_version: str | None = _key("trackscan_version", mode=_OPTIONAL)
    description: str | None = _key("description", mode=_OPTIONAL)
    manifest: str | None = _key("manifest", mode=_OPTIONAL)
    refine: dict | None = _key("refine", mode=_OPTIONAL)
    extra: dict = _extra()

    def _check(self, path):
        if len(self.coordinates) != PLANE_DIMENSIONS:
            _fail(f"{path}.coordinates", "expected two coordinates")


@dataclass(frozen=True, eq=False)
class PlaneScanResult(_Model):
    """The scan.json of a plane scan.

    Attributes
    ----------
    scan : PlaneHeader
    frames : tuple of PlaneFrame
        Sorted by (value 1, value 2).
    structures : tuple of Structure
    boundaries : tuple of Boundary
    incomplete_frames : tuple of int
    dimensions : int
        Always 2.
    schema : str
    """

    scan: PlaneHeader = _key("scan", kind=PlaneHeader, default=dataclasses.MISSING)
    frames: tuple = _key("frames", kind=PlaneFrame, many=True, default=())
    structures: tuple = _key("structures", kind=Structure, many=True, default=())
    boundaries: tuple = _key("boundaries", kind=Boundary, many=True, default=())
    incomplete_frames: tuple = _key("incomplete_frames", default=())
    dimensions: int = _key("dimensions", default=PLANE_DIMENSIONS)
    schema: str = _key("schema", default=SCHEMA)
    extra: dict = _extra()

    def _check(self, path):
        if self.dimensions != PLANE_DIMENSIONS:
            _fail(f"{path}.dimensions" if path else "dimensions",
                  f"expected {PLANE_DIMENSIONS}, got {self.dimensions!r}")

"""The scan result as the report reads it: a thin view over :class:`trackscan.model.ScanResult`.

scan.json is read only through the typed model (``ScanResult.from_dict``);
this module adds what the report's pages share: frames in scan order, the
two frames of a change, atom labels, the coordinate's unit symbol, the ±
quoted for a change, and where a frame's cube file is.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

from trackscan.errors import ParseError
from trackscan.model import KINDS, Change, CriticalPoint, Frame, ScanResult
from trackscan.units import unit_symbol

__all__ = ["ScanView", "load_scan", "CP_KINDS", "Quoted", "quoted_uncertainty", "cp_by_track"]

#: Critical-point kinds of the contract, in the order the report lists them.
CP_KINDS = KINDS


@dataclass(frozen=True)
class Quoted:
    """The ± a report quotes for a change's estimate.

    Attributes
    ----------
    value : float
        The uncertainty, coordinate units.
    source : str
        ``"bracket"``, ``"model"`` or ``"resolution"``
        (:data:`trackscan.vocabulary.UNCERTAINTY_SOURCES`).
    resolution_limited : bool
        The frames beside the bracket are below what their grids resolve.
    """

    value: float
    source: str
    resolution_limited: bool = False


def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


@dataclass(frozen=True, eq=False)
class ScanView:
    """A loaded scan result with the look-ups the report shares.

    Parameters
    ----------
    result : trackscan.model.ScanResult
    base_dir : pathlib.Path or None
        Folder of the scan.json file (None when the scan came as a dict).
    source_dir : pathlib.Path or None
        Folder that relative frame ``source`` paths are relative to.
    """

    result: ScanResult
    base_dir: Path | None = None
    source_dir: Path | None = None

    # -- header ---------------------------------------------------------------------
    @property
    def header(self):
        return self.result.scan

    @property
    def name(self) -> str:
        return str(self.header.name or "scan")

    @property
    def coordinate_label(self) -> str:
        c = self.header.coordinate
        return str(c.label) if c is not None and c.label else "coordinate"

    @property
    def unit_symbol(self) -> str:
        """Symbol of the coordinate's unit (Å, °, bohr, or as written)."""
        c = self.header.coordinate
        return unit_symbol(c.unit) if c is not None else ""

    @property
    def axis_label(self) -> str:
        """``"C2-C3-C1 angle (°)"``."""
        u = self.unit_symbol
        return f"{self.coordinate_label} ({u})" if u else self.coordinate_label

    def with_unit(self, text: str) -> str:
        """``text`` followed by the coordinate unit, for values in that unit."""
        u = self.unit_symbol
        if not u:
            return text
        return f"{text}{u}" if u == "°" else f"{text} {u}"

    @property
    def is_model_density(self) -> bool:
        """True when the densities are trackscan's built-in model (not data)."""
        return any(f.is_model_density for f in self.result.frames)

    # -- frames and changes ---------------------------------------------------------------
    @property
    def frames(self) -> list:
        """Frames in scan order (by index when every frame has one, else by value)."""
        frames = list(self.result.frames)
        if frames and all(isinstance(f.index, int) for f in frames):
            return sorted(frames, key=lambda f: f.index)
        return sorted(frames, key=lambda f: (f.value if _finite(f.value) else 0.0))

    @property
    def descending(self) -> bool:
        values = [f.value for f in self.frames]
        return len(values) > 1 and values[0] > values[-1]

    @property
    def changes(self) -> list:
        """Changes in scan order."""
        return sorted(self.result.changes, key=lambda c: tuple(c.between))

    def frame(self, index) -> Frame | None:
        for f in self.result.frames:
            if f.index == index:
                return f
        return None

    def change_frames(self, change: Change) -> tuple:
        """(frame before, frame after) of a change; either may be None."""
        return self.frame(change.between[0]), self.frame(change.between[1])

    def frame_label(self, frame: Frame) -> str:
        """How the report names a frame: its stable label (``4``, ``r2``).

        Listed frames keep their number and refined frames their ``r``
        label when later refinement adds frames
        (:func:`trackscan.tracking.labels.frame_labels`).
        """
        return frame.name

    def frame_ranges(self, indices) -> str:
        """Scan positions as runs of frame names: ``"1–4, r1"`` style, ``"—"`` if none.

        Consecutive positions in scan order form one run, written as the
        names of its first and last frame.
        """
        idx = sorted(int(i) for i in indices)
        if not idx:
            return "—"
        name = self.result.frame_name
        runs, start, prev = [], idx[0], idx[0]
        for i in idx[1:] + [None]:
            if i is not None and i == prev + 1:
                prev = i
                continue
            runs.append(f"{name(start)}–{name(prev)}" if prev > start else name(start))
            if i is not None:
                start = prev = i
        return ", ".join(runs)

    def energy(self, frame: Frame):
        """Energy of a frame in hartree, or None."""
        e = frame.energy_hartree
        if e is None:
            e = frame.extra.get("energy")
        return float(e) if _finite(e) else None

    @property
    def has_energies(self) -> bool:
        return any(self.energy(f) is not None for f in self.result.frames)

    # -- atoms ------------------------------------------------------------------------
    def atoms(self, frame: Frame | None = None) -> tuple:
        if frame is not None and frame.atoms:
            return frame.atoms
        for f in self.frames:
            if f.atoms:
                return f.atoms
        return ()

    def label(self, number, frame: Frame | None = None) -> str:
        """``"C1"`` for an atom number; attractor ids as written; ``"(open end)"`` for None."""
        if number is None:
            return "(open end)"
        for atom in self.atoms(frame):
            if atom.number == number:
                return atom.label
        return str(number) if isinstance(number, str) else f"atom {number}"

    def labels(self, numbers, frame: Frame | None = None, sep: str = "–") -> str:
        return sep.join(self.label(n, frame) for n in (numbers or ()))

    # -- the quoted ± ---------------------------------------------------------------------
    def quoted(self, change: Change) -> Quoted | None:
        """The one ± the report gives for a change's estimate (:func:`quoted_uncertainty`)."""
        return quoted_uncertainty(change)

    def estimate(self, change: Change) -> float:
        """The change's estimate (the bracket midpoint when it has none)."""
        if _finite(change.estimate):
            return float(change.estimate)
        return 0.5 * (float(change.bracket[0]) + float(change.bracket[1]))

    # -- files ------------------------------------------------------------------------
    def source_path(self, frame: Frame):
        """Path of a frame's cube file, or None when it has none.

        A relative path is looked up under `source_dir`, the folder of the
        manifest named in the header (relative to scan.json), the folder of
        scan.json and the current folder; the first existing file wins.
        """
        source = frame.source
        if not source:
            return None
        path = Path(source)
        if path.is_absolute():
            return path
        bases = []
        if self.source_dir is not None:
            bases.append(Path(self.source_dir))
        manifest = self.header.manifest
        if manifest:
            m = Path(manifest)
            if not m.is_absolute() and self.base_dir is not None:
                m = self.base_dir / m
            bases.append(m.parent)
        if self.base_dir is not None:
            bases.append(self.base_dir)
        bases.append(Path.cwd())
        candidates = [b / path for b in bases]
        for c in candidates:
            if c.is_file():
                return c
        return candidates[0]

    def manifest_path(self):
        """The scan manifest named in the header, if it exists."""
        manifest = self.header.manifest
        if not manifest:
            return None
        m = Path(manifest)
        if not m.is_absolute() and self.base_dir is not None:
            m = self.base_dir / m
        return m if m.is_file() else None


def quoted_uncertainty(change: Change) -> Quoted | None:
    """The one ± quoted for a change's estimate, in the CLI and the report alike.

    ``uncertainty.value`` with its ``source`` when the change carries them
    (contract version 2); else the model's error when there is one and it
    is below half the bracket; else half the bracket.
    """
    u = change.uncertainty
    limited = bool(change.resolution_limited)
    if u is not None:
        if _finite(u.value):
            return Quoted(abs(float(u.value)), str(u.source or "bracket"), limited)
        half = abs(float(u.half_width)) if _finite(u.half_width) else change.width / 2.0
        if _finite(u.model_error) and abs(float(u.model_error)) <= half:
            return Quoted(abs(float(u.model_error)), "model", limited)
        return Quoted(half, "bracket", limited)
    if all(_finite(b) for b in change.bracket):
        return Quoted(change.width / 2.0, "bracket", limited)
    return None


def cp_by_track(frame: Frame | None, track) -> CriticalPoint | None:
    """The critical point of `frame` on track `track`, or None."""
    if frame is None or track is None:
        return None
    for cp in frame.critical_points:
        if cp.track == track:
            return cp
    return None


def load_scan(scan, *, source_dir=None) -> ScanView:
    """Load a scan result from a path (file or folder), a dict or a ScanResult.

    Raises
    ------
    ParseError
        No scan.json there, or it is not JSON.
    trackscan.model.ScanFormatError
        The content is not a scan result (the message names the key path).
    """
    base_dir = None
    if isinstance(scan, ScanResult):
        result = scan
    elif isinstance(scan, dict):
        result = ScanResult.from_dict(scan)
    else:
        path = Path(os.fspath(scan))
        if path.is_dir():
            if not (path / "scan.json").is_file():
                raise ParseError("this folder holds no scan.json (run `trackscan analyze` "
                                 "first, or give the scan.json file)", path)
            path = path / "scan.json"
        if not path.is_file():
            raise ParseError("no such scan result (expected a scan.json file or its folder)", path)
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except UnicodeDecodeError as exc:
            raise ParseError(f"not UTF-8 text: {exc}", path) from None
        except json.JSONDecodeError as exc:
            raise ParseError(f"not valid JSON: {exc.msg}", path, exc.lineno) from None
        result = _from_dict(data, path)
        base_dir = path.resolve().parent
    return ScanView(result, base_dir, None if source_dir is None else Path(source_dir))


def _from_dict(data, path):
    from trackscan.errors import ScanFormatError

    try:
        return ScanResult.from_dict(data)
    except ScanFormatError as exc:
        raise ScanFormatError(str(exc), path) from None

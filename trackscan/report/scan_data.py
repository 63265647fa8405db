"""Read a scan result (scan.json) for the report, tolerating missing optional keys.

The report only reads results: this module loads the scan.json of the
contract in ``../shared/DESIGN.md`` section 3 (with the extensions listed in
``DEVELOPERS.md``), checks the few keys the report cannot do without, and
offers look-ups the other report modules share (frames by index, atom labels,
critical points by id and by track).
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

from trackscan.elements import symbol
from trackscan.errors import InputError, ParseError, ScanFormatError
from trackscan.units import unit_symbol

__all__ = ["ScanData", "load_scan", "CP_KINDS", "atom_label", "frame_energy", "cp_by_id"]

#: Critical-point kinds of the contract, in the order the report lists them.
CP_KINDS = ("nuclear", "non_nuclear", "bond", "ring", "cage", "degenerate")


def atom_label(atom) -> str:
    """``"C1"``: element symbol and 1-based number of an atom dict."""
    element = atom.get("element") or symbol(atom.get("Z", 0))
    return f"{element}{atom.get('number', '?')}"


@dataclass(frozen=True, eq=False)
class ScanData:
    """A loaded scan result with look-ups.

    Parameters
    ----------
    data : dict
        The scan.json content (not modified).
    base_dir : pathlib.Path or None
        Folder of the scan.json file.  None when the scan came as a dict.
    source_dir : pathlib.Path or None
        Folder that relative frame ``source`` paths are relative to (the
        scan manifest's folder), when known.
    """

    data: dict
    base_dir: Path | None = None
    source_dir: Path | None = None

    # -- top-level parts ---------------------------------------------------
    @property
    def scan(self) -> dict:
        """The ``scan`` header (name, coordinate, density source, settings)."""
        return self.data.get("scan") or {}

    @property
    def name(self) -> str:
        """Scan name (``"scan"`` when missing)."""
        return str(self.scan.get("name") or "scan")

    @property
    def coordinate_label(self) -> str:
        """Label of the scanned coordinate."""
        coord = self.scan.get("coordinate") or {}
        if isinstance(coord, str):
            return coord
        return str(coord.get("label") or "coordinate")

    @property
    def coordinate_unit(self) -> str:
        """Unit of the scanned coordinate as written in the scan (may be empty)."""
        coord = self.scan.get("coordinate") or {}
        if isinstance(coord, str):
            return ""
        return str(coord.get("unit") or "")

    @property
    def unit_symbol(self) -> str:
        """Short symbol of the coordinate unit for axes and tables (Å, °, bohr)."""
        return unit_symbol(self.coordinate_unit)

    @property
    def frames(self) -> list:
        """Frames in scan order: by ``index`` when every frame has one, else by value."""
        frames = list(self.data.get("frames") or [])
        if frames and all(isinstance(f.get("index"), int) for f in frames):
            return sorted(frames, key=lambda f: f["index"])
        return sorted(frames, key=lambda f: (_num(f.get("value")), _num(f.get("index"))))

    @property
    def descending(self) -> bool:
        """True when the scan runs towards smaller coordinate values."""
        values = [f.get("value") for f in self.frames]
        return len(values) > 1 and _num(values[0]) > _num(values[-1])

    @property
    def changes(self) -> list:
        """Changes in scan order (by ``between``, else by the first end of the bracket)."""
        changes = list(self.data.get("changes") or [])

        def key(c):
            between = c.get("between")
            if isinstance(between, (list, tuple)) and between and isinstance(between[0], int):
                return (0, between[0], 0.0)
            return (1, 0, (_bracket(c) or (0.0,))[0])
        return sorted(changes, key=key)

    @property
    def early_warnings(self) -> list:
        """Scan-level early warnings (may be empty)."""
        warnings = self.data.get("early_warnings") or []
        return list(warnings) if isinstance(warnings, list) else [warnings]

    # -- look-ups ------------------------------------------------------------
    def frame(self, index):
        """The frame whose ``index`` is `index`, or None."""
        for f in self.data.get("frames") or []:
            if f.get("index") == index:
                return f
        return None

    def change_frames(self, change):
        """(frame before, frame after) of a change, either may be None.

        Uses ``between`` (frame indices); falls back to the frames whose
        values equal the bracket ends.
        """
        between = change.get("between")
        if isinstance(between, (list, tuple)) and len(between) == 2:
            a, b = self.frame(between[0]), self.frame(between[1])
            if a is not None or b is not None:
                return a, b
        bracket = _bracket(change)
        if bracket is None:
            return None, None
        by_value = {f.get("value"): f for f in self.data.get("frames") or []}
        return by_value.get(bracket[0]), by_value.get(bracket[1])

    def atoms(self, frame=None) -> list:
        """Atom dicts of `frame` (or of the first frame that lists atoms)."""
        if frame is not None and frame.get("atoms"):
            return list(frame["atoms"])
        for f in self.frames:
            if f.get("atoms"):
                return list(f["atoms"])
        return []

    def label(self, number, frame=None) -> str:
        """Element+number label of atom `number` (``"atom 3"`` if unknown)."""
        if number is None:
            return "(open end)"
        for atom in self.atoms(frame):
            if atom.get("number") == number:
                return atom_label(atom)
        return f"atom {number}"

    def labels(self, numbers, frame=None, sep: str = "–") -> str:
        """``"C1–C2"`` for a list of atom numbers."""
        return sep.join(self.label(n, frame) for n in (numbers or []))

    def source_path(self, frame):
        """Path of a frame's ``source`` file, or None when it has none.

        A relative path is looked up, in this order, under `source_dir`, the
        folder of the manifest named by ``scan.manifest`` (relative to
        scan.json), the folder of scan.json and the current folder; the first
        existing file wins (else the first candidate is returned).
        """
        source = frame.get("source")
        if not source or not isinstance(source, str):
            return None
        path = Path(source)
        if path.is_absolute():
            return path
        bases = []
        if self.source_dir is not None:
            bases.append(Path(self.source_dir))
        manifest = self.scan.get("manifest")
        if isinstance(manifest, str) and manifest:
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


def cp_by_id(frame, cp_id):
    """The critical point with id `cp_id` in `frame`, or None."""
    for cp in (frame or {}).get("critical_points") or []:
        if cp.get("id") == cp_id:
            return cp
    return None


def _num(x, default=0.0):
    try:
        return float(x)
    except (TypeError, ValueError):
        return default


def _bracket(change):
    b = change.get("bracket")
    if isinstance(b, (list, tuple)) and len(b) == 2:
        try:
            return float(b[0]), float(b[1])
        except (TypeError, ValueError):
            return None
    return None


def frame_energy(frame):
    """Energy of a frame in hartree (``energy_hartree`` or ``energy``), or None."""
    for key in ("energy_hartree", "energy"):
        e = frame.get(key)
        if isinstance(e, (int, float)) and not isinstance(e, bool):
            return float(e)
    return None


def load_scan(scan, *, source_dir=None) -> ScanData:
    """Load a scan result from a path (file or folder) or take a dict.

    Parameters
    ----------
    scan : str, os.PathLike or dict
        Path of a scan.json, a folder containing ``scan.json``, or the
        already-parsed content.
    source_dir : str or os.PathLike, optional
        Folder relative frame ``source`` paths refer to (the manifest's).

    Returns
    -------
    ScanData

    Raises
    ------
    ParseError
        The file is missing or is not JSON.
    ScanFormatError
        The content is not a scan result (no ``frames`` list, wrong types).
    """
    base_dir = None
    if isinstance(scan, dict):
        data = scan
    else:
        path = Path(os.fspath(scan))
        if path.is_dir():
            path = path / "scan.json"
        if not path.is_file():
            raise ParseError("no such scan result (expected a scan.json file or its folder)", path)
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except UnicodeDecodeError as exc:
            raise ParseError(f"not UTF-8 text: {exc}", path) from None
        except json.JSONDecodeError as exc:
            raise ParseError(f"not valid JSON: {exc.msg}", path, exc.lineno) from None
        base_dir = path.resolve().parent
    _check(data, None if base_dir is None else base_dir / "scan.json")
    return ScanData(data, base_dir, None if source_dir is None else Path(source_dir))


def _check(data, path) -> None:
    if not isinstance(data, dict):
        raise ScanFormatError("a scan result must be a JSON object", path)
    frames = data.get("frames")
    if not isinstance(frames, list):
        raise ScanFormatError("'frames' must be a list of frame objects", path)
    for i, frame in enumerate(frames):
        if not isinstance(frame, dict):
            raise ScanFormatError(f"frames[{i}] must be an object", path)
        if not isinstance(frame.get("value"), (int, float)) or isinstance(frame.get("value"), bool):
            raise ScanFormatError(f"frames[{i}].value must be a number", path)
        for key in ("critical_points", "bond_paths", "atoms"):
            if key in frame and not isinstance(frame[key], list):
                raise ScanFormatError(f"frames[{i}].{key} must be a list", path)
    changes = data.get("changes", [])
    if not isinstance(changes, list):
        raise ScanFormatError("'changes' must be a list", path)
    for i, change in enumerate(changes):
        if not isinstance(change, dict):
            raise ScanFormatError(f"changes[{i}] must be an object", path)
        if "bracket" in change and _bracket(change) is None:
            raise ScanFormatError(f"changes[{i}].bracket must be two numbers", path)
    if "scan" in data and not isinstance(data["scan"], dict):
        raise ScanFormatError("'scan' must be an object", path)

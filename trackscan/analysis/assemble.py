"""From analysed frames to the scan result: place, track, estimate, assemble.

Both ``analyze`` and ``refine`` end here, so a scan analysed again after a
refinement keeps what refinement found, and neither calls the other:

* :func:`place_frames` gives each analysed :class:`~trackscan.model.Frame`
  its place in the scan (coordinate value, source path, energy, and the
  ``refine`` record of a frame that refinement computed), the one place this
  metadata is attached;
* :func:`assemble_scan` tracks the frames, gives every change its estimate
  and uncertainty (:func:`trackscan.refine.estimates.annotate_changes`) and
  returns the :class:`~trackscan.model.ScanResult`.
"""

from __future__ import annotations

import dataclasses
import logging
import os
from pathlib import Path

from trackscan import __version__
from trackscan.model import (SCHEMA, Coordinate, ProbeRecord, ScanHeader, ScanResult,
                             round_energy)

__all__ = ["place_frame", "place_frames", "assemble_scan", "recorded_frames",
           "refined_tolerance", "summarise_refinement"]

logger = logging.getLogger(__name__)

#: Key of the refine bookkeeping in a record entry (and of ``Frame.refine``).
REFINE_KEY = "refine"


def _path_key(path) -> str:
    return os.path.normcase(os.path.abspath(path))


def recorded_frames(manifest) -> dict:
    """Record entries of generated frames (energy, refine record), by cube path."""
    from trackscan.io.manifest import read_frame_record

    folder = Path(manifest.frames_directory)
    return {_path_key(folder / r["file"]): r for r in read_frame_record(folder)}


def place_frame(frame, *, value, file, base_dir, energy=None, refine=None):
    """One analysed frame with its place in the scan (a new object).

    Parameters
    ----------
    frame : trackscan.model.Frame
    value : float
        Coordinate value.
    file : path-like
        Its cube file; ``source`` is written relative to `base_dir`.
    base_dir : path-like
        The manifest's folder.
    energy : float, optional
        Total energy, hartree.
    refine : dict or ProbeRecord, optional
        Why refinement computed it.
    """
    if isinstance(refine, dict):
        refine = ProbeRecord.from_dict(refine, "refine")
    return dataclasses.replace(
        frame, value=float(value),
        source=Path(os.path.relpath(file, base_dir)).as_posix(),
        energy_hartree=round_energy(energy), refine=refine)


def place_frames(manifest, frames, *, suggested=None) -> list:
    """The manifest's analysed frames with their place in the scan.

    Parameters
    ----------
    manifest : ScanManifest
    frames : sequence of trackscan.model.Frame
        One per ``manifest.frames`` entry, in the same order.
    suggested : dict, optional
        Rounded value -> refine record of values ``refine --suggest`` gave
        (frames the researcher computed elsewhere).

    Returns
    -------
    list of trackscan.model.Frame
        New objects with ``value``, ``source`` (relative to the manifest's
        folder), ``energy_hartree`` (listed, else recorded by the generator)
        and ``refine`` (for frames refinement asked for).
    """
    from trackscan.model import round_value

    records = recorded_frames(manifest)
    suggested = suggested or {}
    out = []
    for entry, frame in zip(manifest.frames, frames):
        rec = records.get(_path_key(entry.file)) or {}
        energy = entry.energy if entry.energy is not None else rec.get("energy")
        meta = rec.get(REFINE_KEY)
        if not isinstance(meta, dict):
            meta = suggested.get(round_value(entry.value))
        out.append(place_frame(frame, value=entry.value, file=entry.file,
                               base_dir=manifest.base_dir, energy=energy, refine=meta))
    return out


def assemble_scan(manifest, frames, *, source: str, out_dir=None, tracking=None,
                  tolerance=None, refine_summary=None) -> ScanResult:
    """Track placed frames and assemble the scan result.

    Parameters
    ----------
    manifest : ScanManifest
    frames : sequence of trackscan.model.Frame
        Placed frames (:func:`place_frames`), any order.
    source : str
        One line naming the density source.
    out_dir : path-like, optional
        Output folder (the header then says where the manifest is, relative
        to it).
    tracking : TrackingSettings, optional
        Default: the manifest's ``tracking`` section.
    tolerance : float, optional
        The refine tolerance, when a refinement ran (recorded per change).
    refine_summary : dict, optional
        ``scan.refine``.  Default: read off the frames refinement made
        (:func:`summarise_refinement`), so analysing a refined scan again
        keeps its refinement record; a scan never refined has none.

    Returns
    -------
    ScanResult
    """
    from trackscan.refine.estimates import annotate_changes
    from trackscan.tracking import track_scan

    tracking = tracking or getattr(manifest, "tracking", None)
    tracked = track_scan(frames, settings=tracking, unit=manifest.coordinate.unit)
    if tolerance is None:
        tolerance = refined_tolerance(tracked.frames)
    changes = annotate_changes(tracked.frames, tracked.changes, tolerance=tolerance,
                               gtol=manifest.analysis.gtol)
    if refine_summary is None and tolerance is not None:
        refine_summary = summarise_refinement(tracked.frames, changes, tolerance)
    logger.info("%s: %d frames, %d changes", manifest.name, len(tracked.frames), len(changes))
    header = ScanHeader(
        name=manifest.name,
        coordinate=Coordinate.from_dict(manifest.coordinate.to_dict(), "scan.coordinate"),
        density_source=source,
        settings=manifest.analysis.to_dict(),
        tracking=tracked.settings.to_dict(),
        periodic=bool(manifest.periodic),
        trackscan_version=__version__,
        direction=tracked.direction,
        description=manifest.description or None,
        manifest=None if out_dir is None else
        Path(os.path.relpath(manifest.path, out_dir)).as_posix(),
        refine=refine_summary,
    )
    return ScanResult(
        schema=SCHEMA, scan=header, frames=tracked.frames, changes=changes,
        early_warnings=tracked.early_warnings, bond_tracks=tracked.bond_tracks,
        structures=tracked.structures, incomplete_frames=tracked.incomplete_frames)


def refined_tolerance(frames):
    """The tolerance of the latest refinement round among `frames`, or None."""
    refined = [f.refine for f in frames if f.refine is not None and f.refine.tolerance is not None]
    if not refined:
        return None
    latest = max(refined, key=lambda r: (r.round or 0, r.tolerance))
    return float(latest.tolerance)


def summarise_refinement(frames, changes, tolerance: float) -> dict:
    """``scan.refine``: what refinement did, read off the frames and changes.

    The same frames give the same summary, whether ``refine`` or a later
    ``analyze`` writes it.
    """
    evaluations = sum(1 for f in frames if f.refine is not None)
    infos = [c.refine or {} for c in changes]
    converged = all(i.get("converged", True) for i in infos)
    limits = [i["resolution_limit"] for i in infos if "resolution_limit" in i]
    if not changes:
        message = "no structural change to refine"
    elif converged:
        message = f"every bracket is at most {tolerance:g}"
    elif limits and all(i.get("converged") or "resolution_limit" in i for i in infos):
        message = f"limited by grid resolution: ±{max(limits):.2g}"
    else:
        message = f"brackets wider than {tolerance:g} remain"
    return {"tolerance": float(tolerance), "evaluations": evaluations,
            "converged": bool(converged), "message": message}

"""Follow critical points through a scan: the entry point :func:`track_scan`."""

from __future__ import annotations

import dataclasses
import logging
from dataclasses import dataclass

import numpy as np

from trackscan.errors import ConsistencyError, InputError
from trackscan.model import (BondTrack, Change, EarlyWarning, FrameResolution, Structure,
                             significant)
from trackscan.tracking.align import apply_transform, chain_alignments
from trackscan.tracking.changes import find_changes
from trackscan.tracking.early import bond_series, early_warnings
from trackscan.tracking.frames import check_same_atoms, view_frame
from trackscan.tracking.labels import frame_labels
from trackscan.tracking.matching import assign_tracks, match_step
from trackscan.tracking.resolution import interpolation_floor
from trackscan.tracking.settings import TrackingSettings
from trackscan.tracking.structures import (end_label, frame_graph, number_structures,
                                           sort_ends, structure_key)

__all__ = ["track_scan", "TrackingResult"]

logger = logging.getLogger(__name__)


@dataclass(frozen=True, eq=False)
class TrackingResult:
    """What tracking found in a scan.

    Attributes
    ----------
    frames : tuple of trackscan.model.Frame
        The frames in scan order, with ``index`` (position in scan order),
        ``structure`` (number), a ``track`` on every critical point and a
        ``resolution`` summary.
    changes : tuple of trackscan.model.Change
        One per step between different structures.
    early_warnings : tuple of trackscan.model.EarlyWarning
    bond_tracks : tuple of trackscan.model.BondTrack
        Indicator series per bond track.
    structures : tuple of trackscan.model.Structure
        One entry per structure number.
    direction : str
        ``ascending`` or ``descending``.
    settings : TrackingSettings
        The settings used.
    incomplete_frames : tuple of int
        Indices of frames failing Poincaré–Hopf.
    """

    frames: tuple
    changes: tuple
    early_warnings: tuple
    bond_tracks: tuple
    structures: tuple
    direction: str
    settings: TrackingSettings
    incomplete_frames: tuple

    def to_dict(self) -> dict:
        """The contract form (the keys of scan.json that tracking fills)."""
        return {
            "frames": [f.to_dict() for f in self.frames],
            "changes": [c.to_dict() for c in self.changes],
            "early_warnings": [w.to_dict() for w in self.early_warnings],
            "bond_tracks": [b.to_dict() for b in self.bond_tracks],
            "structures": [s.to_dict() for s in self.structures],
            "direction": self.direction,
            "tracking": self.settings.to_dict(),
            "incomplete_frames": list(self.incomplete_frames),
        }

    def with_changes(self, changes) -> "TrackingResult":
        """A copy with other changes (refinement's annotated ones)."""
        return dataclasses.replace(self, changes=tuple(changes))


def _direction(values, setting):
    if setting != "auto":
        return setting
    if len(values) > 1 and all(x > y for x, y in zip(values, values[1:])):
        return "descending"
    return "ascending"


def track_scan(frames, *, settings=None, unit=""):
    """Follow the critical points of a scan and find its structural changes.

    Parameters
    ----------
    frames : sequence of trackscan.model.Frame
        In any order; they are sorted by their ``value``.  (Contract dicts
        are accepted too and read with ``Frame.from_dict``.)
    settings : TrackingSettings, optional
        Defaults: ``TrackingSettings()``.
    unit : str
        Unit of the coordinate values, used in messages.

    Returns
    -------
    TrackingResult

    Raises
    ------
    InputError
        No frames, or a frame dict lacks what tracking needs.
    ConsistencyError
        Frames list different atoms, or two frames share a coordinate value.

    Notes
    -----
    Steps: sort the frames; align each on the previous one by the Kabsch
    rotation of its nuclei; match the critical points of each kind between
    neighbours by optimal assignment under a distance gate; give each point
    a persistent track; number the structures; for each step between
    different structures, pair births and deaths into folds, find switched
    bond paths (conflicts), and judge noise and resolution.
    """
    settings = settings or TrackingSettings()
    frames = list(frames)
    if not frames:
        raise InputError("no frames to track")
    views = [view_frame(f, i) for i, f in enumerate(frames)]
    check_same_atoms(views)
    values = [v.value for v in views]
    if len(set(values)) != len(values):
        dup = sorted(x for x in set(values) if values.count(x) > 1)
        raise ConsistencyError(f"two frames share the coordinate value {dup[0]:g}")
    direction = _direction(values, settings.direction)
    sign = -1 if direction == "descending" else 1
    order = sorted(range(len(views)), key=lambda i: sign * views[i].value)
    views = [views[i] for i in order]
    labels = frame_labels([v.frame for v in views])
    views = [dataclasses.replace(v, frame=dataclasses.replace(v.frame, label=lab))
             for v, lab in zip(views, labels)]
    if any(v.cell is not None for v in views):
        # a periodic cell fixes the orientation; nuclei may wrap, so no Kabsch
        transforms = [(np.eye(3), np.zeros(3)) for _ in views]
    else:
        transforms = chain_alignments([v.positions for v in views])
    aligned = []
    for v, t in zip(views, transforms):
        pos = {cp.id: apply_transform(cp.position, t) for cp in v.cps}
        pos["__nuclei__"] = apply_transform(v.positions, t)
        aligned.append(pos)
    matches = [match_step(views[k], views[k + 1], aligned[k], aligned[k + 1], settings=settings)
               for k in range(len(views) - 1)]
    tracks = assign_tracks(views, matches)
    graphs = [frame_graph(v, t) for v, t in zip(views, tracks)]
    keys = [structure_key(g) for g in graphs]
    structures = number_structures(keys)
    changes, _ = find_changes(views, tracks, matches, aligned, keys, graphs, structures,
                              settings=settings)
    logger.info("tracked %d frames: %d structures, %d changes", len(views),
                max(structures), len(changes))

    def ends_of(k, cp):
        return sort_ends([end_label(e, tracks[k]) for e in views[k].bond_ends.get(cp.id, ())])

    series = bond_series(views, tracks, ends_of)
    warnings = early_warnings(series, changes, horizon=settings.warning_horizon, sign=sign,
                              unit=unit, elements=views[0].elements, labels=labels)
    out_frames = []
    for k, v in enumerate(views):
        cps = tuple(dataclasses.replace(cp, track=tracks[k][str(cp.id)]) for cp in v.cps)
        resolution = FrameResolution(
            spacing_bohr=significant(v.spacing),
            interpolation_floor=significant(interpolation_floor(v.spacing)),
            printed_digits=v.significant_digits or settings.printed_digits)
        out_frames.append(dataclasses.replace(v.frame, index=k, structure=structures[k],
                                              critical_points=cps, resolution=resolution))
    return TrackingResult(
        frames=tuple(out_frames),
        changes=tuple(Change.from_dict({**c, "between_labels": [labels[k] for k in c["between"]]},
                                       f"changes[{i}]") for i, c in enumerate(changes)),
        early_warnings=tuple(EarlyWarning.from_dict(w) for w in warnings),
        bond_tracks=tuple(BondTrack.from_dict(b) for b in series),
        structures=tuple(Structure.from_dict(t) for t in _structure_table(keys, structures)),
        direction=direction,
        settings=settings,
        incomplete_frames=tuple(k for k, v in enumerate(views) if not v.complete),
    )


def _structure_table(keys, numbers):
    table = {}
    for k, (key, n) in enumerate(zip(keys, numbers)):
        entry = table.setdefault(n, {"number": n, "frames": [],
                                     "bond_paths": [list(e) for e in key[0]],
                                     "non_nuclear": list(key[1]), "rings": key[2],
                                     "cages": key[3]})
        entry["frames"].append(k)
    return [table[n] for n in sorted(table)]

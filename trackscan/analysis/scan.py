"""Analyse a whole scan: frames -> topology -> tracking -> the scan.json dict."""

from __future__ import annotations

import logging
import os
from pathlib import Path

from trackscan import __version__
from trackscan.analysis.runner import analyse_frames
from trackscan.analysis.scanjson import SCHEMA
from trackscan.progress import report
from trackscan.tracking import TrackingSettings, track_scan

__all__ = ["analyze_scan", "ensure_frames"]

logger = logging.getLogger(__name__)


def ensure_frames(manifest, *, progress=None) -> str:
    """Generate the manifest's missing generated frames; name the density source.

    Returns
    -------
    str
        One line naming the density source (the generator's description, or
        ``"cube files"``).

    Raises
    ------
    InputError
        A listed cube file is missing and no generator can make it.
    GeneratorError
        The generator failed.
    """
    from trackscan.errors import InputError

    missing = [e for e in manifest.frames if not Path(e.file).is_file()]
    gen = None
    if manifest.generator is not None:
        from trackscan.generators import make_generator

        gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
    for e in missing:
        if not e.generated or gen is None:
            raise InputError("frame file does not exist", e.file)
    for n, e in enumerate(missing, start=1):
        report(progress, "generate frames", n - 1, len(missing), f"value {e.value:g}")
        gen.generate(e.value, e.file)
        report(progress, "generate frames", n, len(missing), f"value {e.value:g}")
    if gen is not None:
        return gen.describe()
    return "cube files"


def analyze_scan(manifest, *, out_dir=None, jobs=1, tracking=None, progress=None) -> dict:
    """Analyse every frame of a scan and track it; the scan.json dict.

    Parameters
    ----------
    manifest : trackscan.io.manifest.ScanManifest
    out_dir : path-like, optional
        Output folder; its ``.cache`` subfolder holds per-frame results.
        None: no cache.
    jobs : int
        Worker processes for the frame analyses.
    tracking : TrackingSettings, optional
    progress : callable, optional
        Receives ProgressEvent objects.

    Returns
    -------
    dict
        Per the contract (schema ``trackscan.scan/1``), plus
        ``early_warnings``, ``bond_tracks``, ``structures`` and ``direction``.
    """
    tracking = tracking or TrackingSettings()
    source = ensure_frames(manifest, progress=progress)
    cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
    frames = analyse_frames([e.file for e in manifest.frames], manifest.analysis,
                            periodic=manifest.periodic, jobs=jobs, cache_dir=cache_dir,
                            progress=progress)
    base = manifest.base_dir
    for entry, frame in zip(manifest.frames, frames):
        frame["value"] = float(entry.value)
        frame["source"] = Path(os.path.relpath(entry.file, base)).as_posix()
        if entry.energy is not None:
            frame["energy_hartree"] = float(entry.energy)
    tracked = track_scan(frames, settings=tracking, unit=manifest.coordinate.unit)
    logger.info("%s: %d frames, %d changes", manifest.name, len(frames), len(tracked["changes"]))
    scan = {
        "name": manifest.name,
        "coordinate": manifest.coordinate.to_dict(),
        "density_source": source,
        "settings": manifest.analysis.to_dict(),
        "tracking": tracked["tracking"],
        "periodic": bool(manifest.periodic),
        "trackscan_version": __version__,
        "direction": tracked["direction"],
    }
    if manifest.description:
        scan["description"] = manifest.description
    return {
        "schema": SCHEMA,
        "scan": scan,
        "frames": tracked["frames"],
        "changes": tracked["changes"],
        "early_warnings": tracked["early_warnings"],
        "bond_tracks": tracked["bond_tracks"],
        "structures": tracked["structures"],
    }

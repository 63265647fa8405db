"""Analyse a whole scan: frames -> topology -> tracking -> the ScanResult."""

from __future__ import annotations

import logging
import os
from pathlib import Path

from trackscan.analysis.runner import analyse_frames
from trackscan.errors import InputError
from trackscan.progress import report

__all__ = ["analyze_scan", "ensure_frames", "prepare_frames"]

logger = logging.getLogger(__name__)


def prepare_frames(manifest, *, jobs=1, progress=None, generator=None):
    """Make every frame of the manifest available; the manifest to use and its source.

    First the frames folder is tidied after an interrupted run (temporary
    files deleted, finished but unrecorded frames adopted; when no other
    run is writing it), and the manifest is read again when that gained a
    frame.  Then the missing generated frames are made by
    :func:`trackscan.analysis.generate.generate_frames` (the path refine
    uses too): recorded as they finish, the frames folder locked meanwhile.

    Parameters
    ----------
    manifest : ScanManifest
    jobs : int
        Worker processes for the generator (1: in this process).
    progress : callable, optional
    generator : Generator, optional
        Default: built from the manifest's ``generator`` section.

    Returns
    -------
    manifest : ScanManifest
        `manifest`, or the same manifest read again.
    source : str
        One line naming the density source (the generator's description, or
        ``"cube files"``).

    Raises
    ------
    InputError
        A listed cube file is missing and no generator can make it; the
        generator's program does not exist; the frames folder is in use.
    GeneratorError
        The generator failed.
    """
    from trackscan.analysis.generate import FrameTask, generate_frames, tidy_frames_folder

    gen = generator
    if gen is None and manifest.generator is not None:
        from trackscan.generators import make_generator

        gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
    if gen is not None and tidy_frames_folder(manifest, gen):
        from trackscan.io.manifest import load_manifest

        manifest = load_manifest(manifest.path)
    missing = [e for e in manifest.frames if not Path(e.file).is_file()]
    for e in missing:
        if not e.generated or gen is None:
            raise InputError("frame file does not exist", e.file)
    if missing:
        check = getattr(gen, "check", None)
        if check is not None:
            check()
        report(progress, "generate frames", 0, len(missing))
        generate_frames(manifest, [FrameTask(float(e.value), Path(e.file)) for e in missing],
                        generator=gen, jobs=jobs, progress=progress)
    if gen is not None and hasattr(gen, "describe"):
        return manifest, gen.describe()
    return manifest, "cube files"


def ensure_frames(manifest, *, jobs=1, progress=None, generator=None) -> str:
    """Generate the manifest's missing generated frames; name the density source.

    :func:`prepare_frames` without the manifest (frames an interrupted run
    finished are adopted, but only a new :func:`load_manifest` lists them).
    """
    return prepare_frames(manifest, jobs=jobs, progress=progress, generator=generator)[1]


def analyze_scan(manifest, *, out_dir=None, jobs=1, tracking=None, progress=None,
                 dask=None):
    """Analyse every frame of a scan and track it.

    Parameters
    ----------
    manifest : trackscan.io.manifest.ScanManifest
    out_dir : path-like, optional
        Output folder; its ``.cache`` subfolder holds per-frame results.
        None: no cache.
    jobs : int
        Worker processes for the frame analyses.
    tracking : TrackingSettings, optional
        Default: the manifest's ``tracking`` section.
    progress : callable, optional
        Receives ProgressEvent objects.
    dask : str or dask.distributed.Client, optional
        Analyse the frames on this dask.distributed scheduler (its workers
        must see the cube files) instead of `jobs` local processes.

    Returns
    -------
    trackscan.model.ScanResult
        Frames made by an earlier refine keep their refine records, and
        every change its estimate and uncertainty.
    """
    from trackscan.analysis.assemble import assemble_scan, place_frames
    from trackscan.analysis.runner import check_jobs

    check_jobs(jobs)
    manifest, source = prepare_frames(manifest, jobs=jobs, progress=progress)
    cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
    frames = analyse_frames([e.file for e in manifest.frames], manifest.analysis,
                            periodic=manifest.periodic, jobs=jobs, cache_dir=cache_dir,
                            progress=progress, dask=dask)
    return assemble_scan(manifest, place_frames(manifest, frames), source=source,
                         out_dir=out_dir, tracking=tracking)

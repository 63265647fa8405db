"""Analyse a whole scan: frames -> topology -> tracking -> the ScanResult."""

from __future__ import annotations

import logging
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path

from trackscan.analysis.runner import analyse_frames, worker_context
from trackscan.errors import InputError
from trackscan.io.manifest import record_generated_frame
from trackscan.progress import report

__all__ = ["analyze_scan", "ensure_frames"]

logger = logging.getLogger(__name__)


def _generate(gen, value, path):
    """Worker: make one frame's cube (module level, so it pickles); its energy."""
    made = gen.generate(value, path)
    return value, getattr(made, "energy", None)


def _record(manifest, entry, energy) -> None:
    """Enter a generated frame (and its energy) in the manifest's record."""
    record_generated_frame(manifest, {"file": Path(entry.file).name, "value": float(entry.value),
                                      "energy": energy})


def ensure_frames(manifest, *, jobs=1, progress=None) -> str:
    """Generate the manifest's missing generated frames; name the density source.

    Parameters
    ----------
    manifest : ScanManifest
    jobs : int
        Worker processes for the generator (1: in this process).
    progress : callable, optional

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
    missing = [e for e in manifest.frames if not Path(e.file).is_file()]
    gen = None
    if manifest.generator is not None:
        from trackscan.generators import make_generator

        gen = make_generator(manifest.generator, coordinate=manifest.coordinate)
    for e in missing:
        if not e.generated or gen is None:
            raise InputError("frame file does not exist", e.file)
    total = len(missing)
    if missing:
        logger.info("generating %d frame(s) with %s", total, gen.describe())
        report(progress, "generate frames", 0, total)
    if jobs > 1 and total > 1:
        with ProcessPoolExecutor(max_workers=min(jobs, total),
                                 mp_context=worker_context()) as pool:
            futures = {pool.submit(_generate, gen, e.value, e.file): e for e in missing}
            try:
                for n, fut in enumerate(as_completed(futures), start=1):
                    value, energy = fut.result()
                    _record(manifest, futures[fut], energy)
                    report(progress, "generate frames", n, total, f"value {value:g}")
            except BaseException:
                pool.shutdown(wait=True, cancel_futures=True)
                raise
    else:
        for n, e in enumerate(missing, start=1):
            _record(manifest, e, _generate(gen, e.value, e.file)[1])
            report(progress, "generate frames", n, total, f"value {e.value:g}")
    if gen is not None:
        return gen.describe()
    return "cube files"


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
    source = ensure_frames(manifest, jobs=jobs, progress=progress)
    cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
    frames = analyse_frames([e.file for e in manifest.frames], manifest.analysis,
                            periodic=manifest.periodic, jobs=jobs, cache_dir=cache_dir,
                            progress=progress, dask=dask)
    return assemble_scan(manifest, place_frames(manifest, frames), source=source,
                         out_dir=out_dir, tracking=tracking)

"""Refine a scan manifest: new frames from its generator, recorded as they come.

``refine_manifest(manifest, tolerance=...)`` analyses the scan's frames,
runs the refine loop (:func:`trackscan.refine.loop.refine_frames`) with the
manifest's generator, and returns the :class:`trackscan.model.ScanResult`
built from the frames the loop holds, with every change's estimate, method,
evaluations and uncertainty.  Each new cube is made by
:func:`trackscan.analysis.generate.generate_frames` (the path ``analyze``
uses too): entered in the frames folder's ``record.json`` as pending before
it starts, recorded as finished the moment it is, and adopted on the next
start if the run died in between, so a refine that stops half way (an
error, SIGINT/SIGTERM, a killed job) resumes where it stopped when rerun:
:func:`trackscan.io.manifest.load_manifest` merges the
recorded frames, their analyses come from the cache, and the loop makes the
proposal it would have made next.

``suggest_values(manifest, tolerance=...)`` is the same first step without a
generator: it returns the next values and writes the geometry of each as an
XYZ file, for the researcher to compute elsewhere.
"""

from __future__ import annotations

import json
import logging
import os
from pathlib import Path

from trackscan.errors import InputError
from trackscan.io.atomic import write_text_atomic
from trackscan.io.manifest import generated_frame_name, record_generated_frame
from trackscan.refine.backends import LocalBackend
from trackscan.analysis.assemble import assemble_scan, place_frame, place_frames
from trackscan.refine.loop import REFINE_KEY, check_options, plan_round, refine_frames
from trackscan.model import round_value

__all__ = ["record_generated_frame", "refine_manifest", "suggest_values", "load_frames",
           "SUGGESTIONS_NAME"]

logger = logging.getLogger(__name__)

#: File (in the suggestions folder) listing the values suggested so far.
SUGGESTIONS_NAME = "suggested.json"


def _suggested_meta(folder) -> dict:
    path = Path(folder) / SUGGESTIONS_NAME if folder is not None else None
    if path is None or not path.is_file():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        return {round_value(s["value"]): s[REFINE_KEY] for s in data["suggestions"]}
    except (ValueError, KeyError, TypeError):
        logger.warning("ignoring a broken list of suggestions %s", path)
        return {}


def load_frames(manifest, *, backend=None, cache_dir=None, suggested_dir=None,
                progress=None, generator=None) -> list:
    """Placed frames of every frame of the manifest (analysed, cached).

    Frames listed by value only are generated first
    (:func:`trackscan.analysis.scan.ensure_frames`); recorded refine frames
    get their ``refine`` bookkeeping back
    (:func:`trackscan.analysis.assemble.place_frames`).

    Returns
    -------
    source : str
        The density source, in words.
    frames : list of trackscan.model.Frame
    """
    from trackscan.analysis.scan import prepare_frames

    backend = backend or LocalBackend()
    # (frames an interrupted run finished are adopted first, and listed)
    manifest, source = prepare_frames(manifest, progress=progress, generator=generator)
    frames = backend.analyse([e.file for e in manifest.frames], manifest.analysis,
                             periodic=manifest.periodic, cache_dir=cache_dir, progress=progress)
    return source, place_frames(manifest, frames, suggested=_suggested_meta(suggested_dir))


def _track(manifest):
    from trackscan.tracking import track_scan

    def track(frames):
        return track_scan(frames, settings=getattr(manifest, "tracking", None),
                          unit=manifest.coordinate.unit)
    return track


def refine_manifest(manifest, *, tolerance: float, max_evaluations: int | None = None,
                    jobs: int = 1, out_dir=None, backend=None, generator=None,
                    progress=None):
    """Refine every change bracket of a scan with its generator.

    Parameters
    ----------
    manifest : ScanManifest
    tolerance : float
        Target bracket width, coordinate units.
    max_evaluations : int, optional
        Budget of refinement frames (counting those of earlier runs).
    jobs : int
        Values per round (and local worker processes).
    out_dir : path-like, optional
        Report folder; its ``.cache`` holds the frame analyses.
    backend : LocalBackend or DaskBackend, optional
        Default: ``LocalBackend(jobs)``.
    generator : Generator, optional
        Default: built from the manifest's ``generator`` section.
    progress : callable, optional

    Returns
    -------
    scan : trackscan.model.ScanResult
        Built from the frames the loop holds; changes annotated
        (:func:`trackscan.refine.estimates.annotate_changes`) and
        ``scan.refine`` summarising the run.
    result : RefineResult

    Raises
    ------
    InputError
        No generator (use :func:`suggest_values`), bad tolerance or budget.
    GeneratorError
        A generator call failed; frames finished before it stay recorded.
    """
    from trackscan.generators import make_generator

    check_options(tolerance=tolerance, max_evaluations=max_evaluations, jobs=jobs)
    if generator is None:
        if getattr(manifest.generator, "source", "none") == "none":
            raise InputError("refine needs a generator section to compute new frames; "
                             "use --suggest to get the values and geometries instead",
                             manifest.path)
        generator = make_generator(manifest.generator, coordinate=manifest.coordinate)
    backend = backend or LocalBackend(jobs)
    cache_dir = None if out_dir is None else Path(out_dir) / ".cache"
    folder = Path(manifest.frames_directory)
    check = getattr(generator, "check", None)
    if check is not None:
        check()
    source, frames = load_frames(manifest, backend=backend, cache_dir=cache_dir,
                                 progress=progress, generator=generator)

    def evaluate(probes):
        from trackscan.analysis.generate import FrameTask, generate_frames

        tasks = [FrameTask(float(p.value), folder / generated_frame_name(p.value),
                           {REFINE_KEY: p.meta}) for p in probes]
        # made and recorded as each finishes; the first failure is raised after
        made = generate_frames(manifest, tasks, generator=generator, run=backend.generate,
                               progress=None)
        tasks = [(t.value, os.fspath(t.path)) for t in tasks]
        new = backend.analyse([t[1] for t in tasks], manifest.analysis,
                              periodic=manifest.periodic, cache_dir=cache_dir)
        return [place_frame(f, value=p.value, file=t[1], base_dir=manifest.base_dir,
                            energy=out.energy, refine=p.meta)
                for p, t, out, f in zip(probes, tasks, made, new)]

    result = refine_frames(frames, evaluate=evaluate, tolerance=tolerance,
                           max_evaluations=max_evaluations, jobs=jobs, track=_track(manifest),
                           gtol=manifest.analysis.gtol, progress=progress)
    # the summary is read off the frames (as a later analyze does), so the
    # same frames give the same scan.json whichever command wrote it
    scan = assemble_scan(manifest, result.frames, source=source, out_dir=out_dir,
                         tolerance=tolerance)
    return scan, result


def suggest_values(manifest, *, tolerance: float, jobs: int = 1, out_dir=None,
                   backend=None, progress=None) -> list:
    """The next values to compute, with their geometries written as XYZ files.

    Parameters
    ----------
    manifest : ScanManifest
        Needs no density source; a ``generator.geometry`` section gives the
        geometries.
    tolerance : float
    jobs : int
        How many values to suggest.
    out_dir : path-like, optional
        Report folder; XYZ files and ``suggested.json`` go to
        ``<out_dir>/suggested/``.

    Returns
    -------
    list of dict
        ``value``, ``xyz`` (path or None without a geometry drive),
        ``method`` and ``bracket`` per suggestion; empty when every bracket
        is at most `tolerance`.
    """
    from trackscan.generators import make_drive
    from trackscan.io.xyz import write_xyz

    check_options(tolerance=tolerance, jobs=jobs)
    out_dir = Path(out_dir) if out_dir is not None else Path("reports") / manifest.name
    sugg_dir = out_dir / "suggested"
    _, frames = load_frames(manifest, backend=backend, cache_dir=out_dir / ".cache",
                            suggested_dir=sugg_dir, progress=progress)
    tracked = _track(manifest)(frames)
    rounds = [int(f.refine.round or 0) for f in frames if f.refine is not None]
    probes = plan_round(tracked, tolerance=tolerance, jobs=jobs,
                        round_number=max(rounds, default=0) + 1, gtol=manifest.analysis.gtol)
    drive = None
    gen = manifest.generator
    if gen is not None and getattr(gen, "geometry", None) is not None:
        drive = make_drive(gen.geometry, coordinate=manifest.coordinate, manifest=manifest.path)
    out = []
    for p in probes:
        xyz = None
        if drive is not None:
            geom = drive.geometry(p.value)
            xyz = sugg_dir / generated_frame_name(p.value).replace(".cube", ".xyz")
            write_xyz(xyz, geom)
        out.append({"value": p.value, "xyz": None if xyz is None else os.fspath(xyz),
                    "method": p.meta["method"], "bracket": p.meta["bracket"]})
    if probes:
        path = sugg_dir / SUGGESTIONS_NAME
        known = {}
        if path.is_file():
            try:
                known = {round_value(s["value"]): s for s in
                         json.loads(path.read_text(encoding="utf-8"))["suggestions"]}
            except (ValueError, KeyError, TypeError):
                known = {}
        for p in probes:
            known[round_value(p.value)] = {"value": p.value, REFINE_KEY: p.meta}
        write_text_atomic(path, json.dumps({"suggestions": [known[k] for k in sorted(known)]},
                                           indent=1, sort_keys=True) + "\n")
    return out

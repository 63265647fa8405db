"""Refine a scan manifest: new frames from its generator, recorded as they come.

``refine_manifest(manifest, tolerance=...)`` analyses the scan's frames,
runs the refine loop (:func:`trackscan.refine.loop.refine_frames`) with the
manifest's generator, and returns the scan.json dict with every change's
estimate, method, evaluations and uncertainty.  Each new cube is made by
:func:`trackscan.analysis.generate.generate_frames` (the path ``analyze``
uses too): entered in the frames folder's ``record.json`` as pending before
it starts, recorded as finished the moment it is, and adopted on the next
start if the run died in between, so a refine that stops half way (an
error, SIGINT/SIGTERM, a killed job) resumes where it stopped when rerun: :func:`trackscan.io.manifest.load_manifest` merges the
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
from trackscan.io.manifest import generated_frame_name, read_frame_record, record_generated_frame
from trackscan.refine.backends import LocalBackend
from trackscan.refine.estimates import annotate_changes
from trackscan.refine.loop import REFINE_KEY, check_options, plan_round, refine_frames
from trackscan.refine.proposals import DECIMALS

__all__ = ["record_generated_frame", "annotate_scan", "refine_manifest", "suggest_values", "load_frames",
           "SUGGESTIONS_NAME"]

logger = logging.getLogger(__name__)

#: File (in the suggestions folder) listing the values suggested so far.
SUGGESTIONS_NAME = "suggested.json"


def _key(value) -> float:
    return round(float(value), DECIMALS)


def _recorded_meta(manifest) -> dict:
    """Refine records of generated frames, by resolved cube path."""
    folder = Path(manifest.frames_directory)
    out = {}
    for rec in read_frame_record(folder):
        if isinstance(rec.get(REFINE_KEY), dict):
            out[os.path.normcase(os.path.abspath(folder / rec["file"]))] = rec[REFINE_KEY]
    return out


def _suggested_meta(folder) -> dict:
    path = Path(folder) / SUGGESTIONS_NAME if folder is not None else None
    if path is None or not path.is_file():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        return {_key(s["value"]): s[REFINE_KEY] for s in data["suggestions"]}
    except (ValueError, KeyError, TypeError):
        logger.warning("ignoring a broken list of suggestions %s", path)
        return {}


def _describe_frames(manifest, entries, frames, *, suggested=None):
    base = manifest.base_dir
    meta = _recorded_meta(manifest)
    suggested = suggested or {}
    for entry, frame in zip(entries, frames):
        frame["value"] = float(entry.value)
        frame["source"] = Path(os.path.relpath(entry.file, base)).as_posix()
        if entry.energy is not None:
            frame["energy_hartree"] = float(entry.energy)
        m = meta.get(os.path.normcase(os.path.abspath(entry.file))) or suggested.get(
            _key(entry.value))
        if m is not None:
            frame[REFINE_KEY] = dict(m)
    return frames


def load_frames(manifest, *, backend=None, cache_dir=None, suggested_dir=None,
                progress=None, generator=None) -> list:
    """Analysed frame dicts of every frame of the manifest (cached).

    Frames listed by value only are generated first
    (:func:`trackscan.analysis.scan.ensure_frames`); recorded refine frames
    get their ``refine`` bookkeeping back.
    """
    from trackscan.analysis.scan import prepare_frames

    backend = backend or LocalBackend()
    # (frames an interrupted run finished are adopted first, and listed)
    manifest = prepare_frames(manifest, progress=progress, generator=generator)[0]
    entries = list(manifest.frames)
    frames = backend.analyse([e.file for e in entries], manifest.analysis,
                             periodic=manifest.periodic, cache_dir=cache_dir, progress=progress)
    return _describe_frames(manifest, entries, frames, suggested=_suggested_meta(suggested_dir))


def _track(manifest):
    from trackscan.tracking import track_scan

    def track(frames):
        return track_scan(frames, unit=manifest.coordinate.unit)
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
    scan : dict
        scan.json content, changes annotated
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
    from trackscan.analysis import analyze_scan
    from trackscan.generators import make_generator
    from trackscan.io.manifest import load_manifest

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
    frames = load_frames(manifest, backend=backend, cache_dir=cache_dir, progress=progress,
                         generator=generator)

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
        for p, t, out, f in zip(probes, tasks, made, new):
            f["value"] = float(p.value)
            f["source"] = Path(os.path.relpath(t[1], manifest.base_dir)).as_posix()
            if out.energy is not None:
                f["energy_hartree"] = float(out.energy)
            f[REFINE_KEY] = dict(p.meta)
        return new

    result = refine_frames(frames, evaluate=evaluate, tolerance=tolerance,
                           max_evaluations=max_evaluations, jobs=jobs, track=_track(manifest),
                           gtol=manifest.analysis.gtol, progress=progress)
    final = load_manifest(manifest.path)
    # every frame is in the cache by now (with an out_dir): this only tracks and assembles
    scan = analyze_scan(final, out_dir=out_dir, jobs=jobs if isinstance(backend, LocalBackend)
                        else 1, progress=progress)
    scan = annotate_scan(final, scan, tolerance=tolerance)
    scan["scan"]["refine"] = {"tolerance": float(tolerance), "max_evaluations": max_evaluations,
                              "evaluations": result.total_evaluations,
                              "converged": result.converged, "message": result.message}
    return scan, result


def annotate_scan(manifest, scan: dict, *, tolerance: float | None = None) -> dict:
    """Give an analysed scan its refinement bookkeeping and change estimates.

    Frames that refinement made get their ``refine`` records back from the
    manifest's record of generated frames, and every change gets its
    estimate, method, evaluations and uncertainty
    (:func:`trackscan.refine.estimates.annotate_changes`), so analysing a
    refined scan again keeps what refinement found.

    Parameters
    ----------
    manifest : ScanManifest
    scan : dict
        From :func:`trackscan.analysis.analyze_scan`; changed in place.
    tolerance : float, optional
        The refine tolerance, when known.

    Returns
    -------
    dict
        `scan`.
    """
    meta = _recorded_meta(manifest)
    for f in scan["frames"]:
        m = meta.get(os.path.normcase(os.path.abspath(manifest.base_dir / f["source"])))
        if m is not None:
            f[REFINE_KEY] = dict(m)
    scan["changes"] = annotate_changes(scan["frames"], scan["changes"], tolerance=tolerance,
                                       gtol=manifest.analysis.gtol)
    return scan


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
    frames = load_frames(manifest, backend=backend, cache_dir=out_dir / ".cache",
                         suggested_dir=sugg_dir, progress=progress)
    tracked = _track(manifest)(frames)
    rounds = [int(f[REFINE_KEY].get("round", 0)) for f in frames if REFINE_KEY in f]
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
                known = {_key(s["value"]): s for s in
                         json.loads(path.read_text(encoding="utf-8"))["suggestions"]}
            except (ValueError, KeyError, TypeError):
                known = {}
        for p in probes:
            known[_key(p.value)] = {"value": p.value, REFINE_KEY: p.meta}
        write_text_atomic(path, json.dumps({"suggestions": [known[k] for k in sorted(known)]},
                                           indent=1, sort_keys=True) + "\n")
    return out

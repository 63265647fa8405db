"""The library entry points for notebooks and scripts (``trackscan.read_cube`` etc.).

Each function accepts what a researcher has at hand (a path, a mapping of
settings, a manifest or its file) and hands it to the module that does the
work; nothing here computes anything of its own.  Heavy modules (numpy,
scipy, the topology code) are imported only when a function is called, so
``import trackscan`` stays light.

Examples
--------
>>> import trackscan                                    # doctest: +SKIP
>>> frame = trackscan.analyze_frame("cubes/f0.cube")    # doctest: +SKIP
>>> frame                                               # doctest: +SKIP
<FrameTopology f0.cube: 3 nuclear, 3 bond, 1 ring; Poincaré–Hopf holds>
>>> scan = trackscan.analyze_scan("scan.yaml")          # doctest: +SKIP
>>> scan.changes[0].mechanism, scan.changes[0].bracket  # doctest: +SKIP
('fold', (1.4, 1.5))
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["read_cube", "analyze_frame", "load_manifest", "analyze_scan", "load_scan",
           "refine_scan", "write_scan"]


def read_cube(path, *, dataset: int = 0, max_points: int | None = None):
    """Read a cube file (plain, ``.gz``, ``.bz2`` or ``.xz``) into a density grid.

    Parameters
    ----------
    path : str or os.PathLike
    dataset : int
        Which data set of a multi-valued cube.
    max_points : int, optional
        Refuse files claiming more grid points (default ``512**3``).

    Returns
    -------
    trackscan.grid.DensityGrid
        Values in e/bohr^3, geometry in bohr (Å cubes are converted).

    Raises
    ------
    trackscan.errors.InputError
        Missing or malformed file (the message names the file and line).
    """
    from trackscan.io.cube import DEFAULT_MAX_POINTS
    from trackscan.io.cube import read_cube as _read

    return _read(path, dataset=dataset,
                 max_points=DEFAULT_MAX_POINTS if max_points is None else max_points)


def _settings(settings):
    from trackscan.settings import AnalysisSettings

    if settings is None or isinstance(settings, AnalysisSettings):
        return settings
    return AnalysisSettings.from_mapping(dict(settings), key_prefix="settings")


def analyze_frame(grid, settings=None, *, field=None, progress=None):
    """Critical points, bond paths and molecular graph of one density grid.

    Parameters
    ----------
    grid : DensityGrid, str or os.PathLike
        A grid, or the path of a cube file to read.
    settings : AnalysisSettings or dict, optional
        Analysis settings, or a mapping of their fields
        (``{"density_floor": 1e-5}``); unknown keys raise ``ConfigError``.
    field : Field, optional
        Analyse this field (e.g. an analytic model) instead of the
        interpolated grid.
    progress : callable, optional
        Receives :class:`trackscan.progress.ProgressEvent` objects.

    Returns
    -------
    trackscan.topology.FrameTopology
        ``counts``, ``critical_points``, ``bond_paths``, ``graph``
        (networkx), ``poincare_hopf``, ``warnings``; ``to_dict()`` gives the
        scan.json frame object.

    See Also
    --------
    trackscan.topology.analyze_frame : the function this calls.
    """
    from trackscan.topology import analyze_frame as _analyze

    if isinstance(grid, (str, os.PathLike)):
        grid = read_cube(grid)
    return _analyze(grid, _settings(settings), field=field, progress=progress)


def load_manifest(path):
    """Read and validate a scan manifest (YAML).

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    trackscan.io.manifest.ScanManifest
        Frames sorted along the coordinate; listed values checked against
        the measured ones.
    """
    from trackscan.io.manifest import load_manifest as _load

    return _load(path)


def _manifest(manifest):
    if isinstance(manifest, (str, os.PathLike)):
        return load_manifest(manifest)
    return manifest


def analyze_scan(manifest, *, out_dir=None, jobs: int = 1, progress=None):
    """Analyse every frame of a scan, track its critical points and find the changes.

    Parameters
    ----------
    manifest : ScanManifest, str or os.PathLike
        A loaded manifest or the path of its YAML file.
    out_dir : str or os.PathLike, optional
        Output folder: its ``.cache`` keeps per-frame results for reruns and
        ``scan.json`` is written there.  None: nothing is written.
    jobs : int
        Worker processes for the frame analyses.
    progress : callable, optional
        Receives :class:`trackscan.progress.ProgressEvent` objects.

    Returns
    -------
    trackscan.model.ScanResult
        ``frames``, ``changes`` (``mechanism``, ``bracket``, ``events``),
        ``structures``; ``to_dict()`` gives the scan.json content.
    """
    from trackscan.analysis import analyze_scan as _analyze
    from trackscan.io.output import prepare_output_dir

    m = _manifest(manifest)
    if out_dir is not None:
        out_dir = prepare_output_dir(out_dir)
    scan = _analyze(m, out_dir=out_dir, jobs=jobs, progress=progress)
    if out_dir is not None:
        write_scan(Path(out_dir) / "scan.json", scan)
    return scan


def write_scan(path, scan) -> Path:
    """Write a scan result as scan.json (atomically, byte-identical for equal input).

    Returns
    -------
    Path
    """
    from trackscan.analysis import write_scan as _write

    _write(Path(path), scan)
    return Path(path)


def load_scan(scan):
    """Read a scan result (scan.json) into the typed scan model.

    Parameters
    ----------
    scan : str, os.PathLike or dict
        A scan.json file, the folder holding it, or its parsed content.

    Returns
    -------
    trackscan.model.ScanResult

    Raises
    ------
    trackscan.errors.ParseError
        Missing file or not JSON.
    trackscan.model.ScanFormatError
        Not a scan result (the message names the key path).
    """
    import json

    from trackscan.errors import ParseError
    from trackscan.model import ScanResult

    if isinstance(scan, dict):
        return ScanResult.from_dict(scan)
    path = Path(os.fspath(scan))
    if path.is_dir():
        path = path / "scan.json"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ParseError("no such scan result", path) from None
    except (ValueError, UnicodeDecodeError) as exc:
        raise ParseError(f"not a JSON scan result ({exc})", path) from None
    return ScanResult.from_dict(data)


def refine_scan(manifest, *, tolerance: float, max_evaluations: int | None = None,
                jobs: int = 1, out_dir=None, progress=None):
    """Narrow every change bracket with new frames from the manifest's generator.

    (Named ``refine_scan`` because ``trackscan.refine`` is the refinement
    package.)

    Parameters
    ----------
    manifest : ScanManifest, str or os.PathLike
        Must have a ``generator`` section (otherwise see
        :func:`trackscan.refine.scan.suggest_values`).
    tolerance : float
        Target bracket width, in the coordinate's unit.
    max_evaluations : int, optional
        Budget of new frames.
    jobs : int
        Values computed per round (local processes).
    out_dir : str or os.PathLike, optional
        Output folder (frame cache and scan.json).
    progress : callable, optional

    Returns
    -------
    scan : trackscan.model.ScanResult
    result : trackscan.refine.RefineResult
        Rounds, evaluations and whether every bracket converged.
    """
    from trackscan.io.output import prepare_output_dir
    from trackscan.refine.scan import refine_manifest

    if out_dir is not None:
        out_dir = prepare_output_dir(out_dir)
    scan, result = refine_manifest(_manifest(manifest), tolerance=tolerance,
                                   max_evaluations=max_evaluations, jobs=jobs, out_dir=out_dir,
                                   progress=progress)
    if out_dir is not None:
        write_scan(Path(out_dir) / "scan.json", scan)
    return scan, result

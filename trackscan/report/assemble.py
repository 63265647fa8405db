"""Assemble the report document from a scan result.

The same :class:`~trackscan.report.document.Document` is rendered to HTML and
Markdown, so both carry the same summary, tables, figures and cautions.
"""

from __future__ import annotations

import logging

from trackscan import __version__
from trackscan.progress import report
from trackscan.report import density_map, fold_plots, graphs, plots, tables
from trackscan.report.document import BulletList, Document, Paragraph, Section, Table
from trackscan.report.estimate_geometry import estimate_geometry, xyz_name
from trackscan.report.scan_view import ScanView
from trackscan.report.summary import REFERENCES, methods_text, summary_text
from trackscan.report.wording import change_words, describe_value, refine_words, estimate_text

__all__ = ["build_document", "report_steps", "CAUTIONS", "TASK", "NO_ENERGY_NOTE"]

logger = logging.getLogger(__name__)

#: The cautions of the trade, stated in every report.
CAUTIONS = (
    "The topology of the density depends on the method and the basis set: another "
    "functional or basis can move a change, or remove or add one. Check the changes that "
    "matter with a second level of theory.",
    "A closed-shell density along a bond-breaking scan may belong to an unstable "
    "wavefunction (a restricted solution that is not the lowest one). Check the stability "
    "of the wavefunction in the quantum-chemistry code for frames past the change.",
    "Grid spacing and the printed precision of the cube files limit how close to a "
    "catastrophe a grid can see: near a fold the two CPs of the pair differ in density by "
    "a quantity that falls as the cube of their distance.",
)

#: Said in place of the energy profile when the frames carry no energies.
NO_ENERGY_NOTE = ("No energies were given for the frames, so there is no energy profile. "
                  "List them in the manifest (frames: - {file: ..., energy: ...}, hartree) "
                  "or use a generator that computes them (pyscf) to see the changes against "
                  "the energy.")

#: Progress task name of the report.
TASK = "report"
_PLOTS = 4


def report_steps(scan: ScanView) -> int:
    """Steps of a report for progress events: the plots, one per change, writing."""
    return _PLOTS + len(scan.changes) + 1


def _header_table(scan: ScanView, date) -> Table:
    h = scan.header
    rows = [("Scan", scan.name), ("Coordinate", scan.axis_label),
            ("Density source", h.density_source or "not recorded"),
            ("Frames", f"{len(scan.frames)} ({sum(1 for f in scan.frames if f.is_refined)} "
                       "new frames from refinement)"),
            ("Changes", str(len(scan.changes))), ("trackscan version", __version__)]
    if h.trackscan_version and str(h.trackscan_version) != __version__:
        rows.append(("Analysed with trackscan", str(h.trackscan_version)))
    if h.periodic is not None:
        rows.append(("Periodic cell", describe_value(h.periodic)))
    rows.append(("Result schema", str(scan.result.schema)))
    if date:
        rows.append(("Report date", str(date)))
    return Table("header", ("Field", "Value"), tuple(rows), "")


def build_document(scan: ScanView, *, date=None, progress=None, geometries=None) -> Document:
    """Build the report document.

    Parameters
    ----------
    scan : ScanView
    date : str, optional
        Date shown in the header (None: no date).
    progress : callable, optional
        Receives :class:`trackscan.progress.ProgressEvent` objects (task ``"report"``).
    geometries : dict, optional
        Filled with ``{change number: EstimateGeometry}`` for the writer's XYZ files.

    Returns
    -------
    Document
    """
    doc = Document(f"Structural changes along the scan “{scan.name}”")
    geometries = {} if geometries is None else geometries
    step, total = 0, report_steps(scan)

    blocks = [Paragraph(summary_text(scan))]
    if scan.header.description:
        blocks.append(Paragraph(str(scan.header.description).strip()))
    blocks.append(_header_table(scan, date))
    doc.sections.append(Section("summary", "Summary", tuple(blocks)))

    if scan.changes:
        blocks = (tables.summary_table(scan),)
    else:
        blocks = (Paragraph("No change was found between the frames of this scan: every frame "
                            "has the same molecular graph (a change between two frames closer "
                            "than the sampling cannot be excluded). See the early warnings "
                            "below for bond paths close to a change.", note=True),)
    doc.sections.append(Section("changes", "Changes", blocks))

    blocks = []
    for name, make in (("energy", plots.energy_plot), ("CP counts", plots.counts_plot),
                       ("bond CP properties", plots.bond_cp_plot)):
        report(progress, TASK, step, total, f"plot: {name}")
        step += 1
        fig = make(scan)
        if fig is not None:
            blocks.append(fig)
        elif make is plots.energy_plot:
            blocks.append(Paragraph(NO_ENERGY_NOTE, note=True))
    blocks.append(Paragraph("Colours from the palette of Okabe & Ito (2008), safe for the "
                            "common colour-vision deficiencies; every CP kind also has its "
                            "own marker shape. Positions and distances in Å, densities and "
                            "their derivatives in atomic units (a.u.)."))
    doc.sections.append(Section("plots", "Along the scan", tuple(blocks)))

    report(progress, TASK, step, total, "molecular graph of each structure")
    step += 1
    blocks = []
    st = tables.structures_table(scan)
    if st is not None:
        blocks.append(st)
    fig = graphs.structures_figure(scan)
    if fig is not None:
        blocks.append(fig)
    if blocks:
        doc.sections.append(Section("structures", "Structures", tuple(blocks)))

    for k, change in enumerate(scan.changes, 1):
        report(progress, TASK, step, total, f"change {k}: figures")
        step += 1
        doc.sections.append(_change_section(scan, change, k, geometries))

    warn = tables.warning_table(scan)
    if warn is not None:
        doc.sections.append(Section("early_warnings", "Early warnings", (warn,)))
    elif not scan.changes:
        doc.sections.append(Section("early_warnings", "Early warnings", (
            Paragraph("The analysis recorded no early warnings: nothing in this scan suggests "
                      "a change just outside it."),)))

    blocks = [Paragraph(p) for p in methods_text(scan)]
    blocks.append(BulletList(tuple(f"[{i}] {r}" for i, r in enumerate(REFERENCES, 1))))
    doc.sections.append(Section("methods", "Methods", tuple(blocks)))

    limit = (" The limit of each change is given below." if scan.changes else
             " This scan has no change; a pair of CPs closing in below the grid's resolution "
             "would show as an early warning or an unresolved change.")
    blocks = [BulletList(CAUTIONS[:-1] + (CAUTIONS[-1] + limit,) + _core_caution(scan))]
    if scan.changes:
        blocks.append(tables.resolution_table(scan))
    doc.sections.append(Section("cautions", "Cautions", tuple(blocks)))

    blocks = []
    for group, caption in (("settings", "Analysis settings (the critical-point search)."),
                           ("tracking", "Tracking settings (matching and change detection).")):
        table = tables.settings_table(scan, group=group, caption=caption)
        if table is not None:
            blocks.append(table)
    if blocks:
        doc.sections.append(Section("settings", "Settings", tuple(blocks), collapsible=True))
    doc.sections.append(Section("frames", "Per-frame results", (tables.frame_table(scan),),
                                collapsible=True))
    files = ["Every figure as NAME.png (300 dpi), NAME.svg and NAME.pdf, same content.",
             "changes.csv: one row per change (units in the header).",
             "critical_points.csv: one row per critical point per frame, with its track "
             "label; positions in Å, densities and curvatures in a.u."]
    files += [f"{xyz_name(k)}: the geometry at the estimate of change {k} (Å)."
              for k in sorted(geometries)]
    doc.sections.append(Section("files", "Files", (BulletList(tuple(files)),)))
    return doc


def _core_caution(scan: ScanView) -> tuple:
    """The caution for valence-only (ECP) atoms, when a frame has any."""
    notes = set()
    for f in scan.frames:
        for a in f.atoms:
            core = a.extra.get("core_model")
            if isinstance(core, dict):
                notes.add(str(core.get("note") or a.label))
    if not notes:
        return ()
    return ("; ".join(sorted(notes)) + ". An effective-core-potential density has no core: "
            "a spherical model core was restored, and the topology near such atoms follows "
            "the core model used.",)


def _change_section(scan: ScanView, change, k: int, geometries: dict) -> Section:
    before, after = scan.change_frames(change)
    where = ""
    if before is not None and after is not None:
        where = (f" between frames {scan.frame_label(before)} and "
                 f"{scan.frame_label(after)}")
    text = (f"Change {k}{where} ({change.mechanism}) at {scan.coordinate_label} = "
            f"{estimate_text(scan, change)}: {change_words(scan, change)}.")
    refined = refine_words(scan, change)
    blocks = [Paragraph(f"{text} {refined}" if refined else text)]
    if change.note:
        blocks.append(Paragraph(str(change.note), note=True))
    for make in (fold_plots.fold_figure, fold_plots.conflict_figure):
        fig = make(scan, change, k)
        if fig is not None:
            blocks.append(fig)
    pair = tables.pair_table(scan, change, k)
    if pair is not None:
        blocks.append(pair)
    fig = graphs.graph_figure(scan, change, k)
    if fig is not None:
        blocks.append(fig)
    dmap, note = density_map.density_map_figure(scan, change, k)
    if dmap is not None:
        blocks.append(dmap)
    if note:
        blocks.append(Paragraph(note, note=True))
    geometry = estimate_geometry(scan, change)
    if geometry is not None:
        geometries[k] = geometry
        blocks.append(tables.geometry_table(scan, change, k, geometry))
    energy = tables.energy_density_table(scan, change, k)
    if energy is not None:
        blocks.append(energy)
    return Section(f"change{k}", f"Change {k}", tuple(blocks))

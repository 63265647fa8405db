"""Assemble the report document from a scan result.

The same :class:`~trackscan.report.document.Document` is rendered to HTML and
Markdown, so both carry the same header, tables, figures and cautions.
"""

from __future__ import annotations

import logging

from trackscan import __version__
from trackscan.progress import report
from trackscan.report import density_map, graphs, plots, tables
from trackscan.report.document import BulletList, Document, Paragraph, Section, Table
from trackscan.report.scan_data import ScanData
from trackscan.report.wording import change_words, describe_value, refine_words

__all__ = ["build_document", "report_steps", "CAUTIONS", "TASK"]

logger = logging.getLogger(__name__)

#: The cautions of the trade, stated in every report.
CAUTIONS = (
    "The topology of the density depends on the method and the basis set: another "
    "functional or basis can move a change point, or remove or add one. Check the changes "
    "that matter with a second level of theory.",
    "A closed-shell density along a bond-breaking scan may belong to an unstable "
    "wavefunction (a restricted solution that is not the lowest one). Check the stability "
    "of the wavefunction in the quantum-chemistry code for frames past the change.",
    "Grid spacing and the printed precision of the cube files limit how close to a "
    "catastrophe a grid can see: near a fold the two coalescing CPs differ in density by "
    "a quantity that falls as the cube of their distance.",
)


def _header_table(scan: ScanData, date) -> Table:
    coord = scan.coordinate_label + (f" ({scan.unit_symbol})" if scan.unit_symbol else "")
    source = scan.scan.get("density_source")
    rows = [("Scan", scan.name), ("Coordinate", coord),
            ("Density source", describe_value(source) if source else "not recorded"),
            ("Frames", str(len(scan.frames))), ("Changes", str(len(scan.changes))),
            ("trackscan version", __version__)]
    analysed_with = scan.scan.get("trackscan_version")
    if analysed_with and str(analysed_with) != __version__:
        rows.append(("Analysed with trackscan", str(analysed_with)))
    if "periodic" in scan.scan:
        rows.append(("Periodic cell", describe_value(scan.scan["periodic"])))
    if scan.data.get("schema"):
        rows.append(("Result schema", str(scan.data["schema"])))
    if date:
        rows.append(("Report date", str(date)))
    return Table("header", ("Field", "Value"), tuple(rows), "")


#: Progress task name of the report.
TASK = "report"
_PLOTS = 4


def report_steps(scan: ScanData) -> int:
    """Steps of a report for progress events: the plots, one per change, writing."""
    return _PLOTS + len(scan.changes) + 1


def build_document(scan: ScanData, *, date=None, progress=None) -> Document:
    """Build the report document.

    Parameters
    ----------
    scan : ScanData
    date : str, optional
        Date shown in the header (None: no date).
    progress : callable, optional
        Receives :class:`trackscan.progress.ProgressEvent` objects (task
        ``"report"``) as figures are made.

    Returns
    -------
    Document
    """
    doc = Document(f"Structural changes along the scan “{scan.name}”")
    step, total = 0, report_steps(scan)
    blocks = []
    if scan.scan.get("description"):
        blocks.append(Paragraph(str(scan.scan["description"]).strip()))
    blocks.append(_header_table(scan, date))
    doc.sections.append(Section("header", "Scan", tuple(blocks)))

    blocks = []
    if scan.changes:
        blocks.append(tables.summary_table(scan))
    else:
        blocks.append(Paragraph(
            "No structural change was found between the frames of this scan: every frame has "
            "the same molecular graph (a change between two frames closer than the sampling "
            "cannot be excluded). See the early warnings below for structures close to a "
            "change.", note=True))
    doc.sections.append(Section("summary", "Change points", tuple(blocks)))

    blocks = [Paragraph("Colours from the palette of Okabe & Ito (2008), “Color Universal "
                        "Design”, safe for the common colour-vision deficiencies; every CP "
                        "kind also has its own marker shape. Positions in Å, densities and "
                        "their derivatives in atomic units.")]
    makers = (("CP counts", plots.counts_plot), ("bond CP properties", plots.bond_cp_plot),
              ("energy", plots.energy_plot), ("fold distances", plots.fold_distance_plot))
    for name, make in makers:
        report(progress, TASK, step, total, f"plot: {name}")
        step += 1
        fig = make(scan)
        if fig is not None:
            blocks.append(fig)
    doc.sections.append(Section("plots", "Along the scan", tuple(blocks)))

    for k, change in enumerate(scan.changes, 1):
        report(progress, TASK, step, total, f"change {k}: molecular graphs and density map")
        step += 1
        blocks = [Paragraph(_change_line(scan, change, k))]
        if change.get("note"):
            blocks.append(Paragraph(f"Note from the analysis: {change['note']}", note=True))
        pair = tables.pair_table(scan, change, k)
        if pair is not None:
            blocks.append(pair)
        fig = graphs.graph_figure(scan, change, k)
        if fig is not None:
            blocks.append(fig)
        zoom = plots.fold_zoom_plot(scan, change, k)
        if zoom is not None:
            blocks.append(zoom)
        dmap, note = density_map.density_map_figure(scan, change, k)
        if dmap is not None:
            blocks.append(dmap)
        if note:
            blocks.append(Paragraph(note, note=True))
        doc.sections.append(Section(f"change{k}", f"Change {k}", tuple(blocks)))

    warn = tables.warning_table(scan)
    if warn is not None:
        doc.sections.append(Section("early_warnings", "Early warnings", (warn,)))
    elif not scan.changes:
        doc.sections.append(Section("early_warnings", "Early warnings", (
            Paragraph("The analysis recorded no early warnings: nothing in this scan suggests "
                      "a change just outside it."),)))

    limit = (" The limit of each change is given below." if scan.changes else
             " This scan has no change; a pair of CPs closing in below the grid's resolution "
             "would show as an early warning or an unresolved change.")
    blocks = [BulletList(CAUTIONS[:-1] + (CAUTIONS[-1] + limit,) + _core_caution(scan))]
    if scan.changes:
        blocks.append(tables.resolution_table(scan))
    doc.sections.append(Section("cautions", "Cautions", tuple(blocks)))

    blocks = []
    for key, caption in (("settings", "Analysis settings."),
                         ("tracking", "Tracking settings (matching and change detection).")):
        table = tables.settings_table(scan, key=key, caption=caption)
        if table is not None:
            blocks.append(table)
    if blocks:
        doc.sections.append(Section("settings", "Settings", tuple(blocks), collapsible=True))
    doc.sections.append(Section("frames", "Per-frame results", (tables.frame_table(scan),),
                                collapsible=True))
    doc.sections.append(Section("files", "Files", (BulletList((
        "changes.csv: one row per change (numbers as in scan.json).",
        "critical_points.csv: one row per critical point per frame, with its persistent "
        "track id; positions in Å, densities in atomic units.")),)))
    return doc


def _core_caution(scan: ScanData) -> tuple:
    """The caution for valence-only (ECP) atoms, when a frame has any."""
    notes = sorted({a["core_model"].get("note", f"{a.get('element')}{a.get('number')}")
                    for f in scan.frames for a in f.get("atoms") or []
                    if isinstance(a, dict) and a.get("core_model")})
    if not notes:
        return ()
    return ("; ".join(notes) + ". An effective-core-potential density has no core: a "
            "spherical model core was restored, and the topology near such atoms follows "
            "the core model used.",)


def _change_line(scan: ScanData, change, k: int) -> str:
    before, after = scan.change_frames(change)
    mech = change.get("mechanism") or "unknown"
    where = ""
    if before is not None and after is not None:
        where = f" between frames {before.get('index')} and {after.get('index')}"
    text = f"Change {k}{where} ({mech}): {change_words(change, scan)}."
    refined = refine_words(change, scan)
    return f"{text} {refined}" if refined else text

"""The text a reader needs: the summary paragraph at the top and the methods paragraph.

The summary gives one sentence per change (location ± uncertainty, events,
mechanism); the methods paragraph says how the points were found and what
the uncertainty means, with the references the code's docstrings cite.
"""

from __future__ import annotations

from trackscan.report.change_geometry import fold_pair, switch_event
from trackscan.report.scan_view import ScanView
from trackscan.report.wording import (change_words, estimate_text, fmt_coord, coord_decimals,
                                      method_words)
from trackscan.vocabulary import UNCERTAINTY_SOURCES, plural

__all__ = ["summary_text", "methods_text", "REFERENCES"]

#: The references of the methods paragraph, cited as [1], [2], ... in its text.
REFERENCES = (
    "R. F. W. Bader, Atoms in Molecules: A Quantum Theory, Oxford University Press (1990).",
    "R. F. W. Bader, T. T. Nguyen-Dang and Y. Tal, J. Chem. Phys. 70, 4316 (1979) "
    "(structural changes as catastrophes of the density).",
    "C. de Boor, A Practical Guide to Splines, Springer (1978); M. Unser, IEEE Signal "
    "Process. Mag. 16(6), 22 (1999), doi:10.1109/79.799930 (cubic B-spline interpolation).",
    "C. J. Cerjan and W. H. Miller, J. Chem. Phys. 75, 2800 (1981); J. Baker, J. Comput. "
    "Chem. 7, 385 (1986) (Newton steps with eigenvector following).",
    "P. L. A. Popelier, Chem. Phys. Lett. 228, 160 (1994) (seeding the search for all "
    "critical points).",
    "H. W. Kuhn, Naval Res. Logist. Q. 2, 83 (1955), doi:10.1002/nav.3800020109 "
    "(optimal assignment).",
    "R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall (1973) "
    "(inverse interpolation with a bisection safeguard).",
    "Yu. A. Abramov, Acta Cryst. A53, 264 (1997) (kinetic energy density G from ρ); "
    "E. Espinosa, E. Molins and C. Lecomte, Chem. Phys. Lett. 285, 170 (1998).",
)


def _range_words(scan: ScanView) -> str:
    values = [f.value for f in scan.frames]
    if not values:
        return ""
    d = coord_decimals(*values)
    return (f"from {fmt_coord(values[0], d)} to {scan.with_unit(fmt_coord(values[-1], d))}")


def _mechanism_clause(scan: ScanView, change) -> str:
    if change.mechanism == "fold":
        pair = fold_pair(scan, change)
        if pair is not None:
            names = " and the ".join(
                f"bond CP of {scan.labels(cp.atoms, pair.frame)}" if cp.kind == "bond"
                else f"{cp.kind.replace('_', '-')} CP" for cp in pair.cps)
            verb = "annihilate" if pair.side == "before" else "are born"
            return f"a fold, in which the {names} {verb} together"
        return "a fold"
    if change.mechanism == "conflict":
        e = switch_event(change)
        if e is not None:
            before, after = scan.change_frames(change)
            end_old = [a for a in (e.atoms_before or ()) if a not in (e.atoms_after or ())]
            end_new = [a for a in (e.atoms_after or ()) if a not in (e.atoms_before or ())]
            if end_old and end_new:
                return (f"a conflict, in which one end of the bond path moves from "
                        f"{scan.label(end_old[0], before)} to {scan.label(end_new[0], after)} "
                        "with the numbers of CPs unchanged")
        return "a conflict"
    if change.mechanism == "mixed":
        return "a mixed change (fold and conflict in the same step)"
    note = f" ({change.note})" if change.note else ""
    return f"an unresolved change: the frames cannot decide the mechanism{note}"


def _quote_source(change, q) -> str:
    """Where the ± comes from, as a parenthesis in a sentence."""
    if q.source == "model":
        return f"± from the {method_words(change)}"
    if q.source == "bracket":
        return "± half the bracket"
    return f"± {UNCERTAINTY_SOURCES.get(q.source, q.source)}"


def summary_text(scan: ScanView) -> str:
    """The summary paragraph: the scan in one sentence, then one sentence per change."""
    n = len(scan.frames)
    new = sum(1 for f in scan.frames if f.is_refined)
    source = scan.header.density_source or "densities of unrecorded origin"
    head = (f"Along the scan of the {scan.coordinate_label} {_range_words(scan)} "
            f"({plural(n, 'frame')}" + (f", {new} of them new frames added by refinement"
                                         if new else "") + f"; {source}), ")
    changes = scan.changes
    if not changes:
        return head + ("the molecular graph does not change: every frame has the same "
                       "structure (a change between two frames closer than the sampling "
                       "cannot be excluded).")
    times = {1: "once", 2: "twice"}.get(len(changes), f"{len(changes)} times")
    head += f"the molecular graph changes {times}."
    sentences = [head]
    for k, change in enumerate(changes, 1):
        before, after = scan.change_frames(change)
        q = scan.quoted(change)
        where = (f"Change {k} happens at {scan.coordinate_label} = "
                 f"{estimate_text(scan, change)}")
        if q is not None:
            where += f" ({_quote_source(change, q)})"
        where += (f", between frames {scan.frame_label(before)} and {scan.frame_label(after)}"
                  if before is not None and after is not None else "")
        text = f"{where}: {change_words(scan, change)}; this is {_mechanism_clause(scan, change)}"
        if isinstance(change.evaluations, int) and change.evaluations:
            text += f" (located with {plural(change.evaluations, 'new frame')})"
        if q is not None and q.resolution_limited:
            text += "; the frames beside it are at the limit of what the grids resolve"
        sentences.append(text + ".")
    return " ".join(sentences)


def methods_text(scan: ScanView) -> list:
    """The methods as a list of paragraphs (plain text with [n] citations of REFERENCES)."""
    paras = [
        "Each frame's electron density ρ, given on a grid (cube file), is interpolated by "
        "tricubic B-splines [3] after subtracting a core-localised promolecular density, "
        "whose exact value and derivatives are added back, so that ρ, its gradient and its "
        "Hessian are smooth between the grid points. Critical points (CPs) of ρ [1] are "
        "found by Newton steps with eigenvector following [4] from seeds at atom pairs, "
        "triplets and grid minima of |∇ρ| [5], until the numbers of CPs satisfy the "
        "Poincaré–Hopf relation n − b + r − c = 1; bond paths are traced along ∇ρ from "
        "each bond CP. Energy densities at the bond CPs use G from ρ and its derivatives "
        "and V from the local virial theorem [8].",
        "CPs are followed from frame to frame by an optimal assignment of the CPs of each "
        "kind on their distances, after aligning the nuclei [6]. Frames whose molecular "
        "graphs differ belong to different structures; two neighbouring frames with "
        "different structures bracket a change [2]. A change is a fold when a pair of CPs "
        "whose indices differ by one (a bond and a ring CP, or a ring and a cage CP) is "
        "born or annihilated, and a conflict when a bond path switches one of its ends "
        "with the numbers of CPs unchanged.",
        "Refinement computes new frames inside each bracket. For a fold, the squared "
        "distance d² between the two CPs of the pair falls linearly to zero at the fold "
        "(fold normal form), so the coordinate is interpolated as a polynomial in d² "
        "through the frames nearest the bracket and evaluated at d² = 0 (inverse "
        "interpolation [7]); for a conflict the same is done with the signed offset of "
        "the switching bond path from the bond CP it runs into, which changes sign at the "
        "switch. Each new frame is placed by this model or by bisection, whichever keeps "
        "the number of frames within that of plain bisection plus three [7].",
        "The uncertainty quoted with each estimate is one number. When a model gave the "
        "estimate, it combines the model's calibrated error (the difference between "
        "interpolations of successive degree, with the effect of the CP positions' own "
        "error) and the resolution term (how far the grid's own catastrophe can lie from "
        "the true one, converted into the coordinate) in quadrature, and the source named "
        "is the larger of the two; otherwise, or when that would exceed it, it is half the "
        "bracket, within which the change certainly lies. It is never more than half the "
        "bracket. Grid spacing and the printed precision of the cube files limit how close "
        "to a fold the frames can follow the pair; that limit is given for each change "
        "under Cautions.",
    ]
    return paras

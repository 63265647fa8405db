"""The quantity each change's estimate comes from, with the fit that gives it.

Folds: the squared distance d² of the fold pair along the scan.  Near a
fold d² is a smooth function of the coordinate with a simple zero at the
fold (fold normal form, METHODS.md section 2); refinement interpolates the
inverse function s(d²) through the samples nearest the bracket and takes
s(0) [1]_.  The figure draws those samples, that interpolant and its zero,
over the whole scan and zoomed on the estimate.

Conflicts: the signed offset of the switching bond path from the bond CP it
runs into (computed by :func:`trackscan.refine.indicators.path_offset`, the
function refinement uses), which changes sign at the switch, and the
inverse interpolation through the samples nearest the bracket.

References
----------
.. [1] R. P. Brent, *Algorithms for Minimization without Derivatives*,
   Prentice-Hall (1973), chapter 4 (inverse interpolation) [from memory].
"""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from trackscan.report.change_geometry import fold_pair, switch_event
from trackscan.report.document import Figure
from trackscan.report.plots import mark_changes, orient, set_xlabel
from trackscan.report.scan_view import ScanView, cp_by_track
from trackscan.report.style import (BRACKET_STYLE, ESTIMATE_STYLE, LINE_COLOURS, OKABE_ITO,
                                    legend_below, new_figure, render, styled)
from trackscan.report.wording import estimate_text, fmt_coord, estimate_decimals
from trackscan.units import BOHR_IN_ANGSTROM

__all__ = ["fold_series", "fold_figure", "conflict_series", "conflict_figure",
           "inverse_interpolant"]

FIT_COLOUR = OKABE_ITO["vermillion"]
DATA_COLOUR = LINE_COLOURS[0]
#: The zoom shows this many bracket widths on the side where the pair exists.
ZOOM_BRACKETS = 2.5
#: Samples used when the change does not record how many the fit used.
DEFAULT_FIT_SAMPLES = 3


def inverse_interpolant(values, indicator):
    """The polynomial s(g) through the points (g_i, s_i) (inverse interpolation).

    Returns a callable ``s(g)``; degree ``len(values) - 1``.
    """
    g = np.asarray(indicator, float)
    s = np.asarray(values, float)
    _, first = np.unique(g, return_index=True)   # equal indicator values: keep one of each
    keep = np.sort(first)
    g, s = g[keep], s[keep]
    if len(g) < 2:
        return np.poly1d([float(s[0])])
    coef = np.polyfit(g, s, len(g) - 1)
    return np.poly1d(coef)


def fold_series(scan: ScanView, change):
    """d (Å) of the fold pair in every frame where both of its CPs exist.

    Returns
    -------
    (FoldPair, x, d) or None
        None when the change has no fold pair.
    """
    pair = fold_pair(scan, change)
    if pair is None:
        return None
    xs, ds = [], []
    for f in scan.frames:
        a, b = (cp_by_track(f, t) for t in pair.tracks)
        if a is not None and b is not None:
            xs.append(f.value)
            ds.append(float(np.linalg.norm(a.position - b.position)) * BOHR_IN_ANGSTROM)
    return pair, np.array(xs, float), np.array(ds, float)


def _fit_samples(scan: ScanView, change, pair, x, d2):
    """The samples nearest the bracket on the pair's side, as refinement used them."""
    fit = change.fit
    k = int(fit.get("samples", DEFAULT_FIT_SAMPLES)) if isinstance(fit, dict) else \
        DEFAULT_FIT_SAMPLES
    order = np.argsort(np.abs(x - pair.frame.value))
    use = np.sort(order[:max(2, min(k, len(x)))])
    return x[use], d2[use]


@styled
def fold_figure(scan: ScanView, change, number: int):
    """d² of the fold pair with the fitted interpolant: whole scan and zoom on the estimate."""
    series = fold_series(scan, change)
    if series is None or len(series[1]) < 2:
        return None
    pair, x, d = series
    d2 = d ** 2
    sx, sy = _fit_samples(scan, change, pair, x, d2)
    model = inverse_interpolant(sx, sy)
    zero = float(model(0.0))
    y_curve = np.linspace(0.0, float(sy.max()), 100)
    x_curve = model(y_curve)
    est = scan.estimate(change)
    q = scan.quoted(change)
    fig = new_figure(2, 2.5)
    ax_all, ax_zoom = fig.subplots(1, 2)
    for ax in (ax_all, ax_zoom):
        ax.plot(x, d2, color=DATA_COLOUR, lw=0.9, marker="o", ms=3.2, zorder=3)
        ax.plot(sx, sy, ls="none", marker="o", ms=5.5, markerfacecolor="none",
                markeredgecolor=FIT_COLOUR, markeredgewidth=1.0, zorder=4)
        ax.plot(x_curve, y_curve, color=FIT_COLOUR, lw=1.2, zorder=3)
        ax.grid(alpha=0.3, lw=0.4)
        ax.set_ylabel("d² (Å²)")
    mark_changes(ax_all, scan)
    lo, hi = sorted(change.bracket)
    ax_zoom.axvspan(lo, hi, **BRACKET_STYLE)
    if q is not None:
        ax_zoom.axvspan(est - q.value, est + q.value, color=FIT_COLOUR, alpha=0.18, lw=0)
    ax_zoom.axvline(est, **ESTIMATE_STYLE)
    width = (hi - lo) or abs(est) * 1e-3 or 1.0
    half = q.value if q is not None else 0.0
    present_side = -1.0 if pair.frame.value <= lo else 1.0
    if present_side < 0:
        window = (min(lo, est - half) - ZOOM_BRACKETS * width, max(hi, est + half) + 0.5 * width)
    else:
        window = (min(lo, est - half) - 0.5 * width, max(hi, est + half) + ZOOM_BRACKETS * width)
    ax_zoom.set_xlim(*window)
    inside = (x_curve >= window[0]) & (x_curve <= window[1])
    ys = list(y_curve[inside]) + [v for u, v in zip(x, d2) if window[0] <= u <= window[1]]
    top = max(ys) if ys else float(sy.max())
    ax_zoom.set_ylim(-0.05 * top, 1.15 * top)
    ax_zoom.xaxis.set_major_locator(MaxNLocator(4))
    ax_all.set_ylim(bottom=-0.03 * float(d2.max()))
    ax_all.set_title("along the scan", loc="left")
    ax_zoom.set_title("zoom on the estimate", loc="left")
    orient(ax_all, scan)
    orient(ax_zoom, scan)
    fig.subplots_adjust(wspace=0.32)
    set_xlabel(ax_all, scan, fig)
    set_xlabel(ax_zoom, scan, fig)
    names = " and ".join(_cp_words(scan, pair.frame, cp) for cp in pair.cps)
    handles = [Line2D([], [], color=DATA_COLOUR, marker="o", ms=3, lw=0.9,
                      label="d² in each frame"),
               Line2D([], [], ls="none", marker="o", ms=5, markerfacecolor="none",
                      markeredgecolor=FIT_COLOUR, label="samples of the fit"),
               Line2D([], [], color=FIT_COLOUR, lw=1.2, label="fitted s(d²)"),
               Patch(facecolor=BRACKET_STYLE["color"], alpha=0.5, label="bracket"),
               Line2D([], [], **ESTIMATE_STYLE, label="estimate")]
    if q is not None:
        handles.append(Patch(facecolor=FIT_COLOUR, alpha=0.3, label="± uncertainty"))
    legend_below(fig, [ax_all, ax_zoom], handles, ncol=3)
    dd = estimate_decimals(scan, change)
    agree = (f"The interpolant reaches d² = 0 at {scan.with_unit(fmt_coord(zero, dd))}"
             + (", the estimate" if abs(zero - est) <= max(q.value if q else 0, 1e-9)
                else f" (the estimate, {scan.with_unit(fmt_coord(est, dd))}, comes from "
                     f"{change.estimate_method or 'the bracket'})") + ".")
    return Figure(f"fold_change{number}", render(fig),
                  f"Change {number} (fold): squared distance d² between the {names}, which "
                  f"annihilate{'' if pair.side == 'before' else ' (are born)'} at the fold. "
                  f"Near a fold d² falls linearly to zero (fold normal form); the fit "
                  f"interpolates the coordinate as a polynomial in d² through the "
                  f"{len(sx)} frames nearest the bracket (circled) and takes its value at "
                  f"d² = 0. {agree} Estimate: {estimate_text(scan, change)}.",
                  f"fold indicator of change {number}")


def _cp_words(scan, frame, cp) -> str:
    if cp.kind == "bond" and cp.atoms:
        return f"bond CP of {scan.labels(cp.atoms, frame)}"
    return f"{cp.kind.replace('_', '-')} CP"


def conflict_series(scan: ScanView, change):
    """Signed path offsets (Å) of a conflict's switching bond path next to the bracket.

    Returns
    -------
    (x, g) arrays, or None when the change is no single bond switch.
    """
    if switch_event(change) is None:
        return None
    from trackscan.refine.indicators import conflict_samples, conflict_spec

    frames = scan.frames
    spec = conflict_spec(change)
    if spec is None:
        return None
    samples = sorted(conflict_samples(frames, spec, per_side=4), key=lambda s: s.value)
    if len(samples) < 2:
        return None
    return (np.array([s.value for s in samples], float),
            np.array([s.g for s in samples], float) * BOHR_IN_ANGSTROM)


@styled
def conflict_figure(scan: ScanView, change, number: int):
    """The path offset of a conflict against the coordinate, with its interpolation."""
    series = conflict_series(scan, change)
    if series is None:
        return None
    x, g = series
    lo, hi = sorted(change.bracket)
    below = [i for i in np.argsort(-x) if x[i] <= lo]
    above = [i for i in np.argsort(x) if x[i] >= hi]
    if not below or not above:
        return None
    use = [below[0], above[0]]
    third = [i for i in below[1:2] + above[1:2]]
    if third:
        use.append(min(third, key=lambda i: min(abs(x[i] - lo), abs(x[i] - hi))))
    use = sorted(use)
    model = inverse_interpolant(x[use], g[use])
    g_curve = np.linspace(float(g[use].min()), float(g[use].max()), 100)
    est = scan.estimate(change)
    q = scan.quoted(change)
    fig = new_figure(2, 2.5)
    ax_all, ax_zoom = fig.subplots(1, 2)
    for ax in (ax_all, ax_zoom):
        ax.axhline(0.0, color="black", lw=0.5)
        ax.plot(x, g, color=DATA_COLOUR, lw=0.9, marker="o", ms=3.2, zorder=3)
        ax.plot(x[use], g[use], ls="none", marker="o", ms=5.5, markerfacecolor="none",
                markeredgecolor=FIT_COLOUR, markeredgewidth=1.0, zorder=4)
        ax.plot(model(g_curve), g_curve, color=FIT_COLOUR, lw=1.2, zorder=3)
        ax.axvspan(lo, hi, **BRACKET_STYLE)
        if q is not None:
            ax.axvspan(est - q.value, est + q.value, color=FIT_COLOUR, alpha=0.18, lw=0)
        ax.axvline(est, **ESTIMATE_STYLE)
        ax.set_ylabel("path offset (Å)")
        ax.grid(alpha=0.3, lw=0.4)
    xs = x[use]
    span = float(xs.max() - xs.min()) or (hi - lo) or 1.0
    ax_zoom.set_xlim(xs.min() - 0.15 * span, xs.max() + 0.15 * span)
    gs = g[use]
    gspan = float(gs.max() - gs.min()) or 1.0
    ax_zoom.set_ylim(gs.min() - 0.15 * gspan, gs.max() + 0.15 * gspan)
    ax_zoom.xaxis.set_major_locator(MaxNLocator(4))
    ax_all.set_title("along the scan", loc="left")
    ax_zoom.set_title("zoom on the estimate", loc="left")
    orient(ax_all, scan)
    orient(ax_zoom, scan)
    fig.subplots_adjust(wspace=0.32)
    set_xlabel(ax_all, scan, fig)
    set_xlabel(ax_zoom, scan, fig)
    handles = [Line2D([], [], color=DATA_COLOUR, marker="o", ms=3, lw=0.9,
                      label="offset in each frame"),
               Line2D([], [], ls="none", marker="o", ms=5, markerfacecolor="none",
                      markeredgecolor=FIT_COLOUR, label="samples of the fit"),
               Line2D([], [], color=FIT_COLOUR, lw=1.2, label="interpolation"),
               Patch(facecolor=BRACKET_STYLE["color"], alpha=0.5, label="bracket"),
               Line2D([], [], **ESTIMATE_STYLE, label="estimate")]
    if q is not None:
        handles.append(Patch(facecolor=FIT_COLOUR, alpha=0.3, label="± uncertainty"))
    legend_below(fig, [ax_all, ax_zoom], handles, ncol=3)
    e = switch_event(change)
    before, after = scan.change_frames(change)
    old = scan.labels(e.atoms_before or e.atoms, before)
    new = scan.labels(e.atoms_after, after)
    return Figure(f"conflict_change{number}", render(fig),
                  f"Change {number} (conflict): signed offset of the bond path {old} from the "
                  f"bond CP it runs into, in the frames next to the bracket. The offset changes "
                  f"sign where the path switches to {new}; the estimate is the zero of the "
                  f"coordinate interpolated as a polynomial in the offset through the "
                  f"{len(use)} circled frames: {estimate_text(scan, change)}.",
                  f"conflict indicator of change {number}")

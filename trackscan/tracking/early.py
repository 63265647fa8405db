"""Early warnings: bond critical points that approach a fold.

On the way to a fold (METHODS.md section 2, normal form κx³/6 + ux) the bond
CP and the ring CP it will annihilate with close in as d² ∝ |s − s*|, the
vanishing curvature as λ² ∝ |s − s*|, and the ellipticity diverges as
1/ε² ∝ |s − s*|.  Each of these indicators is fitted by a straight line over
the last three frames; a frame is flagged when the line reaches zero within
``warning_horizon`` scan steps ahead.  A warning is reported whether or not
a change follows inside the scan, and says which.
"""

from __future__ import annotations

import math

import numpy as np

from trackscan.model import significant as sig
from trackscan.tracking.describe import atom_label
from trackscan.tracking.labels import track_sort_key

__all__ = ["bond_series", "early_warnings"]

_MIN_ELLIPTICITY = 0.3
_LABELS = {"nearest_ring_bohr": "bond CP and ring CP closing in",
           "min_abs_eigenvalue": "smallest curvature falling to zero",
           "ellipticity": "ellipticity rising steeply"}


def bond_series(views, tracks, ends_of):
    """Indicator series of every bond-CP track along the scan.

    Parameters
    ----------
    views : list of FrameView
    tracks : list of dict
        Per frame, CP id -> track.
    ends_of : callable
        ``ends_of(k, cp)`` -> path ends (labels) of bond CP `cp` in frame k.

    Returns
    -------
    list of dict
        One per bond track: ``track``, ``atoms`` (ends where first seen),
        and lists over the frames where it exists: ``frames``, ``value``,
        ``rho``, ``laplacian``, ``ellipticity``, ``min_abs_eigenvalue``,
        ``nearest_ring_bohr`` (None when the frame has no ring CP).
    """
    series = {}
    for k, v in enumerate(views):
        rings = np.array([cp.position for cp in v.of_kind("ring")]).reshape(-1, 3)
        for cp in v.of_kind("bond"):
            t = tracks[k][cp.id]
            s = series.setdefault(t, {"track": t, "atoms": list(ends_of(k, cp)), "frames": [],
                                      "value": [], "rho": [], "laplacian": [],
                                      "ellipticity": [], "min_abs_eigenvalue": [],
                                      "nearest_ring_bohr": []})
            s["frames"].append(k)
            s["value"].append(v.value)
            s["rho"].append(sig(cp.rho))
            s["laplacian"].append(sig(cp.laplacian))
            s["ellipticity"].append(sig(cp.ellipticity))
            s["min_abs_eigenvalue"].append(sig(cp.min_abs_eigenvalue))
            s["nearest_ring_bohr"].append(
                sig(np.linalg.norm(rings - cp.position, axis=1).min()) if len(rings) else None)
    return [series[t] for t in sorted(series, key=track_sort_key)]


def _indicator(s, name, j):
    """Quantity that goes linearly to zero at a fold, at series position j."""
    x = s[name][j]
    if x is None or not math.isfinite(x):
        return None
    if name == "ellipticity":
        return 1.0 / (x * x) if x >= _MIN_ELLIPTICITY else None
    return x * x


def _flag(s, name, j, horizon, sign):
    ys = [_indicator(s, name, i) for i in (j - 2, j - 1, j)]
    if any(y is None for y in ys):
        return None
    if not (ys[0] > ys[1] > ys[2] > 0):
        return None
    xs = np.array([s["value"][i] for i in (j - 2, j - 1, j)])
    slope, icpt = np.polyfit(xs, np.array(ys), 1)
    if slope == 0:
        return None
    root = -icpt / slope
    step = abs(xs[2] - xs[1])
    ahead = sign * (root - xs[2])
    if 0 < ahead <= horizon * step:
        return float(root)
    return None


def early_warnings(series, changes, *, horizon, sign, unit="", elements=(), labels=None):
    """Warnings for bond tracks whose indicators head for a fold.

    Parameters
    ----------
    series : list of dict
        From :func:`bond_series`.
    changes : list of dict
        Changes of the scan (to say whether one followed).
    horizon : float
        Scan steps ahead within which an extrapolated zero is flagged.
    sign : {+1, -1}
        +1 when the scan runs to increasing values.
    unit : str
        Unit of the scan coordinate, for messages.
    elements : sequence of str
        Element symbols of the atoms, for messages (``C1``).
    labels : sequence of str, optional
        Stable frame labels in scan order, for messages (default: the
        scan-order positions).

    Returns
    -------
    list of dict
        ``track``, ``atoms``, ``frames`` (flagged), ``indicators``,
        ``projected`` (indicator -> extrapolated coordinate of the zero, from
        the last flagged frame), ``change_between`` (the change involving the
        track at or after the first flagged frame, or None) and ``message``.
    """
    def frame_name(k):
        return str(k) if labels is None else labels[k]

    out = []
    for s in series:
        flagged, kinds, projected = [], set(), {}
        for j in range(2, len(s["frames"])):
            if s["frames"][j] - s["frames"][j - 2] != 2:
                continue
            for name in _LABELS:
                root = _flag(s, name, j, horizon, sign)
                if root is not None:
                    if s["frames"][j] not in flagged:
                        flagged.append(s["frames"][j])
                    kinds.add(name)
                    projected[name] = sig(root)
        if not flagged:
            continue
        follow = None
        for ch in changes:
            if ch["between"][0] < flagged[0]:
                continue
            if any(ev.get("track") == s["track"] for ev in ch["events"]):
                follow = ch["between"]
                break
        names = " and ".join(_LABELS[n] for n in sorted(kinds))
        where = f"bond path {'–'.join(atom_label(a, elements) for a in s['atoms'])} ({s['track']})"
        unit_s = f" {unit}" if unit else ""
        proj = ", ".join(f"{projected[n]:.4g}{unit_s}" for n in sorted(projected))
        if follow is not None:
            msg = (f"{where}: {names} from frame {frame_name(flagged[0])}; the change between "
                   f"frames {frame_name(follow[0])} and {frame_name(follow[1])} followed")
        else:
            msg = (f"{where}: {names} from frame {frame_name(flagged[0])} (projected to vanish "
                   f"near {proj}); no structural change involving it occurs inside the scan")
        out.append({"track": s["track"], "atoms": s["atoms"], "frames": flagged,
                    "indicators": sorted(kinds), "projected": projected,
                    "change_between": follow, "message": msg})
    return out

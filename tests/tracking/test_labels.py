"""Track labels cannot be read as element symbols (issue 14)."""

import importlib.util
import re
from pathlib import Path

from trackscan.tracking.labels import nuclear_track_label, track_label, track_sort_key
from trackscan.tracking.track import track_scan

_spec = importlib.util.spec_from_file_location("tracking_synthetic",
                                               Path(__file__).with_name("synthetic.py"))
S = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(S)

# Element symbols H-Og (IUPAC periodic table).
ELEMENTS = set("""H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu
Zn Ga Ge As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm
Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np
Pu Am Cm Bk Cf Es Fm Md No Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og""".split())


def _reads_as_atom(label: str) -> bool:
    m = re.match(r"^([A-Za-z]+)-?(\d+)$", label)
    return m is not None and m.group(1).capitalize() in ELEMENTS and m.group(1)[0].isupper()


def test_no_label_reads_as_element_and_number():
    labels = [track_label(k, n) for k in ("bond", "ring", "cage", "non_nuclear", "degenerate")
              for n in (1, 2, 17)] + [nuclear_track_label(a) for a in (1, 6, 60)]
    assert not [x for x in labels if _reads_as_atom(x)]
    # the old scheme did: B1 is boron 1, C1 carbon 1, N1 nitrogen 1
    assert all(_reads_as_atom(x) for x in ("B1", "C1", "N1"))


def test_sort_key_orders_by_kind_then_number():
    labels = ["ring-2", "bond-10", "nucleus-3", "bond-2", "cage-1", "ring-1", "nucleus-12"]
    assert sorted(labels, key=track_sort_key) == [
        "nucleus-3", "nucleus-12", "bond-2", "bond-10", "ring-1", "ring-2", "cage-1"]
    assert sorted(["B1", "bond-1"], key=track_sort_key) == ["bond-1", "B1"]


def test_tracked_scan_uses_the_scheme():
    r = track_scan(S.ring_opening_scan())
    tracks = {cp.track for f in r.frames for cp in f.critical_points}
    assert {"nucleus-1", "bond-1", "ring-1"} <= tracks
    assert tracks and all(re.match(r"^(nucleus|bond|ring|cage|nna|degenerate)-\d+$", t)
                          for t in tracks)


def _probe(frame, value, round_number):
    return {**frame, "value": value,
            "refine": {"round": round_number, "method": "bisection", "bracket": [2.0, 3.0]}}


def test_frame_names_survive_refinement():
    """Listed frames keep their number; refined frames are r1, r2 in computed order."""
    base = S.ring_opening_scan()          # six listed frames at 0..5, change between 2 and 3
    first = track_scan(base)
    assert [f.label for f in first.frames] == ["1", "2", "3", "4", "5", "6"]
    (ch,) = first.changes
    assert ch.between_labels == ("3", "4")
    # refinement round 1 adds a frame at 2.5; round 2 one at 2.75 and one at 2.25
    extra = [_probe(base[2], 2.5, 1), _probe(base[3], 2.75, 2), _probe(base[2], 2.25, 2)]
    second = track_scan(base + extra)
    names = {f.value: f.label for f in second.frames}
    assert names == {0.0: "1", 1.0: "2", 2.0: "3", 2.25: "r2", 2.5: "r1", 2.75: "r3",
                     3.0: "4", 4.0: "5", 5.0: "6"}
    (ch,) = second.changes
    assert ch.between_labels == ("r1", "r3") and ch.between == (4, 5)
    # positions in scan order shifted; the names of the listed frames did not
    assert [f.index for f in second.frames if f.label == "4"] == [6]

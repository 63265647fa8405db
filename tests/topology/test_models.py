"""Frame topology on analytic model densities: known values, symmetry, identities."""

from __future__ import annotations

import json
import logging

import numpy as np
import pytest

from trackscan.fields import SphericalSum
from trackscan.grid import DensityGrid
from trackscan.promolecule import Promolecule, promolecule_grid
from trackscan.settings import AnalysisSettings
from trackscan.topology import (analyze_frame, classify, same_structure, same_structure_type)


@pytest.fixture
def warnings_log(caplog, monkeypatch):
    """caplog that sees trackscan warnings even after the CLI configured logging."""
    root = logging.getLogger("trackscan")
    monkeypatch.setattr(root, "propagate", True)
    monkeypatch.setattr(root, "handlers", [])
    caplog.set_level(logging.WARNING, logger="trackscan")
    return caplog


def _sampled(field, origin, axes, shape, numbers, positions, periodic=False):
    idx = np.stack(np.meshgrid(*[np.arange(n) for n in shape], indexing="ij"), -1).reshape(-1, 3)
    values = field.evaluate(np.asarray(origin) + idx @ np.asarray(axes), 0)[0].reshape(shape)
    return DensityGrid(values, origin, axes, numbers, [float(z) for z in numbers], positions,
                       periodic=periodic)


@pytest.mark.parametrize("exact", [True, False])
def test_h2_promolecule_bond_point_matches_published_check_values(exact):
    # METHODS.md section 5 (computed with the Clementi-Raimondi atoms): H2 at
    # R = 1.4 bohr has rho = 0.15699 and lap = -0.26912 at the midpoint.
    pos = np.array([[0.0, 0.0, -0.7], [0.0, 0.0, 0.7]]) + [0.013, -0.021, 0.008]
    grid = promolecule_grid([1, 1], pos, spacing=0.1, margin=3.0)
    topo = analyze_frame(grid, field=Promolecule([1, 1], pos) if exact else None)
    (b,) = topo.by_kind("bond")
    assert np.allclose(b.position, pos.mean(axis=0), atol=1e-6 if exact else 1e-3)
    assert b.rho == pytest.approx(0.15699, abs=1e-5)
    assert b.laplacian == pytest.approx(-0.26912, rel=1e-4 if exact else 5e-3)
    assert abs(b.ellipticity) < (1e-8 if exact else 5e-3)     # cylindrical symmetry
    assert b.atoms == [1, 2]
    (bp,) = topo.bond_paths
    assert bp.complete and bp.length == pytest.approx(1.4, abs=1e-3)
    assert topo.poincare_hopf == {"value": 1, "expected": 1, "holds": True}


def test_n2_promolecule_curvatures():
    # METHODS.md section 5: N2 at R = 2.0744 bohr, midpoint rho = 0.55520,
    # lambda_perp = -1.02709 (twice), lambda_par = +1.06122.
    pos = np.array([[0.0, 0.0, -1.0372], [0.0, 0.0, 1.0372]])
    grid = promolecule_grid([7, 7], pos, spacing=0.2, margin=3.0)
    topo = analyze_frame(grid, field=Promolecule([7, 7], pos))
    (b,) = topo.by_kind("bond")
    assert b.rho == pytest.approx(0.55520, abs=1e-5)
    assert np.allclose(b.eigenvalues, [-1.02709, -1.02709, 1.06122], atol=1e-5)
    assert abs(abs(b.eigenvectors[2][2]) - 1.0) < 1e-8       # lambda_3 along the bond


def test_periodic_lattice_satisfies_poincare_hopf_for_a_torus():
    # rho = 4 + cos x + cos y + cos z on one cell: 1 maximum, 3 bond, 3 ring
    # points and 1 cage point; n - b + r - c = 0 for a periodic cell
    # (Pendas, Costales & Luana, Phys. Rev. B 55, 4275 (1997) [from memory]).
    L = 6.0
    n = 30

    class Lattice:
        def evaluate(self, p, order=2):
            k = 2 * np.pi / L
            v = 4 + np.cos(k * p).sum(axis=1)
            g = -k * np.sin(k * p)
            h = np.zeros((len(p), 3, 3))
            for a in range(3):
                h[:, a, a] = -k * k * np.cos(k * p[:, a])
            return (v, g, h)[: order + 1]

    grid = _sampled(Lattice(), np.zeros(3) + 0.037, np.eye(3) * L / n, (n, n, n), [],
                    np.zeros((0, 3)), periodic=True)
    topo = analyze_frame(grid)
    c = topo.counts
    assert (c["non_nuclear"], c["bond"], c["ring"], c["cage"]) == (1, 3, 3, 1)
    assert topo.poincare_hopf == {"value": 0, "expected": 0, "holds": True}
    (cage,) = topo.by_kind("cage")
    assert np.allclose(np.mod(cage.position, L), [L / 2] * 3, atol=1e-3)


def test_tetrahedral_cluster_has_a_cage_bounded_by_four_rings():
    # four spherical atoms at the corners of a tetrahedron: 6 bond, 4 ring and
    # 1 cage CP (4 - 6 + 4 - 1 = 1); each ring CP's downhill path ends in the cage
    s = 1.3
    pos = s * np.array([[1.0, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]])
    model = Promolecule([1, 1, 1, 1], pos)
    grid = promolecule_grid([1, 1, 1, 1], pos, spacing=0.2, margin=3.0)
    topo = analyze_frame(grid, field=model)
    c = topo.counts
    assert (c["bond"], c["ring"], c["cage"]) == (6, 4, 1)
    (cage,) = topo.by_kind("cage")
    assert np.allclose(cage.position, 0.0, atol=1e-6)
    assert cage.rings == ["r1", "r2", "r3", "r4"]
    for ring in topo.by_kind("ring"):
        assert len(ring.atoms) == 3
    assert topo.poincare_hopf["holds"]


def test_benzene_ring_atoms_in_cyclic_order():
    # benzene: 12 - 12 + 1 = 1 (METHODS.md section 4); the ring CP lists the
    # six C atoms in the order they sit around the ring, whatever their numbers
    rc, rh = 2.640, 4.688                       # 1.397 and 2.481 A from the centre
    order = [0, 3, 1, 4, 2, 5]                   # atom k sits at angle 60 * order[k] deg
    pos = [[rc * np.cos(np.pi * k / 3), rc * np.sin(np.pi * k / 3), 0.0] for k in order]
    pos += [[rh * np.cos(np.pi * k / 3), rh * np.sin(np.pi * k / 3), 0.0] for k in range(6)]
    pos = np.array(pos) + [0.01, 0.02, 0.03]
    nums = [6] * 6 + [1] * 6
    topo = analyze_frame(promolecule_grid(nums, pos, spacing=0.2, margin=2.5),
                         field=Promolecule(nums, pos))
    assert topo.counts["bond"] == 12 and topo.counts["ring"] == 1
    (ring,) = topo.by_kind("ring")
    assert ring.atoms == [1, 3, 5, 2, 4, 6]     # angles 0, 60, 120, 180, 240, 300
    assert np.allclose(ring.position, pos[:6].mean(axis=0), atol=1e-6)


def test_non_nuclear_attractor_gets_its_own_node():
    # two atoms and a density maximum between them that belongs to no nucleus
    centres = [[0.0, 0.0, -2.0], [0.0, 0.0, 0.1], [0.0, 0.0, 2.0]]
    model = SphericalSum(centres, [1.0, 0.6, 1.0], [2.0, 2.0, 2.0])
    pos = np.array([centres[0], centres[2]])
    grid = _sampled(model, [-3.0, -3.0, -4.5], np.eye(3) * 0.15, (41, 41, 61), [3, 3], pos)
    topo = analyze_frame(grid, field=model)
    (a,) = topo.by_kind("non_nuclear")
    assert a.id == "a1" and np.allclose(a.position[:2], 0.0, atol=1e-6)
    assert sorted(str(x) for bp in topo.bond_paths for x in bp.atoms) == ["1", "2", "a1", "a1"]
    assert topo.graph.nodes["a1"]["element"] == "NNA"
    assert topo.poincare_hopf["holds"]     # 2 + 1 - 2 = 1


def test_open_bond_path_is_reported_not_dropped(warnings_log):
    # the grid cuts off the second maximum: the bond CP is inside, but one of
    # its paths leaves the box without meeting an attractor
    model = SphericalSum([[0.0, 0.0, -1.5], [0.0, 0.0, 1.5]], [1.0, 1.0], [0.8, 0.8])
    grid = _sampled(model, [-3.0, -3.0, -4.0], np.eye(3) * 0.15, (41, 41, 35), [1, 1],
                    np.array([[0.0, 0.0, -1.5], [0.0, 0.0, 9.0]]))
    topo = analyze_frame(grid, field=model)
    (b,) = topo.by_kind("bond")
    (bp,) = topo.bond_paths
    assert not bp.complete and bp.atoms == [1, None] and b.atoms == [1, None]
    frame = topo.to_dict()
    assert frame["bond_paths"][0]["complete"] is False
    assert any("do not reach an attractor" in w for w in frame["warnings"])
    assert any("do not reach an attractor" in r.message for r in warnings_log.records)


def test_failed_poincare_hopf_flags_the_frame_incomplete(warnings_log):
    # a density floor above the ring CP and the C-H bond CPs of a
    # promolecular cyclopropane drops them: n - b + r - c = 9 - 3 = 6, which
    # no denser seeding can repair
    r, rch = 1.65, 2.05
    pos = [[r * np.cos(t), r * np.sin(t), 0.0] for t in np.arange(3) * 2 * np.pi / 3]
    for p in list(pos):
        u = np.array(p) / r
        pos += [list(np.array(p) + rch * (0.5 * u + s * 0.866 * np.array([0, 0, 1])))
                for s in (1, -1)]
    pos = np.array(pos)
    nums = [6, 6, 6, 1, 1, 1, 1, 1, 1]
    grid = promolecule_grid(nums, pos, spacing=0.25, margin=2.5)
    settings = AnalysisSettings(density_floor=0.195, seed_retries=1)
    topo = analyze_frame(grid, settings, field=Promolecule(nums, pos))
    assert topo.counts["ring"] == 0
    assert not topo.complete and topo.seeding_level == 1
    assert topo.poincare_hopf["holds"] is False
    assert topo.to_dict()["complete"] is False
    assert any("Poincare-Hopf fails" in r.message for r in warnings_log.records)


def test_degenerate_points_are_never_forced_into_a_class():
    rank, sig, kind = classify([[-1.0, -1e-7, 0.5], [-1.0, -0.5, 0.5], [-2, 1, 3]], 1e-5)
    assert kind == ["degenerate", "bond", "ring"]
    assert list(rank) == [2, 3, 3]


def _water(order):
    atoms = {"O": (8, [0.0, 0.0, 0.0]), "H1": (1, [1.43, 0.0, 1.11]), "H2": (1, [-1.43, 0.0, 1.11])}
    nums = [atoms[k][0] for k in order]
    pos = np.array([atoms[k][1] for k in order])
    grid = promolecule_grid(nums, pos, spacing=0.25, margin=2.5)
    return analyze_frame(grid, field=Promolecule(nums, pos))


def test_structure_comparisons():
    a = _water(["O", "H1", "H2"])
    b = _water(["H1", "O", "H2"])
    assert same_structure(a.graph, a.graph)
    assert not same_structure(a.graph, b.graph)        # bonds 1-2, 1-3 against 1-2, 2-3
    assert same_structure_type(a.graph, b.graph)        # both H-O-H
    h2 = promolecule_grid([1, 1], [[0, 0, 0], [0, 0, 1.4]], spacing=0.25, margin=2.5)
    h2 = analyze_frame(h2, field=Promolecule([1, 1], [[0, 0, 0], [0, 0, 1.4]]))
    assert not same_structure_type(a.graph, h2.graph)
    edge = a.graph.get_edge_data(1, 2)
    (data,) = edge.values()
    assert data["cp"] == "b1" and data["rho"] > 0.2


def test_json_is_deterministic_and_follows_the_contract():
    pos = np.array([[0.0, 0.0, 0.0], [1.43, 0.0, 1.11], [-1.43, 0.0, 1.11]])
    grid = promolecule_grid([8, 1, 1], pos, spacing=0.2, margin=2.5)
    one = json.dumps(analyze_frame(grid).to_dict(index=3, value=1.5))
    two = json.dumps(analyze_frame(grid).to_dict(index=3, value=1.5))
    assert one == two
    frame = json.loads(one)
    assert frame["index"] == 3 and frame["value"] == 1.5
    assert frame["counts"] == {"nuclear": 3, "non_nuclear": 0, "bond": 2, "ring": 0, "cage": 0}
    assert [cp["id"] for cp in frame["critical_points"]] == ["n1", "n2", "n3", "b1", "b2"]
    b1 = frame["critical_points"][3]
    for key in ("kind", "rank", "signature", "position_bohr", "rho", "laplacian", "eigenvalues",
                "eigenvectors", "ellipticity", "atoms", "energy_densities"):
        assert key in b1
    assert b1["atoms"] == [1, 2] and b1["signature"] == -1
    assert b1["energy_densities"]["approximate"] == "Abramov (1997) + local virial theorem"
    bp = frame["bond_paths"][0]
    assert bp["cp"] == "b1" and bp["complete"] and len(bp["points_bohr"]) > 5
    assert bp["length_bohr"] >= bp["internuclear_bohr"] - 1e-6
    assert frame["atoms"][0] == {"number": 1, "element": "O", "Z": 8,
                                 "position_bohr": [0.0, 0.0, 0.0]}
    assert set(frame["grid"]) >= {"shape", "origin_bohr", "axes_bohr", "spacing_bohr", "periodic"}


@pytest.mark.parametrize("use_grid", [False, True])
def test_search_is_complete_on_random_gaussian_clusters(use_grid):
    # Poincare-Hopf (n - b + r - c = 1) as the completeness check on clusters
    # of six random Gaussian maxima; no atoms, so every maximum is a
    # non-nuclear attractor.  Fixed seed.
    rng = np.random.default_rng(7)
    settings = AnalysisSettings(density_floor=1e-6)
    for _ in range(6):
        model = SphericalSum(rng.uniform(-2.5, 2.5, size=(6, 3)), rng.uniform(0.5, 1.0, 6),
                             rng.uniform(0.6, 1.2, 6))
        grid = _sampled(model, [-7.5] * 3, np.eye(3) * 0.25, (61, 61, 61), [], np.zeros((0, 3)))
        topo = analyze_frame(grid, settings, field=None if use_grid else model)
        assert topo.poincare_hopf["holds"], topo.counts
        assert topo.counts["non_nuclear"] >= 2


def test_skewed_grid_gives_the_same_critical_points():
    # a non-orthogonal cube of a promolecular water against the exact model
    nums = [8, 1, 1]
    pos = np.array([[0.0, 0.0, 0.0], [1.43, 0.0, 1.11], [-1.43, 0.0, 1.11]])
    model = Promolecule(nums, pos)
    axes = 0.15 * np.array([[1.0, 0.0, 0.0], [0.25, 0.97, 0.0], [0.1, -0.2, 0.97]])
    grid = _sampled(model, [-4.0, -3.0, -3.5], axes, (60, 50, 55), nums, pos)
    ours = analyze_frame(grid)
    exact = analyze_frame(grid, field=model)
    assert ours.counts == exact.counts
    for a, b in zip(ours.by_kind("bond"), exact.by_kind("bond")):
        assert a.atoms == b.atoms
        assert np.linalg.norm(a.position - b.position) < 2e-3
        assert a.laplacian == pytest.approx(b.laplacian, rel=0.02)


def test_degenerate_point_makes_the_frame_incomplete_without_retries(warnings_log):
    # with a huge degenerate_tol the two curvatures (-0.449) across H2's bond CP count as
    # zero: the CP is degenerate, not forced to be a bond CP
    pos = np.array([[0.0, 0.0, -0.7], [0.0, 0.0, 0.7]])
    grid = promolecule_grid([1, 1], pos, spacing=0.2, margin=2.5)
    topo = analyze_frame(grid, AnalysisSettings(degenerate_tol=0.5), field=Promolecule([1, 1], pos))
    assert topo.counts["degenerate"] == 1 and topo.counts["bond"] == 0
    (d,) = topo.by_kind("degenerate")
    assert d.id == "d1" and d.rank < 3
    assert not topo.complete and topo.seeding_level == 0
    assert any("degenerate" in r.message for r in warnings_log.records)

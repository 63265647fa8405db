"""The grid field against outside references: SciPy's own spline evaluation,
exact analytic fields, and the promolecule it subtracts."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage

from trackscan.field import Field
from trackscan.fields import GridField, LocalizedPromolecule, SphericalSum, TricubicBSpline
from trackscan.grid import DensityGrid
from trackscan.promolecule import Promolecule


def _grid_of(field, origin, axes, shape, numbers=(), positions=np.zeros((0, 3)), periodic=False):
    idx = np.stack(np.meshgrid(*[np.arange(n) for n in shape], indexing="ij"), -1).reshape(-1, 3)
    values = field.evaluate(np.asarray(origin) + idx @ np.asarray(axes), 0)[0].reshape(shape)
    return DensityGrid(values, origin, axes, list(numbers), list(numbers), positions,
                       periodic=periodic)


@pytest.mark.parametrize("degree", [3, 5])
@pytest.mark.parametrize("periodic", [False, True])
def test_spline_values_match_scipy_map_coordinates(degree, periodic):
    rng = np.random.default_rng(1)
    data = rng.random((9, 10, 11))
    spline = TricubicBSpline(data, periodic=periodic, degree=degree)
    u = rng.random((200, 3)) * (np.array(data.shape) - 1)
    mode = "grid-wrap" if periodic else "mirror"
    ref = ndimage.map_coordinates(data, u.T, order=degree, mode=mode)
    assert np.allclose(spline.evaluate(u, 0)[0], ref, atol=1e-12)
    # interpolation: the spline passes through the samples
    nodes = np.array([[0, 0, 0], [8, 9, 10], [4, 5, 6]])
    assert np.allclose(spline.evaluate(nodes.astype(float), 0)[0], data[tuple(nodes.T)])


def test_spline_derivatives_are_those_of_the_interpolant():
    # derivatives against central differences of the values (a smooth function)
    rng = np.random.default_rng(2)
    spline = TricubicBSpline(rng.random((8, 8, 8)))
    u = 1 + rng.random((100, 3)) * 5
    v, g, h = spline.evaluate(u, 2)
    e = 1e-5
    for a in range(3):
        d = np.zeros(3)
        d[a] = e
        vp, gp = spline.evaluate(u + d, 1)
        vm, gm = spline.evaluate(u - d, 1)
        assert np.allclose((vp - vm) / (2 * e), g[:, a], atol=1e-8)
        assert np.allclose((gp - gm) / (2 * e), h[:, :, a], atol=1e-7)
    assert np.allclose(h, h.transpose(0, 2, 1))


def test_grid_field_on_skewed_grid_converges_to_analytic_gaussians():
    # non-orthogonal axes: the chain rule must carry derivatives to Cartesians
    model = SphericalSum([[0.0, 0.0, 0.0], [1.2, 0.3, -0.2]], [1.0, 0.6], [1.1, 0.8])
    rng = np.random.default_rng(3)
    errors = []
    for h in (0.2, 0.1):
        axes = h * np.array([[1.0, 0.0, 0.0], [0.3, 1.0, 0.0], [0.1, 0.2, 1.0]])
        shape = tuple(int(round(9.0 / h)) for _ in range(3))
        origin = np.array([-4.0, -4.0, -4.0])
        grid = _grid_of(model, origin, axes, shape)
        field = GridField(grid, subtract_promolecule=False)
        assert isinstance(field, Field)
        u = 15 + rng.random((300, 3)) * (np.array(shape) - 30)
        pts = origin + u @ axes
        ours, exact = field.evaluate(pts), model.evaluate(pts)
        errors.append([np.abs(a - b).max() / np.abs(b).max() for a, b in zip(ours, exact)])
    (v2, g2, h2), (v1, g1, h1) = errors
    assert v1 < 1e-5 and g1 < 2e-4 and h1 < 5e-3
    # cubic B-spline: value error O(h^4), Hessian error O(h^2)
    assert v2 / v1 > 8 and h2 / h1 > 3


def test_periodic_grid_field_wraps():
    box = np.array([4.0, 5.0, 6.0])
    n = (20, 25, 30)

    class Cosines:
        def evaluate(self, p, order=0):
            k = 2 * np.pi / box
            return (2 + np.cos(k[0] * p[:, 0]) + np.sin(k[1] * p[:, 1]) * np.cos(k[2] * p[:, 2]),)

    grid = _grid_of(Cosines(), np.zeros(3), np.diag(box / n), n, periodic=True)
    field = GridField(grid)
    pts = np.random.default_rng(4).random((50, 3)) * 30 - 10   # far outside the cell
    assert np.allclose(field.value(pts), Cosines().evaluate(pts)[0], atol=2e-3)
    assert np.allclose(field.value(pts), field.value(pts + box * [1, -2, 3]), atol=1e-12)


def test_localized_promolecule_is_the_promolecule_near_nuclei_and_zero_far():
    numbers, pos = [6, 1], np.array([[0.0, 0.0, 0.0], [2.0, 0.0, 0.0]])
    model = LocalizedPromolecule(numbers, pos)
    rng = np.random.default_rng(5)
    # inside r_in of the C atom but beyond the H atom's r_in, only the C atom differs
    near = rng.normal(size=(50, 3)) * 0.3
    c_alone = Promolecule([6], pos[:1])
    h_part = LocalizedPromolecule([1], pos[1:])
    assert np.allclose(model.value(near), c_alone.value(near) + h_part.value(near))
    far = np.array([[10.0, 0, 0], [0, -7.0, 0]])
    assert np.all(model.value(far) == 0.0)
    # exact derivatives (finite differences of the analytic model)
    pts = rng.normal(size=(100, 3)) * 1.8 + [1.0, 0, 0]
    v, g, h = model.evaluate(pts)
    e = 1e-5
    for a in range(3):
        d = np.zeros(3)
        d[a] = e
        vp, gp = model.evaluate(pts + d, 1)
        vm, gm = model.evaluate(pts - d, 1)
        assert np.allclose((vp - vm) / (2 * e), g[:, a], atol=1e-6 * np.abs(g).max())
        assert np.allclose((gp - gm) / (2 * e), h[:, :, a], atol=1e-6 * np.abs(h).max())
    # its fast grid sampler agrees with the point evaluation
    origin, axes, shape = np.array([-3.0, -3, -3]), np.eye(3) * 0.1, (70, 60, 60)
    on = model.on_grid(origin, axes, shape)
    idx = rng.integers(0, 60, size=(500, 3))
    assert np.allclose(on[tuple(idx.T)], model.value(origin + idx @ axes), atol=1e-7)


def test_promolecule_subtraction_reproduces_a_promolecular_density():
    # the field of a grid of the promolecule itself: values and derivatives
    # are nearly exact even at 0.2 bohr, where a plain spline is far off
    numbers = [8, 1, 1]
    pos = np.array([[0.0, 0.0, 0.0], [1.43, 0.0, 1.11], [-1.43, 0.0, 1.11]])
    pro = Promolecule(numbers, pos)
    origin, axes = np.array([-4.0, -4.0, -4.0]), np.eye(3) * 0.2
    grid = _grid_of(pro, origin, axes, (41, 41, 41), numbers, pos)
    pts = np.array([[0.7, 0.1, 0.6], [0.0, 0.3, -0.8], [-1.0, 0.0, 0.5]])
    exact = pro.evaluate(pts)
    sub = GridField(grid).evaluate(pts)
    plain = GridField(grid, subtract_promolecule=False).evaluate(pts)
    err_sub = np.abs(sub[2] - exact[2]).max()
    err_plain = np.abs(plain[2] - exact[2]).max()
    assert err_sub < 0.02 * np.abs(exact[2]).max()
    assert err_sub < 0.1 * err_plain


def test_analytic_sums_have_exact_derivatives():
    for kind in ("gaussian", "slater"):
        f = SphericalSum([[0, 0, 0], [1.5, 0.5, 0]], [1.0, 0.5], [0.9, 1.7], kind=kind)
        pts = np.random.default_rng(6).normal(size=(60, 3)) + 0.3
        v, g, h = f.evaluate(pts)
        e = 1e-6
        for a in range(3):
            d = np.zeros(3)
            d[a] = e
            assert np.allclose((f.value(pts + d) - f.value(pts - d)) / (2 * e), g[:, a], atol=1e-7)
            assert np.allclose((f.gradient(pts + d) - f.gradient(pts - d)) / (2 * e), h[:, :, a],
                               atol=1e-6)
    with pytest.raises(ValueError):
        SphericalSum([[0, 0, 0]], [1], [1], kind="lorentzian")

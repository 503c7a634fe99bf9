"""Probes and lines: exact for linear fields on every cell type, and against pyvista's probing."""

import numpy as np
import pytest

from phasegauge.analysis.probes import line_points, point_sampler, sample_points
from phasegauge.errors import OptionError
from phasegauge.meshgen import delaunay_mesh, grid_mesh, to_meshio
from phasegauge.model.simplices import split_cells

KINDS = [((5, 4), "quad"), ((5, 4), "triangle"), ((5, 4), "mixed"), ((5, 4), "polygon"),
         ((3, 3, 2), "hexahedron"), ((3, 3, 2), "tetra"), ((3, 3, 2), "wedge"), ((3, 3, 2), "pyramid"),
         ((3, 3, 2), "mixed")]


def _linear(P):
    return 1.0 + 2.0 * P[:, 0] - 3.0 * P[:, 1] + 0.5 * P[:, 2]


@pytest.mark.parametrize("jitter", [0.0, 0.3])
@pytest.mark.parametrize("shape,kind", KINDS)
def test_linear_field_exact_on_every_cell_type(shape, kind, jitter):
    # analytic: the piecewise-linear interpolant of a linear field is the field itself
    mesh = grid_mesh(shape, kind=kind, jitter=jitter, seed=3)
    rng = np.random.default_rng(4)
    P = rng.uniform(0, 1, (300, 3))
    if len(shape) == 2:
        P[:, 2] = 0.0
    P = np.vstack([P, mesh.points[::3]])  # mesh points lie on cell corners, edges and faces
    values = sample_points(mesh, _linear(mesh.points), P)
    assert np.isfinite(values).all()
    assert np.abs(values - _linear(P)).max() <= 1e-12


def test_bent_hexahedra_use_added_centres_and_stay_exact():
    mesh = grid_mesh((3, 3, 3), kind="hexahedron", jitter=0.35, seed=5)
    assert split_cells(mesh).centres  # bent faces: the coned split with added centres is exercised
    P = np.random.default_rng(6).uniform(0.05, 0.95, (500, 3))
    assert np.abs(sample_points(mesh, _linear(mesh.points), P) - _linear(P)).max() <= 1e-12


def test_points_outside_are_nan_and_location_is_cached():
    mesh = grid_mesh((4, 4), kind="triangle")
    P = np.array([[0.5, 0.5, 0.0], [1.5, 0.5, 0.0], [-1e-3, 0.2, 0.0]])
    sampler = point_sampler(mesh, P)
    assert sampler.inside.tolist() == [True, False, False]
    assert sampler.cells[1] == -1
    assert np.isnan(sampler(_linear(mesh.points))[1:]).all()
    assert point_sampler(mesh, P) is sampler  # built once per mesh and point set


def test_line_points_evenly_spaced():
    P, d = line_points((0, 0), (3, 4), 6)
    assert d[-1] == pytest.approx(5.0) and np.allclose(np.diff(d), 1.0)
    assert np.allclose(P[-1], (3, 4, 0))
    with pytest.raises(OptionError, match="at least 2"):
        line_points((0, 0), (1, 1), 1)


def _pyvista_probe(mesh, values, P):
    import pyvista

    pyvista.OFF_SCREEN = True
    grid = pyvista.from_meshio(to_meshio(mesh, point_data={"f": values}))
    probed = pyvista.PolyData(np.asarray(P, dtype=float)).sample(grid, tolerance=1e-12)
    return (np.asarray(probed["f"]), np.asarray(probed["vtkValidPointMask"], dtype=bool),
            np.asarray(grid.find_containing_cell(np.asarray(P, dtype=float))))


@pytest.mark.parametrize("dim", [2, 3])
def test_agrees_with_pyvista_sample_on_simplices(dim):
    # pyvista's sample (VTK's probe filter) interpolates linearly in triangles and tetrahedra too,
    # so on a simplex mesh the two agree to rounding on any field wherever both take the same cell
    # (VTK's locator accepts a cell the point lies slightly outside of, by its tolerance, and then
    # extrapolates from it: the few points where it names another cell than ours are left out)
    mesh = delaunay_mesh(400 if dim == 2 else 300, dim=dim, seed=7)
    X = mesh.points
    f = np.sin(3 * X[:, 0]) * np.cos(2 * X[:, 1]) + X[:, 2] ** 2
    P = np.random.default_rng(8).uniform(0.02, 0.98, (200, 3))
    if dim == 2:
        P[:, 2] = 0.0
    sampler = point_sampler(mesh, P)
    ours = sampler(f)
    theirs, valid, their_cells = _pyvista_probe(mesh, f, P)
    same = their_cells == sampler.cells
    assert valid.all() and same.mean() >= 0.95
    assert np.abs(ours - theirs)[same].max() <= 1e-10


def test_close_to_pyvista_sample_on_hexahedra():
    # on hexahedra VTK interpolates trilinearly, we linearly on the split: both are second-order,
    # so the difference on a smooth field is O(h^2 |f''|): h = 1/8, |f''| <= 9 gives well under 0.05
    mesh = grid_mesh((8, 8, 8), kind="hexahedron")
    X = mesh.points
    f = np.sin(3 * X[:, 0]) * np.cos(2 * X[:, 1]) + X[:, 2] ** 2
    P = np.random.default_rng(9).uniform(0.02, 0.98, (300, 3))
    ours = sample_points(mesh, f, P)
    theirs, valid, _ = _pyvista_probe(mesh, f, P)
    exact = np.sin(3 * P[:, 0]) * np.cos(2 * P[:, 1]) + P[:, 2] ** 2
    assert valid.all()
    assert np.abs(ours - theirs).max() < 0.05
    assert np.abs(ours - exact).max() < 0.05 and np.abs(theirs - exact).max() < 0.05

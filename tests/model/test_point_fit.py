"""The point values rebuilt from cell values: the mesh's precomputed fit against numpy's least squares."""

import numpy as np
import pytest

from phasegauge.meshgen import delaunay_mesh, grid_mesh
from phasegauge.model._conversions import _fit_some_good, linear_point_values


def _lstsq_point_values(mesh, values):
    # numpy.linalg.lstsq per point: the weighted linear fit through the centroids of the cells around
    # the point (weights 1 / distance^2), evaluated at the point; then limited to those cells' range
    incidence = mesh.incidence.T.tocsr()
    out = np.full(mesh.n_points, np.nan)
    for p in range(mesh.n_points):
        cells = incidence.indices[incidence.indptr[p]:incidence.indptr[p + 1]]
        if len(cells) <= mesh.dimension + 1:
            continue
        dx = mesh.cell_centroids[cells] - mesh.coordinates[p]
        sw = 1.0 / np.sqrt(np.maximum((dx ** 2).sum(axis=1), 1e-300))
        basis = np.column_stack([np.ones(len(cells)), dx])
        normal = (basis * sw[:, None] ** 2).T @ basis
        if abs(np.linalg.det(normal)) <= 1e-10 * np.trace(normal) ** (mesh.dimension + 1):
            continue  # the tool's stated rule for an ill-posed fit (cells nearly in a plane): the mean
        coef = np.linalg.lstsq(basis * sw[:, None], values[cells] * sw, rcond=None)[0]
        out[p] = np.clip(coef[0], values[cells].min(), values[cells].max())
    return out


@pytest.mark.parametrize("mesh", [delaunay_mesh(400, seed=3), grid_mesh((5, 5, 5), kind="tetra", jitter=0.2, seed=2),
                                  grid_mesh((6, 6, 6), kind="hexahedron", jitter=0.2, seed=4)],
                         ids=["triangles", "tetrahedra", "hexahedra"])
def test_point_fit_matches_numpy_least_squares(mesh):
    rng = np.random.default_rng(0)
    values = np.sin(3 * mesh.cell_centroids[:, 0]) + 0.3 * rng.standard_normal(mesh.n_cells)
    ours = mesh.cell_to_point(values)
    reference = _lstsq_point_values(mesh, values)
    fitted = np.isfinite(reference)
    assert fitted.sum() > 0.25 * mesh.n_points
    np.testing.assert_allclose(ours[fitted], reference[fitted], rtol=1e-9, atol=1e-12)


def test_precomputed_fit_equals_the_fit_per_call():
    # every cell good: the per-pair weights give the fit the normal equations give per call (round-off)
    mesh = grid_mesh((6, 6, 6), kind="tetra", jitter=0.2, seed=7)
    rng = np.random.default_rng(1)
    flat = rng.random((mesh.n_cells, 2))
    fallback = np.zeros((mesh.n_points, 2))
    good = np.ones(mesh.n_cells, dtype=bool)
    fast = linear_point_values(mesh, flat, good, fallback)
    direct = _fit_some_good(mesh, flat, good, fallback)
    np.testing.assert_allclose(fast, direct, rtol=1e-12, atol=1e-14)


def test_bad_cells_are_left_out_of_the_fit():
    mesh = grid_mesh((6, 6, 6), kind="tetra")
    g = np.array([1.0, -2.0, 0.5])
    values = mesh.cell_centroids @ g
    values[::7] = np.nan
    points = mesh.cell_to_point(values)
    interior = np.all((mesh.coordinates > 1e-9) & (mesh.coordinates < 1 - 1e-9), axis=1)
    # a linear field is still rebuilt exactly from the good cells around each interior point (analytic)
    np.testing.assert_allclose(points[interior], (mesh.coordinates @ g)[interior], atol=1e-10)

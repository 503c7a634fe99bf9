"""The point values rebuilt from cell values: the mesh's precomputed fit against numpy's least squares."""

import numpy as np
import pytest

from phasegauge.meshgen import delaunay_mesh, grid_mesh
from phasegauge.model import _conversions
from phasegauge.model._conversions import linear_point_values


def _lstsq_point_values(mesh, values):
    # numpy.linalg.lstsq per point: the weighted linear fit through the centroids of the (finite) cells
    # around the point (weights 1 / distance^2), evaluated at the point; then limited to those cells' range
    incidence = mesh.incidence.T.tocsr()
    out = np.full(mesh.n_points, np.nan)
    for p in range(mesh.n_points):
        cells = incidence.indices[incidence.indptr[p]:incidence.indptr[p + 1]]
        cells = cells[np.isfinite(values[cells])]
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


@pytest.mark.parametrize("pairs", [1, 7, 1000])
def test_point_fit_in_chunks_matches_numpy_least_squares_and_one_pass(monkeypatch, pairs):
    # the fit is made and applied a chunk of (point, cell) pairs at a time (the first fit of 0.25M
    # tetrahedra peaked 89 MB above its start in one pass): reference numpy.linalg.lstsq per point,
    # and the one-pass values bit for bit (every sum runs over one point's pairs)
    mesh = grid_mesh((6, 6, 6), kind="tetra", jitter=0.2, seed=2)
    rng = np.random.default_rng(1)
    values = np.sin(3 * mesh.cell_centroids[:, 0]) + 0.3 * rng.standard_normal(mesh.n_cells)
    one_pass = mesh.cell_to_point(values)
    chunked = grid_mesh((6, 6, 6), kind="tetra", jitter=0.2, seed=2)
    monkeypatch.setattr(_conversions, "_FIT_PAIRS", pairs)
    ours = chunked.cell_to_point(values)
    assert np.array_equal(ours, one_pass)
    reference = _lstsq_point_values(chunked, values)
    fitted = np.isfinite(reference)
    np.testing.assert_allclose(ours[fitted], reference[fitted], rtol=1e-9, atol=1e-12)
    # the fit keeps no copy of the cell numbers: it reads the transposed incidence's own
    assert chunked.memo("point_fit", lambda: None).cols is chunked._point_cells.indices
    # its chunks on two threads: the same values bit for bit
    threaded = grid_mesh((6, 6, 6), kind="tetra", jitter=0.2, seed=2)
    assert np.array_equal(threaded.cell_to_point(values, threads=2), one_pass)


def test_fit_through_the_good_cells_matches_numpy_least_squares_and_is_kept_for_its_pattern(monkeypatch):
    # NaN cells: the fit through the good cells around each point against numpy's lstsq [lib], built
    # once while the NaN cells stay where they are and again when they move
    mesh = grid_mesh((6, 6, 6), kind="tetra", jitter=0.2, seed=7)
    rng = np.random.default_rng(1)
    built = []
    stencil = _conversions._stencil  # read once per fit built (a blank cell's second ring fits again)
    monkeypatch.setattr(_conversions, "_stencil", lambda *a, **k: built.append(1) or stencil(*a, **k))
    patterns = [rng.random(mesh.n_cells) < 0.1 for _ in range(2)]
    for bad in (patterns[0], patterns[0], patterns[1], patterns[0]):
        values = np.sin(3 * mesh.cell_centroids[:, 0]) + 0.3 * rng.standard_normal(mesh.n_cells)
        values[bad] = np.nan
        ours = mesh.cell_to_point(values)
        reference = _lstsq_point_values(mesh, values)
        fitted = np.isfinite(reference)
        assert fitted.sum() > 0.25 * mesh.n_points
        np.testing.assert_allclose(ours[fitted], reference[fitted], rtol=1e-9, atol=1e-12)
    assert len(built) == 3  # the first pattern, the second, the first again (the last one is kept)
    # several components: a cell is good where all are finite, each component fitted alike
    flat = np.stack([values, 2 * values], axis=1)
    both = linear_point_values(mesh, flat, np.isfinite(values), lambda points: np.zeros((points.size, 2)))
    np.testing.assert_allclose(both[fitted], np.stack([reference, 2 * reference], axis=1)[fitted], rtol=1e-9,
                               atol=1e-12)
    assert len(built) == 3


def test_bad_cells_are_left_out_of_the_fit():
    mesh = grid_mesh((6, 6, 6), kind="tetra")
    g = np.array([1.0, -2.0, 0.5])
    values = mesh.cell_centroids @ g
    values[::7] = np.nan
    points = mesh.cell_to_point(values)
    interior = np.all((mesh.coordinates > 1e-9) & (mesh.coordinates < 1 - 1e-9), axis=1)
    # a linear field is still rebuilt exactly from the good cells around each interior point (analytic)
    np.testing.assert_allclose(points[interior], (mesh.coordinates @ g)[interior], atol=1e-10)


@pytest.mark.parametrize("dimension", [2, 3])
def test_the_fit_is_taken_alike_in_any_length_unit(dimension):
    # the same jittered mesh in metres and in millimetres (and scaled up): a field linear in space on
    # its cells is fitted exactly at every point whose fit is well posed, and the same points are well
    # posed in every unit (the test of the normal matrix reads no length scale; it sent every point of
    # cells under 0.03 units in 3D, 0.003 in 2D, to the corners' mean). Reference: the linear field
    # itself (analytic)
    from phasegauge.model.mesh import Mesh

    base = grid_mesh((12,) * dimension, kind="hexahedron" if dimension == 3 else "quad", jitter=0.2, seed=5)
    posed_sets, errors = [], []
    for scale in (1.0, 1e-3, 1e-5, 1e3):
        mesh = Mesh(base.points * scale, [(b.cell_type, b.connectivity) for b in base.blocks])
        slope = np.arange(1, dimension + 1) / scale
        values = mesh.cell_to_point(mesh.cell_centroids[:, :dimension] @ slope, method="linear")
        exact = mesh.coordinates[:, :dimension] @ slope
        fit = _conversions.point_fit(mesh)
        posed = np.zeros(mesh.n_points, dtype=bool)
        posed[fit.points[fit.posed]] = True
        posed_sets.append(posed)
        errors.append(np.abs(values - exact)[posed].max())
    assert all(np.array_equal(posed_sets[0], p) for p in posed_sets[1:])
    assert posed_sets[0].mean() > 0.5
    assert max(errors) < 1e-9 * dimension * 12


@pytest.mark.parametrize("pairs", [7, 65536])
def test_weighted_point_means_equal_scipys_product_over_all_points_and_a_subset(monkeypatch, pairs):
    # reference: scipy's sparse product of the transposed incidence (measure-weighted corner sums),
    # bit for bit, whether made over every point, a chunk of pairs at a time, or for scattered points
    from phasegauge.model._conversions import weighted_point_means

    monkeypatch.setattr(_conversions, "_FIT_PAIRS", pairs)
    mesh = grid_mesh((6, 5, 4), kind="tetra", jitter=0.2, seed=5)
    rng = np.random.default_rng(3)
    flat = rng.standard_normal((mesh.n_cells, 2))
    flat[rng.random(mesh.n_cells) < 0.2, 1] = np.nan
    finite = np.isfinite(flat)
    at = mesh.incidence.T.tocsr()
    w = mesh.cell_measures[:, None] * finite
    expected = (at @ (np.where(finite, flat, 0.0) * w)) / (at @ w)
    assert np.array_equal(weighted_point_means(mesh, flat, finite), expected)
    points = np.flatnonzero(rng.random(mesh.n_points) < 0.3)
    assert np.array_equal(weighted_point_means(mesh, flat, finite, points), expected[points])
    # the kept pattern holds no ones (8 bytes a pair): scipy's indices and indptr only
    assert not hasattr(mesh._point_cells, "data")
    assert np.array_equal(mesh._point_cells.indices, at.indices)


@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_points_beside_a_blank_cell_keep_a_linear_field_through_the_second_ring(kind):
    # a solver's blank cell (NaN) in a linear field: the corners of a blank quad keep 3 good cells, too
    # few for the fit; the good cells one ring further rebuild the field exactly there [analytic], where the
    # mean of the three read up to a third of a cell's change off (+0.0042 on this field)
    mesh = grid_mesh((20, 20), kind=kind)
    x, y = mesh.cell_centroids.T
    values = 0.2 + 0.3 * x + 0.2 * y
    values[(np.abs(x - 0.525) < 0.02) & (np.abs(y - 0.525) < 0.02)] = np.nan
    points = mesh.cell_to_point(values)
    exact = 0.2 + 0.3 * mesh.coordinates[:, 0] + 0.2 * mesh.coordinates[:, 1]
    interior = np.all((mesh.coordinates > 1e-9) & (mesh.coordinates < 1 - 1e-9), axis=1)
    np.testing.assert_allclose(points[interior], exact[interior], atol=1e-12)

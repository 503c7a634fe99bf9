"""Resampling onto a common grid and shape comparison, against analytic geometry and libraries."""

import numpy as np
import pytest
from scipy.spatial.distance import directed_hausdorff

from phasegauge.analysis.compare import (SamplingGrid, common_grid, interface_points,
                                         resample_to_grid, shape_comparison,
                                         shape_comparison_on_grid)
from phasegauge.errors import InputError, OptionError, ResolutionWarning
from phasegauge.model.indicator import map_to_indicator
from phasegauge.meshgen import delaunay_mesh, grid_mesh, to_meshio

EPS = 0.01  # logistic profile parameter of the test fields: the profile spans about 4 cells


def disc_field(mesh, centre, radius, eps=EPS):
    """Logistic profile c = 1/2 (1 - tanh((rho - r) / (2 eps))): c = 1/2 exactly on the circle."""
    rho = np.linalg.norm(mesh.coordinates - np.asarray(centre), axis=1)
    return 0.5 * (1.0 - np.tanh((rho - radius) / (2 * eps)))


def lens_area(r, d):
    # REFERENCES.md, elementary geometry: overlap of two circles of radius r at distance d
    return 2 * r * r * np.arccos(d / (2 * r)) - 0.5 * d * np.sqrt(4 * r * r - d * d)


# ------------------------------------------------------------------ resampling

@pytest.mark.parametrize("dim,kind", [(2, "triangle"), (2, "quad"), (2, "mixed"), (2, "polygon"),
                                      (3, "tetra"), (3, "hexahedron"), (3, "wedge"), (3, "pyramid"),
                                      (3, "mixed")])
@pytest.mark.parametrize("jitter", [0.0, 0.2])
def test_resample_reproduces_linear_fields(dim, kind, jitter):
    # analytic: piecewise-linear and multilinear interpolation reproduce a linear field exactly
    mesh = grid_mesh((6,) * dim, kind=kind, jitter=jitter, seed=1)
    X = mesh.coordinates
    coef = np.array([1.0, -2.0, 0.5][:dim])
    grid = SamplingGrid([(0, 1)] * dim, (9,) * dim)
    values = resample_to_grid(mesh, 0.3 + X @ coef, grid)
    exact = 0.3 + grid.points() @ coef
    assert not np.any(np.isnan(values))
    # the split conforms also across bent faces of warped 3D cells (jitter): no gaps, every sample
    # inside a simplex, so exact to round-off on every cell type
    np.testing.assert_allclose(values.ravel(), exact, atol=1e-10)


@pytest.mark.parametrize("dim,kind", [(2, "triangle"), (2, "quad"), (3, "tetra"), (3, "hexahedron")])
def test_resample_matches_pyvista_sample(dim, kind):
    # reference library: pyvista DataSet.sample (VTK probe filter), a smooth non-linear field;
    # simplices and rectilinear cells use the same interpolant as VTK. VTK's cell locator may take
    # a neighbour cell that a sample lies just outside of (barycentric -7e-4 observed) and
    # extrapolate from it: differences up to 1.5e-4 on this field, with ours from the containing cell
    import pyvista as pv

    mesh = grid_mesh((8,) * dim, kind=kind, jitter=0.2 if kind in ("triangle", "tetra") else 0.0, seed=2)
    X = mesh.coordinates
    field = np.sin(3 * X[:, 0]) + X[:, 1] ** 2 + (X[:, 2] if dim == 3 else 0.0)
    grid = SamplingGrid([(0, 1)] * dim, (11,) * dim)
    ours = resample_to_grid(mesh, field, grid).ravel()
    P = grid.points()
    if dim == 2:
        P = np.column_stack([P, np.zeros(len(P))])
    probe = pv.PolyData(P).sample(pv.from_meshio(to_meshio(mesh, point_data={"f": field})))
    reference = np.where(probe["vtkValidPointMask"].astype(bool), probe["f"], np.nan)
    assert np.array_equal(np.isnan(ours), np.isnan(reference))
    np.testing.assert_allclose(ours, reference, atol=3e-4)


def test_resample_outside_and_nonfinite_are_nan():
    mesh = grid_mesh((4, 4), [(0, 1), (0, 1)], kind="triangle")
    c = np.ones(mesh.n_points)
    c[0] = np.nan  # corner point (0, 0)
    grid = SamplingGrid([(-0.5, 1.5), (0, 1)], (8, 4))
    v = resample_to_grid(mesh, c, grid)
    x = grid.axes[0]
    assert np.all(np.isnan(v[(x < 0) | (x > 1)]))
    assert np.isnan(v[2, 0])  # sample (0.125, 0.125) lies in a cell with the NaN corner
    assert np.all(v[(x > 0.3) & (x < 1)] == 1.0)


def test_resample_rejects_bad_arguments():
    mesh = grid_mesh((3, 3), kind="triangle")
    grid = SamplingGrid([(0, 1), (0, 1)], (4, 4))
    with pytest.raises(OptionError, match="expected 16 point values"):
        resample_to_grid(mesh, np.zeros(5), grid)
    with pytest.raises(OptionError, match="grid is 3D but the mesh is 2D"):
        resample_to_grid(mesh, np.zeros(16), SamplingGrid([(0, 1)] * 3, (2, 2, 2)))
    with pytest.raises(OptionError, match="must be a SamplingGrid"):
        resample_to_grid(mesh, np.zeros(16), (4, 4))
    with pytest.raises(OptionError, match="hi > lo"):
        SamplingGrid([(1, 0), (0, 1)], (4, 4))


def test_common_grid_default_is_finer_than_both_meshes_and_capped():
    a = grid_mesh((10, 10), [(0, 1), (0, 2)])
    b = grid_mesh((20, 20), [(0.5, 1.5), (0, 2)], kind="triangle")
    grid = common_grid(a, b)
    assert grid.bounds == ((0.5, 1.0), (0.0, 2.0))  # the region both cover
    finest = min(np.median(a.cell_sizes), np.median(b.cell_sizes))
    assert grid.spacing.max() <= 0.5 * finest + 1e-12
    with pytest.warns(ResolutionWarning, match="capped at 100 samples"):
        small = common_grid(a, b, max_samples=100)
    assert small.n_samples <= 100
    with pytest.raises(InputError, match="do not overlap"):
        common_grid(a, grid_mesh((4, 4), [(5, 6), (5, 6)]))
    with pytest.raises(InputError, match="run A is 2D and run B is 3D"):
        common_grid(a, grid_mesh((2, 2, 2)))


# ---------------------------------------------------------- analytic shapes, 2D

R, D = 0.25, 0.1


@pytest.mark.parametrize("kind_a,kind_b", [("quad", "triangle"), ("mixed", "delaunay")])
def test_offset_discs_match_the_lens_formula(kind_a, kind_b):
    mesh_a = grid_mesh((100, 100), kind=kind_a)
    mesh_b = delaunay_mesh(12000, seed=4) if kind_b == "delaunay" else grid_mesh((90, 90), kind=kind_b)
    ca = disc_field(mesh_a, (0.5 - D / 2, 0.5), R)
    cb = disc_field(mesh_b, (0.5 + D / 2, 0.5), R)
    res = shape_comparison(mesh_a, ca, mesh_b, cb)
    h = res["grid_spacing"]
    lens = lens_area(R, D)  # REFERENCES.md: lens formula (elementary geometry)
    # mismatch = 2 (pi r^2 - lens): pixel counting errs by at most ~ perimeter x h / 4 (observed far less)
    assert res["mismatch_volume"] == pytest.approx(2 * (np.pi * R * R - lens), abs=4 * np.pi * R * h / 4)
    # Dice = lens / (pi r^2)
    assert res["dice"] == pytest.approx(lens / (np.pi * R * R), abs=0.01)
    # Hausdorff of two equal circles at distance d is d (REFERENCES.md, elementary geometry)
    assert res["hausdorff"] == pytest.approx(D, abs=0.25 * h)
    assert res["hausdorff_ab"] == pytest.approx(D, abs=0.25 * h)
    assert res["hausdorff_ba"] == pytest.approx(D, abs=0.25 * h)
    assert res["hausdorff_95"] <= res["hausdorff"]
    assert 0 < res["mean_distance"] < res["hausdorff_95"]
    # each interface has the circle's length 2 pi r (marching squares chords, observed within 0.05 %)
    assert res["interface_size_a"] == pytest.approx(2 * np.pi * R, rel=2e-3)
    assert res["interface_size_b"] == pytest.approx(2 * np.pi * R, rel=2e-3)


def test_concentric_circles_distances_equal_the_radius_difference():
    # analytic: every point of one circle is |r1 - r2| from the other circle, so the Hausdorff
    # distance, its 95th percentile and the mean distance all equal |r1 - r2|
    mesh_a = grid_mesh((120, 120), kind="triangle")
    mesh_b = grid_mesh((100, 100), kind="quad", jitter=0.2, seed=5)
    r1, r2 = 0.3, 0.22
    res = shape_comparison(mesh_a, disc_field(mesh_a, (0.5, 0.5), r1),
                           mesh_b, disc_field(mesh_b, (0.5, 0.5), r2))
    h = res["grid_spacing"]
    for key in ("hausdorff", "hausdorff_ab", "hausdorff_ba", "hausdorff_95", "mean_distance"):
        assert res[key] == pytest.approx(r1 - r2, abs=0.25 * h), key
    assert res["mismatch_volume"] == pytest.approx(np.pi * (r1 ** 2 - r2 ** 2), rel=0.01)
    assert res["dice"] == pytest.approx(2 * r2 ** 2 / (r1 ** 2 + r2 ** 2), abs=0.01)
    # field difference: the two logistic profiles differ by ~1 across the annulus (analytic, sharp limit)
    assert res["field_difference"] == pytest.approx(np.pi * (r1 ** 2 - r2 ** 2), rel=0.03)


def test_identical_fields_compare_as_equal():
    mesh = grid_mesh((40, 40), kind="triangle")
    c = disc_field(mesh, (0.5, 0.5), 0.2, eps=0.02)
    res = shape_comparison(mesh, c, mesh, c)
    assert res["mismatch_volume"] == 0 and res["dice"] == 1 and res["field_difference"] == 0
    assert res["hausdorff"] == pytest.approx(0, abs=1e-12)


def test_hausdorff_agrees_with_scipy_directed_hausdorff():
    # reference library: scipy.spatial.distance.directed_hausdorff, called both ways on the same
    # densified interface points. Our second pass refines only distances under two grid spacings,
    # so far points may be over-estimated by less than h / 60 (see _distances_to)
    grid = SamplingGrid([(0, 1), (0, 1)], (120, 120))
    P = grid.points()
    a = (0.5 * (1 - np.tanh((np.hypot(P[:, 0] - 0.45, P[:, 1] - 0.5) - 0.2) / 0.01))).reshape(grid.shape)
    ell = np.hypot((P[:, 0] - 0.55) / 0.3, (P[:, 1] - 0.5) / 0.2)
    b = (0.5 * (1 - np.tanh((ell - 1) / 0.04))).reshape(grid.shape)
    res = shape_comparison_on_grid(a, b, grid)
    pa, _ = interface_points(a, grid)
    pb, _ = interface_points(b, grid)
    h = grid.spacing[0]
    ab = directed_hausdorff(pa, pb)[0]
    ba = directed_hausdorff(pb, pa)[0]
    assert res["hausdorff_ab"] == pytest.approx(ab, abs=h / 60)
    assert res["hausdorff_ba"] == pytest.approx(ba, abs=h / 60)
    assert res["hausdorff"] == pytest.approx(max(ab, ba), abs=h / 60)


def test_missing_interface_gives_nan_distances():
    mesh = grid_mesh((40, 40), kind="quad")
    res = shape_comparison(mesh, disc_field(mesh, (0.5, 0.5), 0.2, eps=0.02), mesh, np.zeros(mesh.n_points))
    assert res["dice"] == 0 and np.isnan(res["hausdorff"]) and np.isnan(res["mean_distance"])
    assert res["mismatch_volume"] == pytest.approx(np.pi * 0.04, rel=0.05)


def test_shape_comparison_rejects_bad_level():
    mesh = grid_mesh((4, 4))
    with pytest.raises(OptionError, match="level must lie strictly between 0 and 1"):
        shape_comparison(mesh, np.zeros(25), mesh, np.zeros(25), level=1.5)


# ----------------------------------------- diffuse vs sharp conventions, refinement

def _errors_at(n):
    """A diffuse [-1, 1] order parameter on triangles against a [0, 1] volume fraction on quads.

    Both describe the disc r = 0.25 at (0.5, 0.5): the order parameter phi = tanh(-s / (sqrt2 eps))
    (Cahn & Hilliard 1958 profile, s the signed distance, eps shrinking with the mesh) and a
    volume fraction with a steep logistic profile; each is mapped with its own convention.
    """
    tri = grid_mesh((n, n), kind="triangle", jitter=0.2, seed=n)
    quad = grid_mesh((n + n // 3, n + n // 3), kind="quad")
    s_tri = np.linalg.norm(tri.coordinates - 0.5, axis=1) - R
    s_quad = np.linalg.norm(quad.coordinates - 0.5, axis=1) - R
    dx = 1.0 / n
    phi = np.tanh(-s_tri / (np.sqrt(2) * dx))  # Cahn-Hilliard profile over ~4 cells
    alpha = 0.5 * (1 - np.tanh(s_quad / (0.5 * dx)))  # sharp volume fraction
    ca = map_to_indicator(phi, (-1, 1), "upper")
    cb = map_to_indicator(1 - alpha, (0, 1), "lower")  # the liquid fraction 1 - alpha, lower side
    res = shape_comparison(tri, ca, quad, cb)
    return res["mismatch_volume"], res["hausdorff"]


def test_two_meshes_and_two_conventions_converge_with_refinement():
    # the same analytic disc seen by both runs: mismatch and Hausdorff shrink with refinement
    coarse = _errors_at(24)
    fine = _errors_at(72)
    assert fine[0] < 0.5 * coarse[0]
    assert fine[1] < 0.5 * coarse[1]
    assert fine[1] < 0.01  # well below one coarse cell


# ------------------------------------------------------------------------- 3D

def test_concentric_spheres_3d():
    # analytic: concentric spheres r1, r2: all distances |r1 - r2|; mismatch 4/3 pi (r1^3 - r2^3)
    mesh_a = grid_mesh((20, 20, 20))
    mesh_b = grid_mesh((16, 16, 16), kind="tetra")
    r1, r2 = 0.32, 0.24
    res = shape_comparison(mesh_a, disc_field(mesh_a, (0.5,) * 3, r1, eps=0.02),
                           mesh_b, disc_field(mesh_b, (0.5,) * 3, r2, eps=0.02),
                           grid=SamplingGrid([(0, 1)] * 3, (40, 40, 40)))
    h = res["grid_spacing"]
    # the coarse meshes interpolate the profile with an O(dx^2) error: a tolerance of half a
    # sampling spacing (observed error below that)
    for key in ("hausdorff", "hausdorff_95", "mean_distance"):
        assert res[key] == pytest.approx(r1 - r2, abs=0.5 * h), key
    assert res["mismatch_volume"] == pytest.approx(4 / 3 * np.pi * (r1 ** 3 - r2 ** 3), rel=0.05)
    # the marching-cubes area of a sphere slightly underestimates 4 pi r^2 (scikit-image's own test)
    assert res["interface_size_a"] == pytest.approx(4 * np.pi * r1 ** 2, rel=0.03)


@pytest.mark.parametrize("plane", [0.08, 0.5, 0.92])
def test_marching_cubes_keeps_the_cubes_of_the_last_layer(plane):
    # analytic: the field c = x on a 10^3 grid of the unit cube crosses c = plane on the plane x = plane,
    # whose area over the samples' square (0.05 to 0.95 in y and z) is 0.9^2; at 0.92 it lies in the
    # last layer of cubes, which the mask handed to scikit-image's marching cubes used to leave out
    from phasegauge.analysis.compare import interface_elements

    grid = SamplingGrid([(0, 1)] * 3, (10, 10, 10))
    c = grid.points()[:, 0].reshape(grid.shape)
    tri = interface_elements(c, grid, plane)
    area = 0.5 * np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1).sum()
    assert area == pytest.approx(0.81, rel=1e-9)
    assert np.allclose(tri[..., 0], plane)

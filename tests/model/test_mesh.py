"""The mesh model: cell measures, centroids, adjacency, regular grids, conversions."""

import numpy as np
import pytest

from phasegauge.errors import UnsupportedMeshError
from phasegauge.model.mesh import Mesh
from phasegauge.meshgen import delaunay_mesh, grid_mesh, to_meshio

KINDS_2D = ["quad", "triangle", "mixed", "polygon"]
KINDS_3D = ["hexahedron", "tetra", "wedge", "pyramid", "mixed"]


def _pyvista_sizes(mesh, tmp_path):
    import pyvista as pv

    path = tmp_path / "m.vtu"
    to_meshio(mesh).write(path)
    grid = pv.read(path)
    sizes = grid.compute_cell_sizes(length=False, area=mesh.dimension == 2, volume=mesh.dimension == 3)
    # pyvista/VTK's wedge volumes come out negative: compare magnitudes (REFERENCES.md)
    return np.abs(np.asarray(sizes["Area" if mesh.dimension == 2 else "Volume"]))


# ---------------------------------------------------------------- exact formulas
def test_single_cells_exact_measures():
    # exact: triangle 1/2 b h, tetra 1/6 |det|, unit cube 1, prism 1/2, pyramid 1/3 base * height
    tri = Mesh([[0, 0], [2, 0], [0, 3]], [("triangle", [[0, 1, 2]])])
    assert tri.cell_measures[0] == pytest.approx(3.0)
    assert tri.cell_centroids[0] == pytest.approx([2 / 3, 1.0])
    tet = Mesh([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], [("tetra", [[0, 1, 2, 3]])])
    assert tet.cell_measures[0] == pytest.approx(1 / 6)
    cube = grid_mesh((1, 1, 1))
    assert cube.cell_measures[0] == pytest.approx(1.0)
    assert cube.cell_centroids[0] == pytest.approx([0.5, 0.5, 0.5])
    pts = [[0, 0, 0], [0, 1, 0], [1, 0, 0], [0, 0, 1], [0, 1, 1], [1, 0, 1]]
    wedge = Mesh(pts, [("wedge", [[0, 1, 2, 3, 4, 5]])])
    assert wedge.cell_measures[0] == pytest.approx(0.5)
    assert wedge.cell_centroids[0] == pytest.approx([1 / 3, 1 / 3, 0.5])
    assert wedge.inverted_cells == 0
    pyr = Mesh([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0.5, 0.5, 3]], [("pyramid", [[0, 1, 2, 3, 4]])])
    assert pyr.cell_measures[0] == pytest.approx(1.0)
    # centroid of a pyramid lies a quarter of the height above the base (elementary geometry)
    assert pyr.cell_centroids[0] == pytest.approx([0.5, 0.5, 0.75])


def test_non_planar_hexahedron_volume_is_exact_trilinear():
    # a unit cube with one top corner raised by s: exact trilinear volume 1 + s/4
    # (integral of the bilinear top surface z = 1 + s*x*y over the unit square: 1 + s/4)
    s = 0.4
    pts = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1 + s], [0, 1, 1]],
                   float)
    hexa = Mesh(pts, [("hexahedron", [list(range(8))])])
    assert hexa.cell_measures[0] == pytest.approx(1 + s / 4, rel=1e-12)


def test_polygon_area_shoelace():
    # regular hexagon of circumradius 1: area 3 sqrt(3) / 2 (exact)
    ang = np.arange(6) * np.pi / 3
    pts = np.column_stack([np.cos(ang), np.sin(ang)])
    m = Mesh(pts, [("polygon", [list(range(6))])])
    assert m.cell_measures[0] == pytest.approx(3 * np.sqrt(3) / 2)
    assert m.cell_centroids[0] == pytest.approx([0, 0], abs=1e-12)


# ------------------------------------------------------- against pyvista / VTK
@pytest.mark.parametrize("kind", KINDS_2D)
def test_2d_measures_against_pyvista(kind, tmp_path):
    m = grid_mesh((5, 4), [(0, 2), (0, 1)], kind, jitter=0.25, seed=1)
    # pyvista.compute_cell_sizes (VTK) as the reference library
    assert np.allclose(m.cell_measures, _pyvista_sizes(m, tmp_path), rtol=1e-10, atol=1e-14)
    assert m.total_measure == pytest.approx(2.0, rel=1e-12)  # exact domain area


@pytest.mark.parametrize("kind", KINDS_3D)
def test_3d_measures_against_pyvista(kind, tmp_path):
    m = grid_mesh((4, 3, 3), [(0, 2), (0, 1), (0, 1)], kind, jitter=0.2, seed=2)
    assert m.inverted_cells == 0
    # pyvista.compute_cell_sizes (VTK); wedge volumes compared in magnitude
    assert np.allclose(m.cell_measures, _pyvista_sizes(m, tmp_path), rtol=1e-9, atol=1e-14)
    assert m.total_measure == pytest.approx(2.0, rel=1e-12)  # exact domain volume


@pytest.mark.parametrize("dim", [2, 3])
def test_delaunay_domain_measure(dim):
    m = delaunay_mesh(400, dim=dim, seed=3)
    assert m.total_measure == pytest.approx(1.0, rel=1e-12)
    assert m.inverted_cells == 0


def test_centroids_integrate_first_moment():
    # the centroid of the whole domain from cell centroids equals the box centre (exact)
    for kind in KINDS_3D:
        m = grid_mesh((3, 3, 2), [(0, 3), (0, 1), (0, 2)], kind, jitter=0.2)
        c = (m.cell_centroids * m.cell_measures[:, None]).sum(0) / m.total_measure
        assert c == pytest.approx([1.5, 0.5, 1.0], rel=1e-12)


# ------------------------------------------------------------------- topology
def test_face_adjacency_counts_on_grids():
    m2 = grid_mesh((4, 3))
    # interior edges of a 4x3 grid: 3*3 + 4*2 = 17
    assert len(m2.face_pairs) == 17
    m3 = grid_mesh((4, 3, 2))
    assert len(m3.face_pairs) == 3 * 3 * 2 + 4 * 2 * 2 + 4 * 3 * 1
    assert len(m3.boundary_faces[0]) == 2 * (12 + 8 + 6)


@pytest.mark.parametrize("kind", KINDS_3D)
def test_face_adjacency_is_connected(kind):
    from scipy.sparse.csgraph import connected_components

    m = grid_mesh((3, 3, 3), kind=kind)
    n, _ = connected_components(m.adjacency("face"), directed=False)
    assert n == 1


def test_point_adjacency_joins_corner_neighbours():
    m = grid_mesh((2, 2))
    face = m.adjacency("face")
    point = m.adjacency("point")
    assert face.nnz == 8  # 4 shared edges, both directions
    assert point.nnz == 12  # every pair of the four quads shares the centre point


def test_edges_of_a_grid():
    m = grid_mesh((4, 3))
    assert len(m.edges) == 4 * 4 + 5 * 3


# --------------------------------------------------------------- regular grids
def test_regular_grid_detected_and_scattered():
    m = grid_mesh((5, 4, 3), [(0, 1), (0, 2), (0, 3)])
    g = m.regular_grid
    assert g is not None and g.cell_shape == (5, 4, 3) and g.uniform
    arr = g.cells_to_array(m.cell_centroids[:, 0])
    assert np.allclose(arr[:, 0, 0], (np.arange(5) + 0.5) / 5)
    parr = g.points_to_array(m.points[:, 2])
    assert np.allclose(parr[0, 0, :], np.linspace(0, 3, 4))


def test_regular_grid_not_claimed_for_jittered_or_triangles():
    assert grid_mesh((4, 4), kind="triangle").regular_grid is None
    assert grid_mesh((4, 4), jitter=0.2).regular_grid is None


def test_regular_grid_in_xz_plane():
    m = grid_mesh((3, 2))
    pts = m.points[:, [0, 2, 1]]  # move the plane to y = 0
    m2 = Mesh(pts, [(b.cell_type, b.connectivity) for b in m.blocks])
    assert m2.plane_axes == (0, 2)
    assert m2.regular_grid is not None and m2.regular_grid.cell_shape == (3, 2)


# ---------------------------------------------------------------- conversions
def test_point_cell_conversions_reproduce_linear_fields():
    m = grid_mesh((6, 5), kind="triangle", jitter=0.2)
    f = 2 * m.points[:, 0] + 3 * m.points[:, 1]
    cell = m.point_to_cell(f)
    # the corner mean of a linear field on a triangle is its value at the centroid (exact)
    assert np.allclose(cell, 2 * m.cell_centroids[:, 0] + 3 * m.cell_centroids[:, 1])
    back = m.cell_to_point(cell)
    assert np.isfinite(back).all()


def test_conversions_leave_out_nonfinite():
    m = grid_mesh((2, 1))
    v = np.array([1.0, np.nan])
    p = m.cell_to_point(v)
    assert np.allclose(p[np.isfinite(p)], 1.0)
    assert np.isnan(p).sum() == 2  # the two points of the NaN cell only
    c = m.point_to_cell(np.array([np.nan] * m.n_points))
    assert np.isnan(c).all()


# ------------------------------------------------------------------ reading in
def test_lower_dimensional_cells_kept_apart():
    m = Mesh([[0, 0], [1, 0], [0, 1]], [("line", [[0, 1]]), ("triangle", [[0, 1, 2]])])
    assert m.n_cells == 1 and m.boundary_type_counts == {"line": 1} and m.kept_blocks == [1]


def test_quadratic_cells_reduced_to_corners():
    m = Mesh([[0, 0], [1, 0], [0, 1], [0.5, 0], [0.5, 0.5], [0, 0.5]], [("triangle6", [[0, 1, 2, 3, 4, 5]])])
    assert m.cell_type_counts == {"triangle": 1}
    assert m.cell_measures[0] == pytest.approx(0.5)


@pytest.mark.parametrize("points,cells,match", [
    ([[0, 0, 0]], [], "no cells"),
    ([[0, 0], [1, 0]], [("line", [[0, 1]])], "only 1D cells"),
    ([[0, 0], [1, 0], [0, 1]], [("triangle", [[0, 1, 5]])], "refer to point 5"),
    ([[0, 0, 0], [1, 0, 0], [0, 1, 1]], [("tetra", [[0, 1, 2, 2]])], None),
])
def test_bad_meshes_refused(points, cells, match):
    if match is None:
        m = Mesh(points, cells)
        assert m.degenerate_cells == 1
        return
    with pytest.raises(UnsupportedMeshError, match=match):
        Mesh(points, cells)


def test_curved_2d_mesh_refused():
    m = Mesh([[0, 0, 0], [1, 0, 0.5], [0, 1, 0.2]], [("triangle", [[0, 1, 2]])])
    with pytest.raises(UnsupportedMeshError, match="plane"):
        _ = m.cell_measures


@pytest.mark.parametrize("kind", ["tetra", "hexahedron", "wedge", "pyramid"])
def test_cell_to_point_linear_is_exact_for_linear_fields(kind):
    # least-squares vertex reconstruction reproduces linear fields at interior points (exact)
    m = grid_mesh((6, 6, 6), kind=kind, jitter=0.2, seed=5)
    g = np.array([1.0, -2.0, 0.5])
    p = m.cell_to_point(m.cell_centroids @ g)
    exact = m.coordinates @ g
    interior = np.all((m.coordinates > 1e-9) & (m.coordinates < 1 - 1e-9), axis=1)
    assert np.allclose(p[interior], exact[interior], atol=1e-10)
    # the reconstruction is limited to the range of the cells around each point
    step = (m.cell_centroids[:, 0] > 0.5).astype(float)
    q = m.cell_to_point(step)
    assert q.min() >= 0.0 and q.max() <= 1.0


def test_cell_data_contour_of_a_disc_is_accurate():
    # regression: with the plain cell mean, a disc contour from cell data on a Delaunay mesh was 8 %
    # too long; the linear reconstruction brings it within 1.5 % of 2 pi r (exact geometry)
    from phasegauge.analysis.interface import find_interface

    m = delaunay_mesh(3000, seed=1)
    r = np.hypot(m.cell_centroids[:, 0] - 0.5, m.cell_centroids[:, 1] - 0.5)
    c = 0.5 * (1 + np.tanh((0.3 - r) / 0.02))
    size = find_interface(m, m.cell_to_point(c)).size
    assert size == pytest.approx(2 * np.pi * 0.3, rel=0.015)

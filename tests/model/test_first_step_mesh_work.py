"""First-step mesh work: fast paths give the same numbers as the general ones."""
import hashlib

import numpy as np
import pytest

from phasegauge import meshgen
from phasegauge.model._faces import face_rows, row_owners
from phasegauge.model._places import coincident_points as _coincident_points

KINDS_2D = ["triangle", "quad", "mixed", "polygon"]
KINDS_3D = ["tetra", "hexahedron", "wedge", "pyramid", "mixed"]


def _mesh(kind, dim):
    shape = (5, 4) if dim == 2 else (4, 3, 3)
    return meshgen.grid_mesh(shape, [(0, 1)] * dim, kind, jitter=0.2, seed=3)


@pytest.mark.parametrize("kind,dim", [(k, 2) for k in KINDS_2D] + [(k, 3) for k in KINDS_3D])
@pytest.mark.parametrize("columns", [None, 2])
@pytest.mark.parametrize("all_finite", [False, True])
def test_point_to_cell_matches_incidence_product(kind, dim, columns, all_finite):
    # reference: the corner mean as the sparse product incidence @ values (scipy.sparse),
    # bit for bit (corners added in connectivity order from zero in both); every value finite:
    # the counts are each block's corner count, not gathered
    m = _mesh(kind, dim)
    rng = np.random.default_rng(1)
    v = rng.normal(size=(m.n_points,) if columns is None else (m.n_points, columns))
    if not all_finite:
        v[::5] = np.nan
    v[1::7] = -0.0
    flat = v.reshape(m.n_points, -1)
    finite = np.isfinite(flat)
    total = m.incidence @ np.where(finite, flat, 0.0)
    count = m.incidence @ finite.astype(np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        ref = np.where(count > 0, total / np.maximum(count, 1), np.nan).reshape((m.n_cells,) + v.shape[1:])
    got = m.point_to_cell(v)
    assert np.array_equal(got, ref, equal_nan=True)
    assert np.array_equal(np.signbit(got), np.signbit(ref))


@pytest.mark.parametrize("kind,dim", [(k, 2) for k in KINDS_2D] + [(k, 3) for k in KINDS_3D])
def test_incidence_rows_match_rows_of_the_whole_matrix(kind, dim):
    # reference: scipy.sparse row selection of the mesh-wide incidence; rows asked in any order,
    # repeated; the whole matrix is not made (a droplet step no longer keeps 13 MB at 0.25M cells)
    from phasegauge.model.corners import incidence_rows

    m = _mesh(kind, dim)
    cells = np.random.default_rng(2).permutation(m.n_cells)[: max(3, m.n_cells // 3)]
    cells = np.concatenate([cells, cells[:2]])
    got = incidence_rows(m, cells)
    assert "incidence" not in m.__dict__
    ref = m.incidence[cells]
    ref.sum_duplicates()
    assert got.shape == ref.shape and (got != ref).nnz == 0


@pytest.mark.parametrize("adjacency", ["face", "point"])
def test_a_droplet_step_keeps_no_mesh_wide_incidence(adjacency):
    # memory: contour owners and point-joined droplets read a few cells' rows only; the count is
    # the analytic one (two separate balls of volume-of-fluid style cell values)
    from phasegauge.analysis._contour import find_interface
    from phasegauge.analysis.droplets import label_droplets

    m = meshgen.grid_mesh((14, 14, 14), [(0, 1)] * 3, "tetra", jitter=0.2, seed=3)
    x = m.cell_centroids
    c = ((np.linalg.norm(x - 0.28, axis=1) < 0.18) | (np.linalg.norm(x - 0.72, axis=1) < 0.18)).astype(float)
    contour = find_interface(m, m.cell_to_point(c), level=0.5)
    found = label_droplets(m, c, connectivity=adjacency, interface_cells=contour.cells,
                           interface_sizes=contour.element_sizes, interface_centres=contour.centroids,
                           interface_normals=contour.normals)
    assert found.count == 2
    assert "incidence" not in m.__dict__


def test_point_to_cell_degenerate_cell_counts_repeated_corner_once():
    # a zero-area quad (corners repeated) takes the general path: the mean of its distinct
    # corners (analytic: (1 + 2) / 2); the other cell the mean of its four corners
    from phasegauge.model.mesh import Mesh

    m = Mesh(np.array([[0, 0], [1, 0], [0, 1], [1, 1]], float),
             [("quad", np.array([[0, 1, 1, 0], [0, 1, 3, 2]]))])
    assert m.degenerate_cells == 1
    out = m.point_to_cell(np.array([1.0, 2.0, 3.0, 6.0]))
    assert out[0] == pytest.approx(1.5, rel=1e-15)
    assert out[1] == pytest.approx(3.0, rel=1e-15)


@pytest.mark.parametrize("kind,dim", [("tetra", 3), ("mixed", 3), ("polygon", 2)])
def test_face_pairs_int32_and_signature_unchanged(kind, dim):
    m = _mesh(kind, dim)
    assert m.face_pairs.dtype == np.int32
    # reference: SHA-256 (hashlib) over the arrays' bytes as tobytes() gives them
    h = hashlib.sha256()
    h.update(m.points.tobytes())
    for b in m.blocks + m.boundary_blocks:
        h.update(b.cell_type.encode())
        h.update(b.connectivity.tobytes())
    assert m.signature == h.hexdigest()[:32]


def test_coincident_points_negative_zero_and_copies():
    # exact equality of coordinates (-0.0 == 0.0 as IEEE 754 compares them)
    p = np.array([[0.0, 1, 2], [-0.0, 1, 2], [3, 4, 5], [3, 4, 5], [1, 1, 1]])
    inverse, n = _coincident_points(p)
    assert n == 3
    assert inverse.tolist() == [0, 0, 1, 1, 2]


def test_face_owner_arithmetic_is_64_bit():
    # regression: with int32 face rows the pair key low * n_cells + high overflowed under the old
    # (value-based) promotion rules; the owners come back int64 whatever the input width
    from phasegauge.meshgen import grid_mesh

    mesh = grid_mesh((3, 3, 3), kind="tetra")
    _, row_starts = face_rows(mesh)
    rows = np.arange(8, dtype=np.int32)
    assert row_owners(mesh, rows, row_starts).dtype == np.int64


def _exact_repeats(conn):
    # reference: repeated corner sets counted with numpy's np.unique over rows (sorted rows)
    return len(conn) - len(np.unique(np.sort(conn, axis=1), axis=0))


@pytest.mark.parametrize("kind,dim", [("tetra", 3), ("triangle", 2)])
@pytest.mark.parametrize("where", ["inside", "boundary", "apart"])
def test_repeated_simplices_found_without_sorting_every_cell(kind, dim, where):
    # the corner sort is skipped when no face is crowded and no two cells share two faces; a repeated
    # simplex always shows as one of the two, wherever it sits (inside, on the boundary, or a lone
    # cell repeated away from the rest)
    from phasegauge.model._overlaps import cell_overlaps
    from phasegauge.model.mesh import Mesh

    m = meshgen.grid_mesh((3, 3, 3) if dim == 3 else (4, 4), kind=kind)
    points, conn = m.points, m.blocks[0].connectivity
    if where == "apart":
        lone = points[conn[0]] + 5.0  # one simplex away from the mesh, stored twice
        first = len(points)
        points = np.vstack([points, lone])
        extra = np.arange(first, first + conn.shape[1])[None, :]
        conn = np.vstack([conn, extra, extra[:, ::-1]])
    else:
        pick = conn.shape[0] // 2 if where == "inside" else 0
        conn = np.vstack([conn, conn[pick:pick + 1, ::-1]])
    found = cell_overlaps(Mesh(points, [(kind, conn)]))
    assert found["duplicate_cells"] == _exact_repeats(conn) == 1, found


def test_clean_simplex_meshes_report_no_repeats():
    from phasegauge.meshgen import delaunay_mesh
    from phasegauge.model._overlaps import cell_overlaps

    for m in (meshgen.grid_mesh((4, 3, 3), kind="tetra", jitter=0.2, seed=2), delaunay_mesh(200, dim=2, seed=4)):
        assert _exact_repeats(m.blocks[0].connectivity) == 0
        assert cell_overlaps(m) == {"duplicate_cells": 0, "crowded_faces": 0, "covered_boundary_faces": 0}


@pytest.mark.parametrize("dim", [2, 3])
def test_barycentric_coordinates_match_a_linear_solve(dim):
    # reference: numpy.linalg.solve of the (d x d) edge system, coordinate 0 as one minus the rest
    from phasegauge.model._overlaps import _barycentric

    rng = np.random.default_rng(7)
    verts = rng.normal(size=(50, dim + 1, dim))
    point = rng.normal(size=(50, dim))
    lam, det = _barycentric(verts, point)
    base = verts[:, 1:, :] - verts[:, :1, :]
    ref = np.linalg.solve(np.transpose(base, (0, 2, 1)), (point - verts[:, 0, :])[..., None])[..., 0]
    assert np.allclose(lam[:, 1:], ref, rtol=1e-9, atol=1e-9)
    assert np.allclose(lam.sum(axis=1), 1.0)
    assert np.allclose(det, np.linalg.det(base), rtol=1e-9)
    flat = verts.copy()
    flat[:, -1] = flat[:, 0]  # a degenerate simplex: zero determinant, zero coordinates
    lam, det = _barycentric(flat, point)
    assert np.all(lam == 0.0) and np.allclose(det, 0.0)


def _covered_by_brute_force(m):
    # reference: every boundary face's probe (the same point off the face) located by
    # scipy.spatial.Delaunay.find_simplex in each other cell on its own (no k-d tree, no box filter)
    from scipy.spatial import Delaunay

    corners, owners = m.boundary_faces
    d, x = m.dimension, m.coordinates
    face = x[corners[:, corners.shape[1] - d:]]
    weights = np.array([0.41, 0.59]) if d == 2 else np.array([0.23, 0.33, 0.44])
    middle = np.einsum("k,nkd->nd", weights, face)
    away = middle - m.cell_centroids[owners]
    away /= np.linalg.norm(away, axis=1)[:, None]
    probe = middle + 1e-3 * m.cell_sizes[owners][:, None] * away
    inside = np.zeros(len(probe), dtype=bool)
    for cell, corners_of_cell in enumerate(m.blocks[0].connectivity):
        tri = Delaunay(x[corners_of_cell])
        inside |= (tri.find_simplex(probe, tol=-1e-9) >= 0) & (owners != cell)
    return int(np.count_nonzero(inside))


@pytest.mark.parametrize("dim", [2, 3])
@pytest.mark.parametrize("shift", [0.0, 0.37, 5.0])
def test_covered_boundary_faces_match_a_brute_force_search(dim, shift):
    # two grids of simplices, the second moved by `shift` cells along every axis: overlapping (0.37),
    # or apart (5.0); a lone grid (0.0) has every probe beyond the box of all points (no tree built)
    from phasegauge.model._overlaps import _covered_boundary_faces
    from phasegauge.model.mesh import Mesh

    kind = "tetra" if dim == 3 else "triangle"
    shape = (3, 3, 2) if dim == 3 else (4, 3)
    m = meshgen.grid_mesh(shape, [(0, 1)] * dim, kind, jitter=0.15, seed=5)
    points, conn = m.points[:, :dim], m.blocks[0].connectivity
    if shift:
        points = np.vstack([points, points + shift / 3.0])
        conn = np.vstack([conn, conn + len(m.points)])
    both = Mesh(points, [(kind, conn)])
    found = _covered_boundary_faces(both)
    assert found == _covered_by_brute_force(both)
    assert (found > 0) == (shift == 0.37)

"""Refinement seams (hanging nodes): cells of an adaptive mesh joined across a coarse cell's face that
fine cells share in parts, and the seam taken out of the boundary.

References: every leaf cell is painted onto the finest uniform grid, and two leaves are neighbours
exactly when their painted squares (cubes) share a fine edge (face) there; droplets are counted and
measured there by scipy.ndimage.label (face connectivity); the boundary is the unit box's (length 4,
area 6: analytic).
"""

import itertools
import json

import meshio
import numpy as np
import pytest
from click.testing import CliRunner
from scipy import ndimage

import phasegauge
from phasegauge.analysis.droplets import label_droplets
from phasegauge.cli import main
from phasegauge.model._overlaps import overlap_problem
from phasegauge.model._hanging_faces import hanging_face_links
from phasegauge.model.mesh import Mesh


def _tree(dim, base, levels, wanted):
    """Leaves (corner, size) of a quadtree (2D) or octree (3D) on the unit box: a cell splits while
    ``wanted(centre, size)`` asks for a deeper level than its own (no balance: jumps of 4:1 occur)."""
    leaves = []

    def split(corner, size, level):
        if level < levels and wanted(corner + size / 2, size) > level:
            for offset in itertools.product((0, 1), repeat=dim):
                split(corner + np.array(offset) * size / 2, size / 2, level + 1)
        else:
            leaves.append((corner, size))

    for index in itertools.product(range(base), repeat=dim):
        split(np.array(index, dtype=float) / base, 1.0 / base, 0)
    return leaves


def _mesh(leaves, dim):
    """The leaves as quads or hexahedra over shared points (hanging nodes are no corners)."""
    order = [(0, 0), (1, 0), (1, 1), (0, 1)] if dim == 2 else \
        [(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)]
    ids, points, cells = {}, [], []
    for corner, size in leaves:
        row = []
        for offset in order:
            p = corner + np.array(offset) * size
            key = tuple(np.round(p * 2 ** 20).astype(int))
            if key not in ids:
                ids[key] = len(points)
                points.append(p)
            row.append(ids[key])
        cells.append(row)
    return Mesh(np.array(points), [("quad" if dim == 2 else "hexahedron", np.array(cells))])


def _painted(leaves, dim, fine):
    """Each fine cell's leaf number on the finest uniform grid."""
    out = np.empty((fine,) * dim, dtype=np.int64)
    for k, (corner, size) in enumerate(leaves):
        lo = np.round(corner * fine).astype(int)
        n = int(round(size * fine))
        out[tuple(slice(a, a + n) for a in lo)] = k
    return out


def _painted_pairs(painted):
    """Leaf pairs whose painted cells share a fine face, lower leaf first, sorted."""
    found = set()
    for axis in range(painted.ndim):
        a = np.moveaxis(painted, axis, 0)
        lo, hi = a[:-1].ravel(), a[1:].ravel()
        apart = lo != hi
        found.update(zip(np.minimum(lo, hi)[apart].tolist(), np.maximum(lo, hi)[apart].tolist()))
    return np.array(sorted(found))


def _boundary_measure(mesh):
    corners, _ = mesh.boundary_faces
    x = mesh.coordinates
    if mesh.dimension == 2:
        return float(np.linalg.norm(x[corners[:, 1]] - x[corners[:, 0]], axis=1).sum())
    # boundary quads of a box's axis-aligned cells: the area of the box the corners span
    p = x[corners]
    return float(np.prod(np.sort(np.ptp(p, axis=1), axis=1)[:, 1:], axis=1).sum())


def _ring(centre, radius):
    def wanted(c, size):  # two levels finer near the circle (sphere), none far from it
        gap = abs(np.linalg.norm(c - centre) - radius)
        return 2 if gap < size else (1 if gap < 2 * size else 0)
    return wanted


@pytest.mark.parametrize("dim, base", [(2, 8), (3, 6)])
def test_cells_joined_across_seams_as_on_the_finest_grid(dim, base):
    leaves = _tree(dim, base, 2, _ring(np.full(dim, 0.45), 0.3))
    mesh = _mesh(leaves, dim)
    sizes = {round(size * base * 4) for _, size in leaves}
    assert sizes == {1, 2, 4}  # three levels: seams of 2:1 and of 4:1
    painted = _painted(leaves, dim, 4 * base)
    np.testing.assert_array_equal(mesh.face_pairs, _painted_pairs(painted))
    assert _boundary_measure(mesh) == pytest.approx(4.0 if dim == 2 else 6.0, rel=1e-12)
    assert mesh._face_topology["hanging_faces"] > 0


@pytest.mark.parametrize("dim, base", [(2, 8), (3, 6)])
def test_a_drop_across_seams_is_one_droplet(dim, base):
    centre = np.full(dim, 0.45)
    leaves = _tree(dim, base, 2, _ring(centre, 0.3))
    mesh = _mesh(leaves, dim)
    # two drops: the ring's inside and a small one in a corner of coarse cells
    c = np.array([float(np.linalg.norm(corner + size / 2 - centre) < 0.3 or np.all(corner + size / 2 > 0.85))
                  for corner, size in leaves])
    labels = label_droplets(mesh, c)
    fine = 4 * base
    painted = _painted(leaves, dim, fine)
    reference, count = ndimage.label(c[painted] > 0.5)
    volumes = np.sort(np.bincount(reference.ravel())[1:] / fine ** dim)
    assert len(labels.table) == count == 2
    np.testing.assert_allclose(np.sort(labels.table["volume"].to_numpy()), volumes, rtol=1e-12)


def test_faces_of_points_written_twice_stay_apart():
    # two unit cubes side by side, the shared face's corners written once for each cube: a baffle (a
    # wall inside the domain) is written so, so the cubes are not joined
    points = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float)
    points = np.vstack([points, points + [1, 0, 0]])
    mesh = Mesh(points, [("hexahedron", np.arange(16).reshape(2, 8))])
    assert mesh.face_pairs.shape[0] == 0
    assert _boundary_measure(mesh) == pytest.approx(12.0)  # both cubes' surfaces
    assert mesh.hanging_faces == 0


def test_a_refined_side_of_a_baffle_with_points_of_its_own_stays_apart():
    # two blocks of quads meet on x = 1: fine cells (0.25) on the left, coarse (0.5) on the right, the
    # plane's points written once for each block: a baffle, no seam (no point of the coarse faces is
    # a fine face's)
    left = _tree(2, 4, 0, lambda c, size: 0)
    fine = _mesh([(corner * [1, 1], size) for corner, size in left], 2)
    coarse = _mesh([(np.array([1 + 0.5 * i, 0.5 * j]), 0.5) for i in range(2) for j in range(2)], 2)
    points = np.vstack([fine.points, coarse.points])
    blocks = [("quad", np.vstack([fine.blocks[0].connectivity, coarse.blocks[0].connectivity + fine.n_points]))]
    mesh = Mesh(points, blocks)
    assert mesh.hanging_faces == 0
    assert len(label_droplets(mesh, np.ones(mesh.n_cells)).table) == 2


def test_a_face_covered_in_part_stays_boundary_and_its_cells_are_joined():
    # a step: fine cells (0.25) over y in [0.5, 1] up to x = 1, then a coarse cell (1) over y in [0, 1]:
    # the coarse cell's face on x = 1 is half wall (below the fine cells) and half seam
    leaves = [(np.array([0.25 * i, 0.5 + 0.25 * j]), 0.25) for i in range(4) for j in range(2)]
    leaves += [(np.array([1.0, 0.0]), 1.0), (np.array([2.0, 0.0]), 1.0)]
    mesh = _mesh(leaves, 2)
    pairs = {tuple(p) for p in mesh.face_pairs.tolist()}
    assert {(6, 8), (7, 8)} <= pairs  # the fine cells on x = 1 joined to the coarse cell
    # outline 8 (analytic) plus the seam's 0.5 from each side: the partly covered face and its smaller
    # faces stay boundary faces, as before the join
    assert _boundary_measure(mesh) == pytest.approx(9.0, rel=1e-12)


@pytest.mark.parametrize("dim", [2, 3])
def test_hanging_nodes_of_a_mapped_mesh_are_joined(dim):
    # the quadtree (octree) mapped by a smooth shear: hanging nodes lie on the curved mesh lines,
    # off the coarse faces' planes by their sagitta
    base = 8 if dim == 2 else 6
    leaves = _tree(dim, base, 2, _ring(np.full(dim, 0.45), 0.3))
    straight = _mesh(leaves, dim)
    points = straight.points.copy()
    points[:, 0] += 0.02 * np.sin(np.pi * points[:, 1])
    mapped = Mesh(points, [(straight.blocks[0].cell_type, straight.blocks[0].connectivity)])
    assert mapped.hanging_faces == straight.hanging_faces > 0
    np.testing.assert_array_equal(mapped.face_pairs, straight.face_pairs)


def test_a_fine_triangle_pair_beside_a_coarse_triangle_is_no_overlap():
    # a coarse triangle on the left of x = 1; on its right two triangles share the edge's midpoint
    points = np.array([[0, 0], [1, 0], [1, 2], [1, 1], [2, 0], [2, 2]], float)
    mesh = Mesh(points, [("triangle", np.array([[0, 1, 2], [1, 4, 3], [3, 4, 5], [3, 5, 2]]))])
    assert overlap_problem(mesh) is None
    assert {tuple(p) for p in mesh.face_pairs.tolist()} >= {(0, 1), (0, 3)}
    assert _boundary_measure(mesh) == pytest.approx(5 + np.sqrt(5), rel=1e-12)  # the outline, analytic


def test_conforming_meshes_have_no_seams():
    from phasegauge.meshgen import grid_mesh

    grid = grid_mesh((6, 5, 4), kind="tetra", jitter=0.2, seed=4)
    centroids = grid.cell_centroids
    inside = np.linalg.norm(centroids - 0.5, axis=1) < 0.45  # a ball cut from the box: a curved boundary
    ball = Mesh(grid.points, [("tetra", grid.blocks[0].connectivity[inside])])
    corners, owners = ball.boundary_faces
    assert hanging_face_links(ball, corners, owners) is None
    assert ball._face_topology["hanging_faces"] == 0


def test_a_run_on_an_adaptive_series_counts_one_drop(tmp_path):
    # a sharp drop moving across a quadtree refined around it, the mesh changing every step
    steps = []
    for k in range(3):
        centre = np.array([0.4 + 0.05 * k, 0.5])
        leaves = _tree(2, 8, 2, _ring(centre, 0.25))
        mesh = _mesh(leaves, 2)
        c = np.array([float(np.linalg.norm(corner + size / 2 - centre) < 0.25) for corner, size in leaves])
        name = tmp_path / f"drop_{k:02d}.vtu"
        points = np.c_[mesh.points[:, :2], np.zeros(mesh.n_points)]
        meshio.Mesh(points, [("quad", mesh.blocks[0].connectivity)], cell_data={"alpha": [c]},
                    field_data={"TimeValue": np.array([0.1 * k])}).write(name)
        steps.append(name)
    result = phasegauge.measure(str(tmp_path / "drop_*.vtu"), "alpha")
    assert list(result.steps["droplet_count"]) == [1, 1, 1]
    assert len(result.events) == 0
    shown = CliRunner().invoke(main, ["inspect", str(tmp_path / "drop_*.vtu"), "--json"])
    assert shown.exit_code == 0, shown.output
    assert json.loads(shown.output)["hanging_faces"] > 0

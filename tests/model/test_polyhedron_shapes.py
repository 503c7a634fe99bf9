"""Polyhedra whose faces make an ordinary cell (tetrahedron, pyramid, wedge, hexahedron).

Outside checks: the cells' own corner lists and their measures (:class:`Mesh`, exact closed forms
checked elsewhere against VTK) are the reference; each polyhedron is written from them, its face
loops turned to start at any corner, listed in any order and all reversed at random, and must come
back as a cell with the same corners, the same faces and the same (positive) measure. Face lists
that are not such a cell (a face whose corners cross, one face turned against the others, a face
cut in two, a corner written twice) must not.
"""

import numpy as np
import pytest

from phasegauge.meshgen import grid_mesh
from phasegauge.model._polyhedron_shapes import LOOPS, ordinary_shapes
from phasegauge.model.mesh import Mesh


def _stream(cells, rng, *, reverse=None):
    """Face stream of ``cells`` ((type, connectivity) pairs): each cell's faces shuffled, each loop
    started at a random corner, every loop of a cell reversed where ``reverse`` (random if None)."""
    points, offsets, owner, n = [], [0], [], 0
    for name, conn in cells:
        for row in conn:
            turn = rng.random() < 0.5 if reverse is None else reverse
            for f in rng.permutation(len(LOOPS[name])):
                loop = [int(row[i]) for i in LOOPS[name][f]]
                loop = loop[::-1] if turn else loop
                k = int(rng.integers(len(loop)))
                points += loop[k:] + loop[:k]
                offsets.append(len(points))
                owner.append(n)
            n += 1
    return np.array(points), np.array(offsets), np.array(owner), n


def _faces_of(name, conn):
    return sorted(tuple(sorted(int(conn[i]) for i in f)) for f in LOOPS[name])


@pytest.mark.parametrize("kind", ["hexahedron", "mixed", "tetra", "pyramid"])
def test_cells_come_back_with_their_corners_faces_and_measures(kind):
    rng = np.random.default_rng(4)
    mesh = grid_mesh((3, 4, 2), kind=kind, jitter=0.2, seed=2)
    cells = [(b.cell_type, b.connectivity) for b in mesh.blocks]
    blocks = ordinary_shapes(mesh.points, *_stream(cells, rng))
    assert blocks is not None
    made = Mesh(mesh.points, [(b.cell_type, b.connectivity) for b in blocks])
    assert np.all(made.signed_measures > 0)
    order = np.concatenate([b.cells for b in blocks])
    np.testing.assert_allclose(made.cell_measures, mesh.cell_measures[order], rtol=1e-12)
    originals = [(b.cell_type, row) for b in mesh.blocks for row in b.connectivity]
    for block in blocks:
        for cell, row in zip(block.cells, block.connectivity):
            name, original = originals[cell]
            assert name == block.cell_type
            assert _faces_of(name, row) == _faces_of(name, original)


def test_cells_with_inward_faces_come_back_positive():
    rng = np.random.default_rng(5)
    mesh = grid_mesh((3, 3, 3), kind="mixed", jitter=0.2, seed=3)
    cells = [(b.cell_type, b.connectivity) for b in mesh.blocks]
    for reverse in (False, True):
        blocks = ordinary_shapes(mesh.points, *_stream(cells, rng, reverse=reverse))
        assert np.all(Mesh(mesh.points, [(b.cell_type, b.connectivity) for b in blocks]).signed_measures > 0)


def _cube_stream():
    mesh = grid_mesh((1, 1, 1), kind="hexahedron")
    return mesh.points, _stream([("hexahedron", mesh.blocks[0].connectivity)], np.random.default_rng(0),
                                reverse=False)


def test_a_cube_is_a_hexahedron():
    points, stream = _cube_stream()
    (block,) = ordinary_shapes(points, *stream)
    assert block.cell_type == "hexahedron" and Mesh(points, [("hexahedron", block.connectivity)]).cell_measures[0] == 1


def test_face_lists_that_are_no_ordinary_cell_are_refused():
    points, (fp, fo, fc, n) = _cube_stream()
    crossed = fp.copy()
    crossed[[1, 2]] = crossed[[2, 1]]  # the first face's corners in a crossing order
    assert ordinary_shapes(points, crossed, fo, fc, n) is None
    turned = fp.copy()
    turned[fo[2]:fo[3]] = turned[fo[2]:fo[3]][::-1]  # one face against the others
    assert ordinary_shapes(points, turned, fo, fc, n) is None
    twice = fp.copy()
    twice[twice == fp[0]] = fp[fo[1]]  # two corners made one
    assert ordinary_shapes(points, twice, fo, fc, n) is None
    # the first face cut into two triangles: seven faces, a polyhedron of another shape
    a, b, c, d = fp[:4]
    cut = np.concatenate([[a, b, c, a, c, d], fp[4:]])
    offsets = np.concatenate([[0, 3], fo[1:] + 2])
    assert ordinary_shapes(points, cut, offsets, np.concatenate([[0], fc]), n) is None


def test_strongly_warped_cells_come_back_with_positive_measure():
    # regression (found by review): the orientation was told by a fan from one corner of each quad
    # face, which on a strongly bent face can differ in sign from the bilinear face's volume that
    # Mesh.signed_measures counts: some valid wedges came back inverted. Cells of random corners whose
    # every corner Jacobian is positive (a valid trilinear map, the outside definition) are written as
    # polyhedra, faces reversed at random, and must come back with positive measure.
    rng = np.random.default_rng(7)
    unit = {"hexahedron": [(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)],
            "wedge": [(0, 0, 0), (0, 1, 0), (1, 0, 0), (0, 0, 1), (0, 1, 1), (1, 0, 1)],  # meshio's order
            "pyramid": [(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0.5, 0.5, 1)]}
    # each corner's three edge neighbours, right-handed in a cell of positive measure
    around = {"hexahedron": [(1, 3, 4), (2, 0, 5), (3, 1, 6), (0, 2, 7), (7, 5, 0), (4, 6, 1), (5, 7, 2), (6, 4, 3)],
              "wedge": [(2, 1, 3), (0, 2, 4), (1, 0, 5), (4, 5, 0), (5, 3, 1), (3, 4, 2)],
              "pyramid": [(1, 3, 4), (2, 0, 4), (3, 1, 4), (0, 2, 4)]}
    for name, corners in unit.items():
        k, m = 3000, len(corners)
        P = np.array(corners, float)[None] + 0.3 * rng.standard_normal((k, m, 3))
        valid = np.ones(k, dtype=bool)
        for c, (a, b, d) in enumerate(around[name]):
            valid &= np.linalg.det(np.stack([P[:, a] - P[:, c], P[:, b] - P[:, c], P[:, d] - P[:, c]], axis=1)) > 0
        P = P[valid]
        conn = np.arange(P.shape[0] * m).reshape(-1, m)
        assert np.all(Mesh(P.reshape(-1, 3), [(name, conn)]).signed_measures > 0)
        blocks = ordinary_shapes(P.reshape(-1, 3), *_stream([(name, conn)], rng))
        made = Mesh(P.reshape(-1, 3), [(name, blocks[0].connectivity)])
        assert np.all(made.signed_measures > 0), name


def test_the_bilinear_quads_volume_is_the_mean_of_its_two_diagonal_cuts():
    # the orientation's volume (the mesh's own, quad faces bilinear) against the triangles of both
    # diagonal cuts of every face (divergence theorem over a triangulated surface, elementary)
    from phasegauge.model._polyhedron_shapes import _signed_volumes

    rng = np.random.default_rng(2)
    unit = np.array([(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)], float)
    X = (unit[None] + 0.25 * rng.standard_normal((500, 8, 3))).reshape(-1, 3)
    conn = np.arange(X.shape[0]).reshape(-1, 8)
    P = X[conn]

    def triple(a, b, c):
        return np.einsum("ij,ij->i", P[:, a], np.cross(P[:, b], P[:, c]))

    both_cuts = sum(0.5 * (triple(a, b, c) + triple(a, c, d) + triple(b, c, d) + triple(b, d, a))
                    for a, b, c, d in LOOPS["hexahedron"])
    np.testing.assert_allclose(_signed_volumes(X, conn, "hexahedron"), both_cuts, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(both_cuts / 6, Mesh(X, [("hexahedron", conn)]).signed_measures, rtol=1e-10, atol=1e-12)

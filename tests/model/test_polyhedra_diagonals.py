"""Polyhedra's four-corner faces cut along their shorter diagonal (model/polyhedra.py).

Outside checks: VTK's own cell sizes of the same cells as hexahedra (pyvista
``compute_cell_sizes``) [lib]; the same hexahedra split by
:func:`phasegauge.model.simplices.split_cells` (the rule of ``model/_face_diagonals.py``); the
exact volume of a sheared pentagonal prism (base area times height, elementary geometry).
"""

import numpy as np
import pytest

from phasegauge.meshgen import grid_mesh
from phasegauge.model.mesh import Mesh
from phasegauge.model.polyhedra import cell_face_stream, split_polyhedra
from phasegauge.model.simplices import split_cells

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")


def _signed(Y, tetra):
    a = Y[tetra[:, 0]]
    return np.einsum("ij,ij->i", np.cross(Y[tetra[:, 1]] - a, Y[tetra[:, 2]] - a), Y[tetra[:, 3]] - a) / 6.0


def _facets(tetra):
    return np.sort(tetra[:, [[1, 2, 3], [0, 2, 3], [0, 1, 3], [0, 1, 2]]].reshape(-1, 3), axis=1)


@pytest.mark.parametrize("jitter, seed", [(0.25, 4), (0.3, 7)])
def test_jittered_hexahedra_as_polyhedra_are_the_hexahedra_split(jitter, seed):
    m = grid_mesh((6, 5, 4), kind="hexahedron", jitter=jitter, seed=seed)
    conn = m.blocks[0].connectivity
    split = split_polyhedra(m.points, *cell_face_stream("hexahedron", conn), len(conn))
    assert len(split.tetra) == 12 * len(conn) and split.n_face_centres == 0  # only cell centres added
    assert split.inverted_tetra == 0
    volume = _signed(split.points, split.tetra)
    assert volume.min() > 0
    per_cell = np.bincount(split.source, weights=volume, minlength=len(conn))
    # conforming: every inner facet in two tetrahedra, the boundary's (two per outer quad) in one
    _, counts = np.unique(_facets(split.tetra), axis=0, return_counts=True)
    assert counts.max() == 2
    assert np.count_nonzero(counts == 1) == 2 * 2 * (6 * 5 + 5 * 4 + 6 * 4)
    # the face neighbours: symmetric, each pair sharing a facet (three corners), one a shared facet
    nb = split.neighbours
    rows, cols = np.nonzero(nb >= 0)
    assert rows.size == 2 * np.count_nonzero(counts == 2)
    other = nb[rows, cols]
    assert np.all(np.any(nb[other] == rows[:, None], axis=1))
    shared = (split.tetra[rows][:, :, None] == split.tetra[other][:, None, :]).any(axis=2).sum(axis=1)
    assert np.all(shared == 3)
    # the hexahedral mesh split by simplices.split_cells: the same tetrahedra, the same volumes per cell
    hexa = split_cells(m)
    theirs = np.abs(np.bincount(hexa.owner, weights=_signed(hexa.coordinates, hexa.simplices), minlength=len(conn)))
    np.testing.assert_allclose(per_cell, theirs, rtol=1e-12, atol=0)
    # VTK's hexahedra [lib]: per cell the trilinear volume, O(jitter^2) apart (the jitter a fraction of
    # a cell: not smaller on finer grids); the box's total exact (flat outer faces)
    pv = pytest.importorskip("pyvista")
    sizes = pv.UnstructuredGrid({pv.CellType.HEXAHEDRON: conn}, m.points).compute_cell_sizes()["Volume"]
    assert per_cell.sum() == pytest.approx(sizes.sum(), rel=1e-12)
    np.testing.assert_allclose(per_cell, sizes, rtol=0.25)  # measured 0.156 and 0.186 (of a cell's volume)


def test_renumbered_points_and_cells_split_alike():
    m = grid_mesh((5, 4, 4), kind="hexahedron", jitter=0.3, seed=2)
    conn = m.blocks[0].connectivity
    rng = np.random.default_rng(5)
    points, cells = rng.permutation(m.n_points), rng.permutation(len(conn))
    new_id = np.argsort(points)
    # each cell's corners also rotated (the faces' loops start elsewhere: the same hexahedron)
    conn2 = new_id[conn[cells]][:, [1, 2, 3, 0, 5, 6, 7, 4]]
    a = split_polyhedra(m.points, *cell_face_stream("hexahedron", conn), len(conn))
    b = split_polyhedra(m.points[points], *cell_face_stream("hexahedron", conn2), len(conn2))
    va = np.bincount(a.source, weights=_signed(a.points, a.tetra))
    vb = np.bincount(b.source, weights=_signed(b.points, b.tetra))
    np.testing.assert_allclose(vb, va[cells], rtol=1e-13)
    # the same tetrahedra: their corners' coordinates, each tetrahedron's sorted, the rows sorted
    def corner_sets(split):
        xyz = split.points[split.tetra]  # (m, 4, 3)
        xyz = xyz[np.arange(len(xyz))[:, None], np.lexsort(xyz.transpose(2, 0, 1)[::-1])]
        rows = xyz.reshape(-1, 12)
        return rows[np.lexsort(rows.T[::-1])]

    assert len(a.tetra) == len(b.tetra) == 12 * len(conn)
    np.testing.assert_allclose(corner_sets(b), corner_sets(a), rtol=0, atol=1e-14)


def test_pentagonal_faces_keep_their_centre():
    # a pentagonal prism, sheared: two flat pentagons (a centre each) and five parallelograms
    # (unequal diagonals: cut along the shorter), volume = base area x height exactly
    angle = 2 * np.pi * np.arange(5) / 5
    base = np.stack([np.cos(angle), 0.8 * np.sin(angle), np.zeros(5)], axis=1)
    height, shear = 1.3, np.array([0.4, 0.2, 0.0])
    top = base + shear + [0, 0, height]
    points = np.concatenate([base, top])
    faces = [tuple(range(4, -1, -1)), tuple(range(5, 10))]
    faces += [(i, (i + 1) % 5, 5 + (i + 1) % 5, 5 + i) for i in range(5)]
    fp = np.concatenate([np.array(f) for f in faces])
    fo = np.concatenate([[0], np.cumsum([len(f) for f in faces])])
    split = split_polyhedra(points, fp, fo, np.zeros(len(faces), dtype=np.int64), 1)
    assert split.n_face_centres == 2 and split.n_centres == 3
    assert len(split.tetra) == 2 * 5 + 5 * 2
    corners = [set(split.centre_points[split.centre_offsets[j]:split.centre_offsets[j + 1]].tolist()) for j in range(2)]
    assert sorted(map(sorted, corners)) == [[0, 1, 2, 3, 4], [5, 6, 7, 8, 9]]
    x, y = base[:, 0], base[:, 1]
    area = 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))  # shoelace
    volume = _signed(split.points, split.tetra)
    assert volume.min() > 0
    assert volume.sum() == pytest.approx(area * height, rel=1e-13)
    assert split.neighbours is not None
    assert np.count_nonzero(split.neighbours >= 0) == 2 * (len(split.tetra) * 4 - 20) // 2


def test_tied_diagonals_keep_the_centre():
    # a unit cube: square faces, diagonals equal (a tie, no choice free of the numbering): 24 tetrahedra
    m = Mesh(np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float),
             [("hexahedron", np.arange(8)[None])])
    split = split_polyhedra(m.points, *cell_face_stream("hexahedron", m.blocks[0].connectivity), 1)
    assert len(split.tetra) == 24 and split.n_face_centres == 6
    assert _signed(split.points, split.tetra).sum() == pytest.approx(1.0, rel=1e-14)


def test_renumbering_leaves_contour_and_widths_unchanged(tmp_path):
    # the same jittered hexahedra written by VTK as polyhedra [lib], once renumbered (points, cells
    # and each cell's corners): the contour's area and the widths agree to round-off
    pytest.importorskip("pyvista")
    from phasegauge.analysis.interface import interface_metrics
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    m = grid_mesh((12, 12, 12), kind="hexahedron", jitter=0.25, seed=6)
    conn = m.blocks[0].connectivity
    rng = np.random.default_rng(8)
    points, cells = rng.permutation(m.n_points), rng.permutation(len(conn))
    conn2 = np.argsort(points)[conn[cells]][:, [3, 0, 1, 2, 7, 4, 5, 6]]
    results = []
    for name, X, c in (("a", m.points, conn), ("b", m.points[points], conn2)):
        c_values = 0.5 * (1 + np.tanh((0.3 - np.linalg.norm(X - 0.5, axis=1)) / 0.05))
        path = str(tmp_path / f"{name}.vtu")
        to_polyhedral_grid(Mesh(X, [("hexahedron", c)]), point_data={"c": c_values}).save(path)
        step = Series(path).read(0)
        assert step.mesh.n_cells == 12 * len(conn)
        results.append(interface_metrics(step.mesh, step.fields.point_data["c"]))
    for key in ("interface_size", "interface_width", "interface_width_cells"):
        assert results[1][key] == pytest.approx(results[0][key], rel=1e-12, abs=0), key


def test_turned_triangles_keep_the_face_centre_as_split_cells_does():
    # corners moved up to 0.35 of a cell: some shorter diagonals would turn a tetrahedron against its
    # cell; those faces keep a centre, on both sides, as simplices.split_cells does (measured: 165
    # face centres, 12.082 tetrahedra a cell, none of negative volume; the volumes per cell the
    # same to round-off)
    m = grid_mesh((20, 20, 20), kind="hexahedron", jitter=0.35, seed=1)
    conn = m.blocks[0].connectivity
    split = split_polyhedra(m.points, *cell_face_stream("hexahedron", conn), len(conn))
    assert split.n_face_centres > 0 and split.inverted_tetra == 0
    hexa = split_cells(m)
    # (split_cells cuts a flat face by its cell's table unless that would turn a tetrahedron, the
    # polyhedra by the same rule as a bent one: here both centre the same faces)
    assert len(split.tetra) == len(hexa.simplices)
    volume = _signed(split.points, split.tetra)
    assert volume.min() > 0
    per_cell = np.bincount(split.source, weights=volume, minlength=len(conn))
    theirs = np.abs(np.bincount(hexa.owner, weights=_signed(hexa.coordinates, hexa.simplices), minlength=len(conn)))
    np.testing.assert_allclose(per_cell, theirs, rtol=1e-12, atol=0)
    facets, counts = np.unique(_facets(split.tetra), axis=0, return_counts=True)
    assert counts.max() == 2
    outer = split.points[facets[counts == 1]]  # (k, 3 corners, 3): each on one face of the unit box
    on_side = np.any((np.abs(outer) < 1e-12).all(axis=1) | (np.abs(outer - 1) < 1e-12).all(axis=1), axis=1)
    assert on_side.all() and np.count_nonzero(counts == 1) >= 2 * 2 * 3 * 20 * 20
    assert np.count_nonzero(split.neighbours >= 0) == 2 * np.count_nonzero(counts == 2)


def test_a_face_with_three_corners_in_a_line_keeps_its_centre():
    # a tetrahedron whose edge a-b holds a hanging node m (two faces of four corners, a, m, b in a
    # line): the shorter diagonal of face (a, m, b, c) would give the flat triangle (a, m, b) and a
    # tetrahedron of no volume, the same from both faces (found by review: a facet of four
    # tetrahedra, a neighbour listed twice). Such a face keeps its centre: every tetrahedron has
    # volume, they add up to the tetrahedron's (a . (b x c) / 6, analytic) and conform
    a, b, c, d, m = [0, 0, 0], [1, 0, 0], [0.5, 2, 0], [0.5, 0.8, 1.5], [0.5, 0, 0]
    X = np.array([a, b, c, d, m], dtype=float)
    faces = [(0, 4, 1, 2), (1, 4, 0, 3), (0, 2, 3), (1, 3, 2)]
    points = np.array([p for f in faces for p in f])
    offsets = np.concatenate([[0], np.cumsum([len(f) for f in faces])])
    split = split_polyhedra(X, points, offsets, np.zeros(len(faces), dtype=np.int64), 1)
    volume = _signed(split.points, split.tetra)
    assert split.n_face_centres == 2 and volume.min() > 1e-3
    expected = abs(np.dot(np.subtract(b, a), np.cross(np.subtract(c, a), np.subtract(d, a)))) / 6
    assert volume.sum() == pytest.approx(expected, rel=1e-12)
    _, counts = np.unique(_facets(split.tetra), axis=0, return_counts=True)
    assert counts.max() == 2
    for row in split.neighbours:
        listed = row[row >= 0]
        assert listed.size == np.unique(listed).size
